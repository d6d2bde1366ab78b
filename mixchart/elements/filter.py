"""A filter stage: any filter kind, fixed or tracking the wanted signal at its node.

A band takes the filter's least loss over the band (:meth:`mixchart.filters.Filter.least_atten_db`),
never the loss at one point, so a notch or an elliptic zero inside the band cannot make a spur
look weaker than it is.  The wanted signal takes the loss at its centre.  A tracking filter is
centred on the wanted signal at its own node.
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from ..context import capped
from ..filters import FilterSpec, build_filter
from .base import ElementKind, Flow, Inverse, Node, WarningRecord

__all__ = ["FilterStage", "FilterElement", "KIND"]


class FilterStage(BaseModel):
    """A filter between two stages (a preselector, an IF filter, an output filter)."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)

    kind: Literal["filter"] = "filter"
    name: str | None = Field(default=None, min_length=1, max_length=60,
                             description="Name in paths and tables; default 'filter <k>'.")
    filter: FilterSpec = Field(description="The filter; a tracking one is centred on the wanted signal at its node.")


class FilterElement:
    """The element of a :class:`FilterStage`."""

    kind = "filter"

    def __init__(self, spec: FilterStage, index: int, name: str, base_dir) -> None:
        self.name = name
        self.index = index
        self.field = f"chain.{index}.filter"
        self.filter = build_filter(spec.filter, base_dir=base_dir, field_prefix=self.field + ".")
        self.tracks = bool(getattr(self.filter, "tracks_channel", False))

    def _centre(self, node: Node, shape: tuple[int, ...]) -> np.ndarray | None:
        return np.broadcast_to(node.f_hz, shape) if self.tracks else None

    def band_loss_db(self, low_hz: np.ndarray, high_hz: np.ndarray, node: Node) -> np.ndarray:
        """Least loss over each band (R, C), dB."""
        shape = np.broadcast_shapes(np.shape(low_hz), np.shape(high_hz))
        return capped(self.filter.least_atten_db(low_hz, high_hz, self._centre(node, shape)), self.field, low_hz)

    def point_loss_db(self, f_hz: np.ndarray, node: Node) -> np.ndarray:
        """Loss at ``f_hz`` (C,), dB."""
        return capped(self.filter.atten_db(f_hz, node.f_hz if self.tracks else None), self.field, f_hz)

    def prepare(self, node: Node) -> None:
        """Nothing to build ahead of the sweep."""

    def wanted(self, node: Node) -> Node:
        return Node(node.channel_hz, node.f_hz, node.level_dbm - self.point_loss_db(node.f_hz, node),
                    node.inverted, node.bandwidth_hz, node.lo_hz)

    def forward(self, flow: Flow, node_in: Node, node_out: Node) -> Flow:
        level = flow.level_dbm - self.band_loss_db(flow.low_hz, flow.high_hz, node_in)
        level[0] = node_out.level_dbm  # the wanted signal: the loss at its centre
        return Flow(flow.low_hz, flow.high_hz, level, flow.inverted, np.arange(flow.n_rows),
                    np.full(flow.n_rows, "", dtype=object), np.zeros(flow.n_rows, dtype=int), np.ones(flow.n_rows))

    def level_bound(self, level_dbm: np.ndarray) -> np.ndarray:
        return level_dbm  # a passive filter never adds

    def level_maps(self) -> list[tuple[float, float]]:
        return [(1.0, 0.0)]

    def inverse(self, low_hz: np.ndarray, high_hz: np.ndarray, node_in: Node, node_out: Node) -> Inverse:
        rows = low_hz.shape[0]
        return Inverse(low_hz, high_hz, np.ones(low_hz.shape, dtype=bool), np.ones(rows),
                       -self.band_loss_db(low_hz, high_hz, node_in), np.arange(rows),
                       np.full(rows, "", dtype=object), np.zeros(rows, dtype=int))

    def warnings(self) -> list[WarningRecord]:
        out = []
        if getattr(self.filter, "max_atten_is_default", False):
            value = getattr(self.filter, "max_atten_db", None)
            out.append(WarningRecord("assumed-ultimate-rejection", f"{self.field}.max_atten_db", value,
                                     f"{self.field}.max_atten_db: not given; {value:g} dB assumed for {self.name}'s "
                                     "ultimate rejection (common practice, no source)"))
        return out


def _build(spec: FilterStage, index: int, name: str, plan, base_dir) -> FilterElement:
    return FilterElement(spec, index, name, base_dir)


KIND = ElementKind(kind="filter", spec=FilterStage, build=_build, form_fields=("name", "filter"), words="filter")
