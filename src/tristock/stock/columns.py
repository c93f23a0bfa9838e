"""What the part tables hold, and how a problem in them is reported.

A catalog is a directory with ``resistors.csv``, ``capacitors.csv``, ``opamps.csv`` and,
optionally, ``pots.csv``, ``comparators.csv`` and ``diodes.csv``; :data:`COLUMNS` lists each
table's columns (any order in the file).
A problem prints as ``file:line: column: message``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

#: Column sets of each table, in the order the generator writes them.
COLUMNS: Final[dict[str, tuple[str, ...]]] = {
    "resistors": (
        "id",
        "value_ohm",
        "tolerance_pct",
        "tempco_ppm",
        "series",
        "power_w",
        "package",
        "unit_cost",
        "stock",
    ),
    "capacitors": (
        "id",
        "value_f",
        "dielectric",
        "tolerance_pct",
        "tempco_ppm",
        "temp_band_pct",
        "voltage_v",
        "package",
        "unit_cost",
        "stock",
    ),
    "opamps": (
        "id",
        "channels",
        "supply_min_v",
        "supply_max_v",
        "swing_pos_v",
        "swing_neg_v",
        "slew_v_per_us",
        "gbw_hz",
        "delay_s",
        "offset_v",
        "bias_a",
        "output_a",
        "unit_cost",
        "stock",
    ),
    "pots": ("id", "value_ohm", "tolerance_pct", "tempco_ppm", "kind", "unit_cost", "stock"),
    # comparators.csv (comparator-IC Schmitt stage; ``stock.comparators``)
    "comparators": (
        "id",
        "channels",
        "output",
        "supply_min_v",
        "supply_max_v",
        "delay_s",
        "rise_s",
        "fall_s",
        "vol_v",
        "voh_headroom_v",
        "offset_v",
        "bias_a",
        "output_a",
        "input_cm_neg_v",
        "input_cm_pos_headroom_v",
        "unit_cost",
        "stock",
    ),
    # diodes.csv (zener and signal diodes, stock.diodes)
    "diodes": (
        "id",
        "kind",
        "vz_v",
        "iz_test_a",
        "tolerance_pct",
        "tempco_mv_per_c",
        "rz_ohm",
        "vf_v",
        "power_w",
        "unit_cost",
        "stock",
    ),
}

#: Columns a table may leave out altogether (an absent column reads as blank cells): the op
#: amps' input common-mode range (blank: the input reaches that rail).
OPTIONAL_COLUMNS: Final[dict[str, tuple[str, ...]]] = {
    "opamps": ("input_cm_neg_v", "input_cm_pos_headroom_v"),
}

#: Columns a table may have besides COLUMNS; each stands in for the required column it maps
#: to (a row gives one of the two): opamps.csv may give delay_to_mid_s instead of delay_s.
ALTERNATIVE_COLUMNS: Final[dict[str, dict[str, str]]] = {
    "opamps": {"delay_to_mid_s": "delay_s"},
}

#: Table kinds in load order; the file of a kind is ``<kind>.csv``.
KINDS: Final[tuple[str, ...]] = (
    "resistors",
    "capacitors",
    "opamps",
    "pots",
    "comparators",
    "diodes",
)
OPTIONAL_KINDS: Final[frozenset[str]] = frozenset({"pots", "comparators", "diodes"})


@dataclass(frozen=True, slots=True)
class CatalogIssue:
    """One problem in a table: prints as ``file:line: column: message``.

    ``line`` is None for a problem with a whole file (missing, unreadable); ``column`` is None
    for a problem with a whole row (wrong number of fields, bad quoting).
    """

    file: str
    line: int | None
    column: str | None
    message: str

    def __str__(self) -> str:
        where = self.file if self.line is None else f"{self.file}:{self.line}"
        if self.column is None:
            return f"{where}: {self.message}"
        return f"{where}: {self.column}: {self.message}"


class CatalogError(ValueError):
    """The catalog did not load; ``errors`` lists every problem found, in file and line order."""

    def __init__(self, errors: list[CatalogIssue]) -> None:
        self.errors = list(errors)
        count = len(self.errors)
        head = f"{count} problem{'s' if count != 1 else ''} in the catalog"
        super().__init__("\n".join([head, *(str(e) for e in self.errors)]))
