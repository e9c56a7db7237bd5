"""The plan's field reader: the shared :class:`~benchgate.common.fields.Collector` plus
engineering numbers with units, and errors as :class:`~benchgate.errors.PlanErrors`."""

from __future__ import annotations

from benchgate.common.fields import Collector
from benchgate.common.yamlpos import YNode
from benchgate.errors import PlanErrors, QuantityError
from benchgate.units.parse import parse_quantity


class PlanCollector(Collector):
    """Errors and notes found while reading one plan."""

    def __init__(self, file: str):
        super().__init__(file, PlanErrors)

    def quantity(self, node: YNode | None, path: str, unit: str, lo: float | None = None,
                 hi: float | None = None, *, positive: bool = False) -> float | None:
        """A finite number in ``unit`` (SI base units) inside ``lo … hi``; None after an error."""
        if node is None:
            return None
        try:
            q = parse_quantity(node.plain(), unit, field=path)
        except QuantityError as exc:
            self.error(node, str(exc))
            return None
        v = q.value
        if positive and v <= 0:
            self.error(node, f"{path}: must be greater than zero, got {node.value!r}")
            return None
        if (lo is not None and v < lo) or (hi is not None and v > hi):
            rng = f"{lo:g} … {hi:g} {q.unit}" if lo is not None and hi is not None else (
                f"at least {lo:g} {q.unit}" if lo is not None else f"at most {hi:g} {q.unit}")
            self.error(node, f"{path}: {node.value!r} is out of range ({rng})")
            return None
        return v
