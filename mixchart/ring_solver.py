"""Quasi-static solve of diode mixer circuits: a double-balanced ring, a single-balanced pair, one diode.

The circuit is memoryless: resistive port terminations, ideal centre-tapped baluns and
Shockley diodes with series resistance, no capacitance and no transit time.  At each instant
the linear part of the circuit is a Thevenin network seen from the D diode ports,

    V(t) = E(t) - Z·I(t)                       (volts; I the diode currents, A)

built once by modified nodal analysis (:class:`LinearNetwork`), and every sample of a record
is solved for ``I`` at once:

    F(I) = Rs·I + n·V_T·log1p(I / Is) + Z·I - E = 0.

``F`` is the gradient of the network's total content
``Phi(I) = sum_k int_0^I_k V_k(i) di + I·Z·I / 2 - E·I`` (derived by hand; W. Millar's content of
a current-controlled resistive network, from memory), which is strictly convex because each
diode's V(I) rises and Z is positive semidefinite (a passive, reciprocal network).  So the
solution is unique, and a damped Newton iteration that never leaves the domain I > -Is and
never lets Phi rise converges from any start (:func:`solve_newton`).  One diode in a series
loop has the closed form of :func:`solve_single_diode` (Wright omega), which tests and the
benchmark check the Newton iteration against.

The circuits (:func:`build_network`) and their stated modelling choices:

- **Baluns**: ideal centre-tapped transformers of 1:2 turns (primary to whole secondary), so
  that in the ideal-switch limit each half-winding shows the port's own EMF and resistance,
  and the signal port sees the output termination directly: the matched case behind the
  ideal 3.92 dB conversion loss (derived by hand).  An amplitude imbalance is a turns ratio
  between the halves, so it acts on drive and load alike.  A phase imbalance turns the
  open-circuit EMFs of the two halves by +/- half the stated angle (a series source in each
  half-winding): a memoryless model cannot delay a load's current, so it acts only on a
  balun that is driven.
- **double_balanced**: four diodes in a ring a->b->c->d->a; the LO balun across a-c with its
  centre tap grounded, the RF balun across b-d with its centre tap as the IF port.
- **single_balanced**: the ring's pair a->b->c alone (a series pair across the LO balun, on
  for one LO half-cycle): the LO and the even RF harmonics balance out; the switching wave is
  0/1 (ideal conversion loss 9.94 dB).
- **single_ended**: one diode in a series loop LO - RF - diode - IF (no diplexing: a
  memoryless model has no frequency to separate the ports by).

Pure numpy and scipy; never imports a plotting or widget library.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.special import wrightomega

from .errors import CircuitError, field_error

__all__ = [
    "BOLTZMANN_J_PER_K", "ELEMENTARY_CHARGE_C", "DIODE_COUNT", "TYPICAL_DIODE", "Diode", "Balun", "Circuit",
    "LinearNetwork", "build_network", "solve_newton", "solve_single_diode", "thermal_voltage_v",
]

#: Boltzmann constant and elementary charge, exact in the SI since 2019 (BIPM, SI Brochure, 9th ed.).
BOLTZMANN_J_PER_K = 1.380649e-23
ELEMENTARY_CHARGE_C = 1.602176634e-19
#: Diodes in each topology's circuit.
DIODE_COUNT = {"double_balanced": 4, "single_balanced": 2, "single_ended": 1}
#: Driver signals of the networks, in the order of the drive matrix's columns.
DRIVERS = ("lo", "lo_skew_a", "lo_skew_c", "rf", "rf_skew_b", "rf_skew_d", "if")
#: Bounds a circuit is checked against (physical sense, common practice, no source).
MAX_IMBALANCE_DB = 6.0
MAX_PHASE_IMBALANCE_DEG = 45.0


def thermal_voltage_v(temperature_k: float) -> float:
    """Thermal voltage k·T/q, V (25.85 mV at 300 K)."""
    return BOLTZMANN_J_PER_K * temperature_k / ELEMENTARY_CHARGE_C


@dataclass(frozen=True)
class Diode:
    """A Shockley diode with series resistance: I = Is·(exp((V - I·Rs)/(n·V_T)) - 1).

    Parameters
    ----------
    is_a : float
        Saturation current, A (> 0).
    ideality : float
        Ideality factor n (>= 1: below 1 is no junction diode).
    rs_ohm : float
        Series resistance, ohm (>= 0).

    Raises
    ------
    CircuitError
        Naming the field and the value, if one is out of range or not finite.
    """

    is_a: float
    ideality: float
    rs_ohm: float

    def check(self, where: str = "diode") -> None:
        """Raise :class:`CircuitError` naming ``where.field`` if a figure is out of range."""
        for name, value, ok, allowed in (
            ("is_a", self.is_a, lambda v: 0 < v <= 1.0, "a saturation current must be > 0 A (and at most 1 A)"),
            ("ideality", self.ideality, lambda v: 1.0 <= v <= 10.0, "an ideality factor is at least 1 (at most 10)"),
            ("rs_ohm", self.rs_ohm, lambda v: 0.0 <= v <= 1e6, "a series resistance is >= 0 ohm (at most 1 Mohm)"),
        ):
            if not (isinstance(value, (int, float)) and math.isfinite(value) and ok(value)):
                raise field_error(CircuitError, f"{where}.{name}", value, allowed)

    def __post_init__(self) -> None:
        self.check()


#: Typical silicon Schottky mixer diode, medium barrier, from memory of mixer-diode data sheets
#: (not a measured part): Is 5 nA, n 1.08, Rs 6 ohm, so 0.34 V at 1 mA and 0.47 V at 10 mA.
TYPICAL_DIODE = Diode(is_a=5e-9, ideality=1.08, rs_ohm=6.0)


@dataclass(frozen=True)
class Balun:
    """A centre-tapped balun's imbalance.

    Parameters
    ----------
    amplitude_imbalance_db : float
        Half-winding 1 over half-winding 2, dB (0: balanced), within +/-6 dB.
    phase_imbalance_deg : float
        Phase between the halves' open-circuit EMFs less 180 degrees, deg, within +/-45.
    """

    amplitude_imbalance_db: float = 0.0
    phase_imbalance_deg: float = 0.0

    def check(self, where: str) -> None:
        """Raise :class:`CircuitError` naming ``where.field`` if out of range."""
        for name, value, limit in (("amplitude_imbalance_db", self.amplitude_imbalance_db, MAX_IMBALANCE_DB),
                                   ("phase_imbalance_deg", self.phase_imbalance_deg, MAX_PHASE_IMBALANCE_DEG)):
            if not (isinstance(value, (int, float)) and math.isfinite(value) and abs(value) <= limit):
                raise field_error(CircuitError, f"{where}.{name}", value, f"a finite number within +/-{limit:g}")

    def turns(self) -> tuple[float, float]:
        """Turns of the two half-windings (primary 1, whole secondary 2)."""
        ratio = 10.0 ** (self.amplitude_imbalance_db / 20.0)
        return 2.0 * ratio / (1.0 + ratio), 2.0 / (1.0 + ratio)


@dataclass(frozen=True)
class Circuit:
    """A diode mixer circuit (see the module docstring for the topologies).

    Parameters
    ----------
    topology : {"double_balanced", "single_balanced", "single_ended"}
        Which circuit.
    diodes : tuple of Diode
        One per diode (4, 2 or 1), in the order D1 a->b, D2 b->c, D3 c->d, D4 d->a.
    lo_balun, rf_balun : Balun
        The baluns' imbalance (unused by the single-ended circuit).
    lo_port_ohm, rf_port_ohm, if_port_ohm : float
        Resistive port terminations, ohm.
    temperature_k : float
        Junction temperature, K.
    """

    topology: str = "double_balanced"
    diodes: tuple[Diode, ...] = (TYPICAL_DIODE,) * 4
    lo_balun: Balun = field(default_factory=Balun)
    rf_balun: Balun = field(default_factory=Balun)
    lo_port_ohm: float = 50.0
    rf_port_ohm: float = 50.0
    if_port_ohm: float = 50.0
    temperature_k: float = 300.0

    def __post_init__(self) -> None:
        if self.topology not in DIODE_COUNT:
            raise field_error(CircuitError, "topology", self.topology, f"one of {', '.join(DIODE_COUNT)}")
        want = DIODE_COUNT[self.topology]
        if len(self.diodes) != want:
            raise field_error(CircuitError, "diodes", len(self.diodes),
                              f"a {self.topology.replace('_', '-')} circuit has {want} diode(s)")
        for k, diode in enumerate(self.diodes):
            diode.check(f"diodes[{k}]")
        self.lo_balun.check("lo_balun")
        self.rf_balun.check("rf_balun")
        for name in ("lo_port_ohm", "rf_port_ohm", "if_port_ohm"):
            value = getattr(self, name)
            if not (math.isfinite(value) and 0.1 <= value <= 1e6):
                raise field_error(CircuitError, name, value, "a port resistance from 0.1 ohm to 1 Mohm")
        if not (math.isfinite(self.temperature_k) and 1.0 <= self.temperature_k <= 1000.0):
            raise field_error(CircuitError, "temperature_k", self.temperature_k, "from 1 K to 1000 K")

    def diode_arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(Is in A, n·V_T in V, Rs in ohm), one entry per diode."""
        vt = thermal_voltage_v(self.temperature_k)
        return (np.array([d.is_a for d in self.diodes]), np.array([d.ideality * vt for d in self.diodes]),
                np.array([d.rs_ohm for d in self.diodes]))


