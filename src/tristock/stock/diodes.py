"""The diode table (``diodes.csv``): zeners for a clamped square, signal diodes for set duty.

Columns: id, kind (``zener`` or ``signal``), vz_v (zener voltage at the test current, V),
iz_test_a (that test current, A), tolerance_pct (of vz_v for a zener, of vf_v for a signal
diode), tempco_mv_per_c (of vz_v for a zener, of vf_v for a signal diode; mV/°C), rz_ohm
(a zener's dynamic resistance at the test current; a signal diode's bulk series resistance,
blank meaning 0), vf_v (forward drop at 1 mA, V), power_w (rated dissipation, W), unit_cost,
stock. vz_v and iz_test_a are blank for a signal diode. Values in SI units. Rows are read by
``stock.diode_rows``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final, Literal

DiodeKind = Literal["zener", "signal"]
DIODE_KINDS: Final[tuple[DiodeKind, ...]] = ("zener", "signal")
#: The current at which vf_v is given (A).
VF_TEST_A: Final[float] = 1e-3
#: A forward drop above this (V) is no silicon junction at 1 mA: a typing error.
VF_MAX_V: Final[float] = 2.0


@dataclass(frozen=True, slots=True)
class Diode:
    """A diode part: a zener (``vz_v`` at ``iz_test_a``, dynamic resistance ``rz_ohm``) or a
    signal diode (``vz_v`` and ``iz_test_a`` None, ``rz_ohm`` its series resistance).

    ``vf_v`` is the forward drop at 1 mA (V); ``tolerance_pct`` and ``tempco_mv_per_c``
    apply to vz_v for a zener and to vf_v for a signal diode; ``power_w`` the rated
    dissipation (W).
    """

    id: str
    kind: DiodeKind
    vz_v: float | None
    iz_test_a: float | None
    tolerance_pct: float
    tempco_mv_per_c: float
    rz_ohm: float
    vf_v: float
    power_w: float
    unit_cost: float
    stock: int

    @property
    def is_zener(self) -> bool:
        return self.kind == "zener"

    @property
    def value(self) -> float:
        """The diode's defining voltage: vz_v for a zener, vf_v for a signal diode (V)."""
        return self.vz_v if self.vz_v is not None else self.vf_v
