"""Supply rails and the op amp's terms: what an output stage can swing to, and the numbers the
physics takes from a catalogued op-amp channel (swing headroom, slew, delay, GBW, offset,
bias, output current, supply range). SI units: volt, ampere, second, hertz, V/s."""

from __future__ import annotations

import math
from dataclasses import dataclass

from tristock.spec.model import SupplySpec
from tristock.stock.parts import OpAmp

inf = math.inf


@dataclass(frozen=True)
class Rails:
    """Supply rails in volts. ``v_neg == 0`` means single supply.

    ``v_ref`` is the reference node (the integrator's + input and the comparator's - input).
    None means 0 V for split rails (``v_neg < 0 < v_pos``) and mid-rail, (V+ + V-)/2, for a
    single supply.
    """

    v_pos: float
    v_neg: float
    v_ref: float | None = None

    def __post_init__(self) -> None:
        for name in ("v_pos", "v_neg"):
            if not math.isfinite(getattr(self, name)):
                raise ValueError(
                    f"{name}: must be a finite voltage in V, got {getattr(self, name)}"
                )
        if not self.v_pos > self.v_neg:
            raise ValueError(
                f"v_pos: the positive rail ({self.v_pos} V) must be above the negative rail "
                f"({self.v_neg} V)"
            )
        ref = self.reference_v
        if not (math.isfinite(ref) and self.v_neg < ref < self.v_pos):
            raise ValueError(
                f"v_ref: the reference ({ref} V) must lie strictly between the rails "
                f"({self.v_neg} V and {self.v_pos} V)"
            )

    @property
    def reference_v(self) -> float:
        """The reference node's voltage (V)."""
        if self.v_ref is not None:
            return self.v_ref
        if self.v_neg < 0.0 < self.v_pos:
            return 0.0
        return (self.v_pos + self.v_neg) / 2.0

    @property
    def span_v(self) -> float:
        """Total supply span V+ - V- (V), what the op amp's supply range is rated for."""
        return self.v_pos - self.v_neg

    @property
    def is_single_supply(self) -> bool:
        return self.v_neg == 0.0


@dataclass(frozen=True)
class OpAmpModel:
    """The numbers the physics needs for one op-amp channel (both channels alike).

    ``swing_pos_v``/``swing_neg_v``: output headroom from V+ and V- (V). Slew rates in V/s,
    rise (square going up) and fall separately. ``delay_s``: comparator propagation delay
    (s), threshold crossing to the start of the output slew (``parts.DELAY_MEANING``).
    ``gbw_hz``: gain-bandwidth product (Hz) of each channel, the integrator's and the
    comparator's.
    ``offset_v``/``bias_a``: the integrator's input offset Vos1 (V, + input high) and the
    bias current Ib1 into its inverting pin (A). ``comparator_offset_v``: Vos2 (V, the
    comparator switches when its + input is Vos2 above the reference);
    ``comparator_bias_a``: Ib2 into the comparator's + input (A). ``output_a``: output
    current it holds its swing at (A). ``supply_min_v``/``supply_max_v``: total span (V).
    """

    swing_pos_v: float
    swing_neg_v: float
    slew_rise_v_per_s: float
    slew_fall_v_per_s: float
    delay_s: float
    gbw_hz: float
    offset_v: float = 0.0
    bias_a: float = 0.0
    comparator_offset_v: float = 0.0
    comparator_bias_a: float = 0.0
    output_a: float = inf
    supply_min_v: float = 0.0
    supply_max_v: float = inf

    def __post_init__(self) -> None:
        for name in ("swing_pos_v", "swing_neg_v", "delay_s"):
            v = getattr(self, name)
            if not (math.isfinite(v) and v >= 0.0):
                raise ValueError(f"{name}: must be finite and >= 0, got {v}")
        for name in ("slew_rise_v_per_s", "slew_fall_v_per_s", "gbw_hz", "output_a"):
            v = getattr(self, name)
            if not v > 0.0:
                raise ValueError(f"{name}: must be > 0 (inf allowed), got {v}")
        for name in ("offset_v", "bias_a", "comparator_offset_v", "comparator_bias_a"):
            v = getattr(self, name)
            if not math.isfinite(v):
                raise ValueError(f"{name}: must be finite, got {v}")
        if not 0.0 <= self.supply_min_v <= self.supply_max_v:
            raise ValueError(
                f"supply_min_v: need 0 <= supply_min_v ({self.supply_min_v} V) <= supply_max_v "
                f"({self.supply_max_v} V)"
            )

    @classmethod
    def from_part(cls, part: OpAmp) -> OpAmpModel:
        """The model of a catalogued part: rise and fall slew both the catalogued slew rate,
        the typical offset and bias current taken with a + sign for both channels."""
        slew = part.slew_v_per_s
        return cls(
            swing_pos_v=part.swing_pos_v,
            swing_neg_v=part.swing_neg_v,
            slew_rise_v_per_s=slew,
            slew_fall_v_per_s=slew,
            delay_s=part.delay_s,
            gbw_hz=part.gbw_hz,
            offset_v=part.offset_v,
            bias_a=part.bias_a,
            comparator_offset_v=part.offset_v,
            comparator_bias_a=part.bias_a,
            output_a=part.output_a,
            supply_min_v=part.supply_min_v,
            supply_max_v=part.supply_max_v,
        )


def square_levels(rails: Rails, opamp: OpAmpModel) -> tuple[float, float]:
    """VH = V+ - swing_pos - Vref, VL = Vref - (V- + swing_neg), both measured from the
    reference (V). Raises ValueError when either is not positive (the output cannot swing
    past the reference on that side)."""
    ref = rails.reference_v
    vh = rails.v_pos - opamp.swing_pos_v - ref
    vl = ref - (rails.v_neg + opamp.swing_neg_v)
    if not vh > 0.0:
        raise ValueError(
            f"swing_pos_v: V+ ({rails.v_pos} V) less its headroom ({opamp.swing_pos_v} V) does "
            f"not reach above the reference ({ref} V)"
        )
    if not vl > 0.0:
        raise ValueError(
            f"swing_neg_v: V- ({rails.v_neg} V) plus its headroom ({opamp.swing_neg_v} V) does "
            f"not reach below the reference ({ref} V)"
        )
    return vh, vl


def rails_from_supply(supply: SupplySpec, scale: float = 1.0) -> Rails:
    """Rails scaled by ``scale`` (1 ± tolerance for rail corners).

    A single-supply reference given in the spec stays where it is set (a regulated
    reference); a default mid-rail reference follows the rail.
    """
    v_ref = supply.reference_v if supply.negative_v == 0 else None
    return Rails(supply.positive_v * scale, supply.negative_v * scale, v_ref)