@dataclass(frozen=True)
class LinearNetwork:
    """The linear part of a circuit, reduced to its diode ports and its port voltages.

    Attributes
    ----------
    drive : numpy.ndarray
        (D, 7): open-circuit diode voltages per unit of each driver in :data:`DRIVERS`, V/V.
    z_ohm : numpy.ndarray
        (D, D): the network's impedance seen from the diode ports (symmetric, PSD), ohm.
    port_drive, port_current : numpy.ndarray
        (3, 7) and (3, D): each port's terminal voltage (rows lo, rf, if) per unit driver and per
        ampere of diode current, V/V and V/A.  At a frequency the port's own EMF does not hold,
        it is the voltage across the port's termination.
    """

    drive: np.ndarray
    z_ohm: np.ndarray
    port_drive: np.ndarray
    port_current: np.ndarray


class _Netlist:
    """A small modified-nodal-analysis builder (ground is node "0")."""

    def __init__(self) -> None:
        self.nodes: dict[str, int] = {}
        self.rows: list[tuple] = []
        self.n_extra = 0
        self.diodes: list[tuple[str, str]] = []

    def _node(self, name: str) -> int:
        if name == "0":
            return -1
        return self.nodes.setdefault(name, len(self.nodes))

    def source(self, a: str, b: str, ohm: float, driver: str) -> None:
        """A Thevenin source: EMF ``driver`` (positive at a) behind ``ohm``, as its Norton form."""
        self.rows.append(("g", self._node(a), self._node(b), 1.0 / ohm))
        self.rows.append(("i", self._node(a), self._node(b), 1.0 / ohm, DRIVERS.index(driver)))

    def emf(self, a: str, b: str, driver: str) -> None:
        """An ideal series EMF: v(a) - v(b) = ``driver``."""
        self.rows.append(("v", self._node(a), self._node(b), self.n_extra, DRIVERS.index(driver)))
        self.n_extra += 1

    def transformer(self, windings: list[tuple[str, str, float]]) -> None:
        """An ideal transformer: v(a) - v(b) = turns·(volts per turn); sum of turns·current = 0."""
        core = self.n_extra
        self.rows.append(("x", core, [(self._node(a), self._node(b), t, core + 1 + j)
                                      for j, (a, b, t) in enumerate(windings)]))
        self.n_extra += 1 + len(windings)

    def diode(self, anode: str, cathode: str) -> None:
        self.diodes.append((anode, cathode))

    def reduce(self, ports: dict[str, tuple[str, str]]) -> LinearNetwork:
        """Solve the linear network for its diode-port and port-voltage maps."""
        for a, c in self.diodes:
            self._node(a), self._node(c)
        nn = len(self.nodes)
        size = nn + self.n_extra
        g = np.zeros((size, size))
        rhs = np.zeros((size, len(DRIVERS) + len(self.diodes)))

        def add(i: int, j: int, value: float) -> None:
            if i >= 0 and j >= 0:
                g[i, j] += value

        for row in self.rows:
            if row[0] == "g":
                _, a, b, y = row
                add(a, a, y), add(b, b, y), add(a, b, -y), add(b, a, -y)
            elif row[0] == "i":
                _, a, b, y, d = row
                if a >= 0:
                    rhs[a, d] += y
                if b >= 0:
                    rhs[b, d] -= y
            elif row[0] == "v":
                _, a, b, k, d = row
                add(a, nn + k, 1.0), add(b, nn + k, -1.0), add(nn + k, a, 1.0), add(nn + k, b, -1.0)
                rhs[nn + k, d] = 1.0
            else:
                _, core, windings = row
                for a, b, turns, k in windings:
                    add(a, nn + k, 1.0), add(b, nn + k, -1.0), add(nn + k, a, 1.0), add(nn + k, b, -1.0)
                    g[nn + k, nn + core] = -turns
                    g[nn + core, nn + k] = turns
        for k, (a, c) in enumerate(self.diodes):  # diode current leaves the anode, enters the cathode
            ia, ic = self._node(a), self._node(c)
            if ia >= 0:
                rhs[ia, len(DRIVERS) + k] -= 1.0
            if ic >= 0:
                rhs[ic, len(DRIVERS) + k] += 1.0
        sol = np.linalg.solve(g, rhs)
        node_v = np.vstack([sol[:nn], np.zeros((1, sol.shape[1]))])  # index -1: ground

        def across(a: str, b: str) -> np.ndarray:
            return node_v[self._node(a)] - node_v[self._node(b)]

        diode_v = np.array([across(a, c) for a, c in self.diodes])
        port_v = np.array([across(*ports[name]) for name in ("lo", "rf", "if")])
        nd = len(DRIVERS)
        z = -diode_v[:, nd:]
        return LinearNetwork(drive=diode_v[:, :nd], z_ohm=0.5 * (z + z.T), port_drive=port_v[:, :nd],
                             port_current=port_v[:, nd:])


