"""Mixer level-table rules for the brute-force reference (tests/reference.py): plain floats.

The level table itself is input data (:func:`mixchart.levels.build_table`, read once into
plain lists); the rules for reading it at a drive are restated here from the documented
level model (:meth:`mixchart.levels.LevelTable.level_dbc_at` docstring; DEVELOPERS.md).
Kept apart from tests/reference.py so that the level rules have one home.
"""

from __future__ import annotations

#: Level of a vanished product, dBc: mixchart.levels.FLOOR_DBC, restated from the
#: levels.py docstring ("sit at the finite floor FLOOR_DBC = -300 dBc").
FLOOR_DBC = -300.0
#: LevelTable.level_dbc_at docstring: "offsets from the reference are clipped to +/-1000 dB".
DRIVE_CLIP_DB = 1000.0


class TableLevels:
    """``T(m, n) + (m - 1)·(P - P_ref)`` in plain floats, for a built :class:`~mixchart.levels.LevelTable`.

    The offset is clipped to +/-1000 dB and vanished entries (at the floor) stay there; the
    result is not floored (the final level is, once: :func:`shown`).
    """

    def __init__(self, table) -> None:
        self.level_table = table.level_dbc.tolist()  # plain nested lists of floats, read once
        self.rf_ref = float(table.rf_ref_dbm)
        self.conversion_loss_db = float(table.conversion_loss_db)

    def __call__(self, m: int, n: int, drive_dbm: float) -> float:
        """The level at a drive, unfloored: the analysis floors only the final level, once
        (mixchart.analysis FRAME_COLUMNS "level_dbc"; levels.LevelTable.level_dbc_at ``floored``)."""
        t = self.level_table[m][n]
        if t <= FLOOR_DBC:
            return FLOOR_DBC
        offset = min(max(drive_dbm - self.rf_ref, -DRIVE_CLIP_DB), DRIVE_CLIP_DB)
        return t + (m - 1) * offset


def shown(level_dbc: float) -> float:
    """The final level as the analysis shows it: floored once at FLOOR_DBC, -inf kept."""
    return level_dbc if level_dbc == float("-inf") else max(level_dbc, FLOOR_DBC)
