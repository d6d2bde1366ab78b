"""Reading a measured filter's loss from a Touchstone file.

:func:`read_touchstone` returns the frequencies (Hz) and the loss ``-20 log10|S[out, in]|``
(dB) of one S-parameter.  scikit-rf parses the file from memory; the order of the records is
checked here, since scikit-rf takes a decreasing frequency as the start of noise data.
"""

from __future__ import annotations

import io
import re
import warnings
from pathlib import Path

import numpy as np

from .errors import FilterError, field_error
from .fileio import read_regular_file

__all__ = ["read_touchstone", "MAX_TOUCHSTONE_BYTES"]

# Linear: each character can be taken by one part only (the old mantissa \d+\.?\d* was quadratic).
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_VERSION2 = re.compile(r"^[ \t]*\[version\]", re.IGNORECASE | re.MULTILINE)  # [ \t], not \s: linear
#: Largest Touchstone file read, bytes (a 2-port file of 100,000 points is about 10 MB).
MAX_TOUCHSTONE_BYTES = 20_000_000


def _raw_frequencies(text: str, nports: int) -> list[float] | str:
    """Frequencies of the network-data records in file order, or a problem description.

    scikit-rf takes a decreasing frequency in a 2-port version 1 file as the
    start of noise data and silently drops what follows, so order is checked here.
    """
    version2 = _VERSION2.search(text) is not None
    in_data, lines = not version2, []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("!", 1)[0].strip()
        if line.startswith("["):  # version 2 keyword: data only under [Network Data]
            in_data = version2 and line.lower().startswith("[network data]")
        elif line and not line.startswith("#") and in_data:
            if not all(len(word) <= 64 and _NUMBER.fullmatch(word) for word in line.split()):
                return f"line {lineno} is not numeric data"  # its text is not repeated: it may be any file
            lines.append(line.split())
    if nports == 2 and not version2 and all(len(w) in (9, 5) for w in lines):  # records, then noise data
        n_s = next((i for i, w in enumerate(lines) if len(w) == 5), len(lines))
        if any(len(w) == 9 for w in lines[n_s:]):
            return "network data follow noise data (frequencies not increasing?)"
        lines = lines[:n_s]
    tokens, per_record = [word for words in lines for word in words], 1 + 2 * nports * nports
    if len(tokens) % per_record:
        return f"{len(tokens)} numbers do not make whole {nports}-port records of {per_record}"
    return [float(t) for t in tokens[::per_record]]


def read_touchstone(path: Path, port_out: int, port_in: int, field: str) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies in Hz and loss ``-20 log10|S[port_out, port_in]|`` in dB from a Touchstone file."""
    where = str(path)
    # A regular file only (never a FIFO or a device), at most MAX_TOUCHSTONE_BYTES; scikit-rf
    # then parses these bytes from memory and never opens the path itself.
    raw = read_regular_file(path, MAX_TOUCHSTONE_BYTES, error=FilterError, field=field)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("iso-8859-1")  # as scikit-rf falls back
    import skrf

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # every problem it warns about is checked below
            source = io.StringIO(text)
            source.name = path.name  # scikit-rf reads the port count from the extension (.s2p)
            net = skrf.Network(source)
    except Exception as exc:  # any reader failure is a bad file to the user
        # the reader's own words can quote the file; name only what failed
        raise field_error(FilterError, field, where, f"not a readable Touchstone file ({type(exc).__name__})") from None
    if net.nports < max(port_out, port_in):
        allowed = f"the file has {net.nports} port(s): no S{port_out}{port_in} (port_out={port_out}, port_in={port_in})"
        raise field_error(FilterError, field, where, allowed)
    f_hz = np.asarray(net.f, dtype=np.float64)
    if f_hz.size == 0:
        raise field_error(FilterError, field, where, "the file holds no frequency points")
    raw = _raw_frequencies(text, net.nports)
    if isinstance(raw, str):
        raise field_error(FilterError, field, where, raw)
    if len(raw) != f_hz.size or np.any(np.diff(raw) <= 0) or np.any(np.diff(f_hz) <= 0):
        raise field_error(FilterError, field, where, "frequencies must be strictly increasing, without repeats")
    s = np.asarray(net.s[:, port_out - 1, port_in - 1])
    if not (np.all(np.isfinite(f_hz)) and np.all(np.isfinite(s))):
        raise field_error(FilterError, field, where, "the file holds non-finite numbers")
    # Clip |S| at 1e-20 (400 dB) so a recorded exact zero stays finite for interpolation.
    return f_hz, -20.0 * np.log10(np.maximum(np.abs(s), 1e-20))