def build_network(circuit: Circuit) -> LinearNetwork:
    """The linear network of ``circuit`` reduced to its diode ports (see the module docstring).

    Each port is a Thevenin source (its EMF driver behind its termination); the port voltage
    rows are its terminal voltage.

    Parameters
    ----------
    circuit : Circuit

    Returns
    -------
    LinearNetwork
    """
    net = _Netlist()
    r_lo, r_rf, r_if = circuit.lo_port_ohm, circuit.rf_port_ohm, circuit.if_port_ohm
    if circuit.topology == "single_ended":
        net.source("p1", "0", r_lo, "lo")
        net.source("p2", "p1", r_rf, "rf")
        net.diode("p2", "p3")
        net.source("0", "p3", r_if, "if")  # the IF termination from the cathode to ground
        return net.reduce({"lo": ("0", "p1"), "rf": ("p1", "p2"), "if": ("p3", "0")})
    n1, n2 = circuit.lo_balun.turns()
    net.source("lp", "0", r_lo, "lo")
    net.transformer([("lp", "0", 1.0), ("aw", "0", n1), ("0", "cw", n2)])
    net.emf("a", "aw", "lo_skew_a")
    net.emf("c", "cw", "lo_skew_c")
    m1, m2 = circuit.rf_balun.turns()
    net.source("rp", "0", r_rf, "rf")
    net.transformer([("rp", "0", 1.0), ("bw", "t", m1), ("t", "dw", m2)])
    net.emf("b", "bw", "rf_skew_b")
    net.emf("d", "dw", "rf_skew_d")
    net.source("t", "0", r_if, "if")
    for anode, cathode in (("a", "b"), ("b", "c"), ("c", "d"), ("d", "a"))[:DIODE_COUNT[circuit.topology]]:
        net.diode(anode, cathode)
    return net.reduce({"lo": ("lp", "0"), "rf": ("rp", "0"), "if": ("t", "0")})


def solve_single_diode(v_v: np.ndarray, r_ohm: float, diode: Diode, n_vt_v: float) -> np.ndarray:
    """Current of one diode behind a resistance, in closed form, A.

    Solves I = Is·(exp((V - I·(R + Rs))/(n·V_T)) - 1) as
    ``I = (n·V_T / R_t)·omega(ln(Is·R_t/(n·V_T)) + (V + Is·R_t)/(n·V_T)) - Is`` with
    R_t = R + Rs > 0 and omega the Wright omega function (``scipy.special.wrightomega``), which
    neither overflows nor loses the reverse-bias current.

    Parameters
    ----------
    v_v : numpy.ndarray
        Open-circuit voltage across the diode and its series resistance, V.
    r_ohm : float
        Resistance in series with the diode, besides its own Rs, ohm.
    diode : Diode
    n_vt_v : float
        n·V_T of the diode, V.

    Returns
    -------
    numpy.ndarray
        Diode current, A.

    References
    ----------
    Lambert W / Wright omega solution of the diode with series resistance: T. C. Banwell and
    A. Jayakumar, "Exact analytical solution for current flow through diode with series
    resistance", Electronics Letters 36 (2000), from memory.
    """
    r_t = r_ohm + diode.rs_ohm
    if r_t <= 0:
        raise field_error(CircuitError, "rs_ohm", diode.rs_ohm, "> 0 ohm in all with the loop (no series resistance)")
    arg = math.log(diode.is_a * r_t / n_vt_v) + (np.asarray(v_v, dtype=float) + diode.is_a * r_t) / n_vt_v
    return n_vt_v / r_t * np.real(wrightomega(arg)) - diode.is_a


def _content(w: np.ndarray, e: np.ndarray, z: np.ndarray, i_s: np.ndarray, nvt: np.ndarray,
             rs: np.ndarray) -> np.ndarray:
    """Total content Phi of each sample (columns) at currents I = w - Is, J."""
    i = w - i_s
    y = w / i_s
    own = rs * i * i / 2.0 + nvt * i_s * (y * np.log(y) - y + 1.0)
    return own.sum(axis=0) + 0.5 * (i * (z @ i)).sum(axis=0) - (e * i).sum(axis=0)


def _cholesky_solve(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve a[:, :, s]·x[:, s] = b[:, s] for many small symmetric positive-definite systems (D, D, S)."""
    d = a.shape[0]
    low = [[None] * d for _ in range(d)]
    for j in range(d):
        diag = a[j, j] - sum(low[j][k] ** 2 for k in range(j)) if j else a[j, j]
        low[j][j] = np.sqrt(diag)
        for i in range(j + 1, d):
            acc = a[i, j] - sum(low[i][k] * low[j][k] for k in range(j)) if j else a[i, j]
            low[i][j] = acc / low[j][j]
    y = [None] * d
    for i in range(d):
        y[i] = (b[i] - sum(low[i][k] * y[k] for k in range(i))) / low[i][i] if i else b[0] / low[0][0]
    x = [None] * d
    for i in reversed(range(d)):
        tail = sum(low[k][i] * x[k] for k in range(i + 1, d)) if i < d - 1 else 0.0
        x[i] = (y[i] - tail) / low[i][i]
    return np.array(x)


def _line_search(wa, ea, f, step, alpha, z, i_s, nvt, rs) -> np.ndarray:
    """Halve each sample's step until its content does not rise (Armijo's rule, or within rounding a
    residual that does not grow); returns the accepted points (D, S)."""
    eps = np.finfo(float).eps
    phi0 = _content(wa, ea, z, i_s, nvt, rs)
    slope = (f * step).sum(axis=0)
    norm0 = np.abs(f).max(axis=0)
    ok = np.zeros(alpha.size, dtype=bool)
    trial = wa
    for _ in range(60):
        trial = np.where(ok, trial, wa + alpha * step)
        phi = _content(trial, ea, z, i_s, nvt, rs)
        good = phi <= phi0 + 1e-4 * alpha * slope
        rounding = ~good & (np.abs(phi - phi0) <= 64 * eps * (np.abs(phi0) + np.abs(ea * (trial - i_s)).sum(0)))
        if rounding.any():
            it = trial - i_s
            f_t = rs * it + nvt * np.log(trial / i_s) + z @ it - ea
            good |= rounding & (np.abs(f_t).max(axis=0) <= norm0)
        ok |= good
        if ok.all():
            break
        alpha = np.where(ok, alpha, 0.5 * alpha)
    return trial


@dataclass(frozen=True)
class NewtonReport:
    """How a Newton solve went: iterations, the largest last step (relative to the current), samples."""

    iterations: int
    last_step: float
    samples: int


def solve_newton(e_v: np.ndarray, z_ohm: np.ndarray, circuit: Circuit, *, w0_a: np.ndarray | None = None,
                 max_iterations: int = 200, rtol: float = 1e-14) -> tuple[np.ndarray, np.ndarray, NewtonReport]:
    """Solve ``Rs·I + n·V_T·log1p(I/Is) + Z·I = E`` for every sample by damped Newton iteration.

    The unknown is ``w = I + Is`` (> 0), which keeps a reverse-biased diode's junction voltage
    exact where ``I`` itself rounds to -Is.  Each step is the Newton step, shortened to stay
    inside w > 0 (at most 99 % of the way to the bound) and halved until the total content Phi
    does not rise (Armijo's rule; within rounding, a residual that does not grow is taken
    instead).  A sample has converged when its last step moved no current by more than
    ``rtol`` of the largest current in it (the error left is then of the order of that step
    squared); samples that have converged drop out.

    Parameters
    ----------
    e_v : numpy.ndarray
        (D, S) open-circuit diode voltages, V: one column per sample.
    z_ohm : numpy.ndarray
        (D, D) network impedance at the diode ports, ohm.
    circuit : Circuit
        Supplies the diodes.
    w0_a : numpy.ndarray, optional
        (D, S) starting values of I + Is, A (default Is: no current).
    max_iterations : int
        Most Newton steps (a sample still unconverged then is an error).
    rtol : float
        Convergence: the last step, relative to the sample's largest current.

    Returns
    -------
    i_a : numpy.ndarray
        (D, S) diode currents, A.
    w_a : numpy.ndarray
        (D, S) the same as I + Is, A (full relative precision in reverse bias).
    report : NewtonReport

    Raises
    ------
    CircuitError
        If a sample has not converged after ``max_iterations`` steps.
    """
    i_s, nvt, rs = (a[:, None] for a in circuit.diode_arrays())
    e = np.asarray(e_v, dtype=float)
    if w0_a is None:
        w = np.broadcast_to(i_s, e.shape).copy()
    else:
        w = np.maximum(np.array(w0_a, dtype=float), 1e-300)
    z = np.asarray(z_ohm, dtype=float)
    d = z.shape[0]
    active = np.arange(e.shape[1])
    last_step = np.zeros(e.shape[1])
    iterations = 0
    for iterations in range(1, max_iterations + 1):  # noqa: B007 (reported below)
        wa, ea = w[:, active], e[:, active]
        ia = wa - i_s
        f = rs * ia + nvt * np.log(wa / i_s) + z @ ia - ea
        jac = np.repeat(z[:, :, None], active.size, axis=2)
        for k in range(d):
            jac[k, k] += rs[k] + nvt[k] / wa[k]
        step = -_cholesky_solve(jac, f)
        with np.errstate(divide="ignore"):
            room = np.where(step < 0, 0.99 * wa / np.where(step < 0, -step, 1.0), np.inf)
        alpha = np.minimum(1.0, room.min(axis=0))
        size0 = np.abs(ia).max(axis=0) + i_s.max()
        # far from the solution the step is checked against the content; near it (a step under 1e-4 of
        # the current and inside the bound) Newton's quadratic convergence needs no check
        far = np.flatnonzero((alpha < 1.0) | (np.abs(step).max(axis=0) > 1e-4 * size0))
        trial = wa + alpha * step
        if far.size:
            trial[:, far] = _line_search(wa[:, far], ea[:, far], f[:, far], step[:, far], alpha[far], z,
                                         i_s, nvt, rs)
        moved = np.abs(trial - wa).max(axis=0)
        w[:, active] = trial
        size = np.abs(trial - i_s).max(axis=0) + i_s.max()
        last_step[active] = moved / size
        done = moved <= rtol * size
        active = active[~done]
        if active.size == 0:
            break
    if active.size:
        raise CircuitError(
            f"solver: the circuit's Newton solve did not converge in {max_iterations} iterations "
            f"({active.size} of {e.shape[1]} samples; largest last step {float(last_step[active].max()):.3g} "
            "of the current); check the diode figures and the drives"
        )
    return w - i_s, w, NewtonReport(iterations=iterations, last_step=float(last_step.max(initial=0.0)),
                                    samples=int(e.shape[1]))
