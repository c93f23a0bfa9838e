"""The comparator-IC loop's search form: rows (U1, U2[, R5], R1, R2, R3, C1), the stage being
U1 + U2 (+ R5) (``stages``: the options and their ``StageLoop``; ``stagelevels``: the square
levels over every row a stage can be in).

A row is valid where ``physics.oscillates`` (both drives reach their thresholds), an
open-drain row meets the stiffness rule (``stagelevels.PULL_UP_LOAD_SHARE``: R5·(1/R3 +
1/R2) ≤ ρ, a design rule of the circuit searched) and its triangle stays inside U1's output
range: the model does not clip the integrator, and a board whose triangle leaves that range
fails its swing check. A valid row's inputs also stay inside their common-mode ranges, with
the numbers of the check ``checks.input_checks`` (``commonmode``: U2's + input just after
each switch, its - input and U1's inputs at the reference), and no stage lists a divider
pair above its ``k_ceiling`` (``divider_limit``: the search's k windows stop there).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.comparator_schmitt.commonmode import inside_common_mode
from tristock.circuits.comparator_schmitt.physics import (
    high_level,
    oscillates,
    predict,
    pull_up_source,
)
from tristock.circuits.comparator_schmitt.spread import EDGE_SPREAD
from tristock.circuits.comparator_schmitt.stagelevels import (
    load_box,
    meets_pull_up_rule,
    probe_error_voltage,
    sources,
    stage_levels,
)
from tristock.circuits.comparator_schmitt.stages import ComparatorStage, make_stage, stage_options
from tristock.circuits.opamp_schmitt.spread import DELAY_SPREAD, SLEW_SPREAD
from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import Rails, rails_from_supply
from tristock.circuits.searchform import F64, I64, Exclusion, RowModel, SearchForm, StageOption
from tristock.stock.comparators import Comparator
from tristock.stock.parts import OpAmp, Resistor

if TYPE_CHECKING:
    from tristock.circuits.topology import BoardParts, Topology
    from tristock.spec.model import Spec
    from tristock.stock.catalog import Catalog


class ComparatorSchmittForm(SearchForm):
    """Rows (U1, U2[, R5], R1, R2, R3, C1); ``topology`` is the comparator-IC loop.

    ``open_drain``: whether open-drain comparators (with a pull-up R5 from the resistor
    table) are stage options (the registered form: yes). Push-pull stages have fixed levels
    and the loop ``looptiming.loop_timing`` models (to 1e-12, tested); an open-drain stage's
    high level follows the row's load, held by the stiffness rule (``stagelevels.
    PULL_UP_LOAD_SHARE``, part of the acceptance: a row that breaks it is not valid) to an
    interval about ρ/(1 + ρ) wide; the amplitude's lower end takes the overshoot time's
    lower end (``stages``). Both are proven (``bounds_proven``)."""

    stage_designators = ("U1", "U2", "R5")
    #: The probes scale slew in V/s; a comparator's edges are times (kept out: exact).
    probes_in_box = False

    def __init__(
        self, topology: Topology, *, open_drain: bool = True, common_mode: bool = True
    ) -> None:
        self.topology = topology
        self.open_drain = open_drain
        self.common_mode = common_mode

    def divider_limit(self, stage: StageOption) -> tuple[float, Exclusion | None]:
        """The stage's ``k_ceiling`` (``commonmode.divider_ceiling``: above it U2's + input
        leaves its common-mode range in every row), with the exclusion naming U2; none
        (inf) without the common-mode condition (``common_mode`` False)."""
        if not (self.common_mode and isinstance(stage, ComparatorStage)):
            return math.inf, None
        k_max, words = stage.k_ceiling
        return k_max, Exclusion("U2", stage.comparator.id, words)

    def stage_options(
        self, spec: Spec, catalog: Catalog, r3_values: F64, deadline: float = math.inf
    ) -> tuple[list[StageOption], list[Exclusion]]:
        """``stages.stage_options``: U1 × U2 (× R5), each usable on the nominal rails."""
        found, excl = stage_options(spec, catalog, r3_values, deadline)
        if self.open_drain:
            return list(found), excl
        why = (
            "open-drain comparators are modelled, checked and simulated but not searched "
            "yet (their levels follow each row's load)"
        )
        excl += [Exclusion("U2", c.id, why) for c in catalog.comparators if c.is_open_drain]
        excl = [e for e in excl if e.designator != "R5"]
        kept = [s for s in found if "R5" not in s.parts]
        return [dataclasses.replace(s, index=n) for n, s in enumerate(kept)], excl

    def level_bounds(
        self, stages: Sequence[StageOption], u: I64, rails: Rails
    ) -> tuple[F64, F64, F64, F64]:
        """(vh_lo, vh_hi, vl_lo, vl_hi) on ``rails`` for the worst-case probes
        (``stagelevels.stage_levels``): the open-drain box widened by the resistors' moves,
        Ve as the probes take it (Ib1·R3, offsets at 0 V), their delays up to DELAY_SPREAD
        longer."""
        distinct, where = np.unique(np.asarray(u, dtype=np.int64), return_inverse=True)
        table = np.array(
            [
                stage_levels(
                    s.opamp,
                    s.comparator,
                    s.pull_up_ohm,
                    s.load.at_probes(),
                    rails,
                    probe_error_voltage(s.opamp, s.load),
                    1.0 + DELAY_SPREAD,
                )
                for s in _stages(stages, distinct)
            ],
            dtype=np.float64,
        ).reshape(-1, 4)[where]
        return table[:, 0], table[:, 1], table[:, 2], table[:, 3]

    def row_levels(
        self, stages: Sequence[StageOption], u: I64, rails: Rails, values: Mapping[str, F64]
    ) -> tuple[F64, F64]:
        """VH = vs0 of ``physics.high_level``, the high level with the triangle at the
        reference (Hs for push-pull; through R5 into the row's R1 + R2 and R3 for open
        drain, U1's offset as catalogued); VL = L (``stagelevels.sources``)."""
        cols = _columns(stages, u, rails)
        vs0, _ = high_level(
            values["R1"], values["R2"], values["R3"], cols["hs"], cols["r5"], cols["vos1"]
        )
        return np.asarray(vs0), cols["low"]

    def predict_rows(
        self,
        stages: Sequence[StageOption],
        u: I64,
        values: Mapping[str, F64],
        levels: tuple[F64, F64],
        *,
        slew_scale: F64 | float = 1.0,
        delay_scale: F64 | float = 1.0,
        centred_offsets: bool = False,
    ) -> RowModel:
        """``physics.predict`` of each valid row (module docstring); the high source Hs from
        ``levels`` through ``physics.pull_up_source``, the inverse of ``row_levels``. A
        probe's slew factor 1 + SLEW_SPREAD·z moves U2's edges to the same end of their
        spread, ·(1 - EDGE_SPREAD·z); its delay factor scales U2's delay. ``slew_rise`` and
        ``slew_fall`` are U1's slew rate (the integrator's)."""
        cols = _columns(stages, u, None)
        r1, r2, r3, c1 = (np.asarray(values[d], dtype=float) for d in ("R1", "R2", "R3", "C1"))
        vh, low = (np.asarray(x, dtype=float) for x in levels)
        hs = pull_up_source(r1, r2, r3, vh, cols["r5"], cols["vos1"])
        edges = 1.0 - EDGE_SPREAD * (np.asarray(slew_scale, dtype=float) - 1.0) / SLEW_SPREAD
        zero = np.zeros(len(u))
        errors = {
            "pull_up": cols["r5"],
            "vos1": zero if centred_offsets else cols["vos1"],
            "ib1": cols["ib1"],
            "vos2": zero if centred_offsets else cols["vos2"],
            "ib2": cols["ib2"],
        }
        with np.errstate(invalid="ignore", divide="ignore"):
            ok = oscillates(r1, r2, r3, hs, low, **errors) & np.isfinite(c1) & (c1 > 0.0)
        ok &= meets_pull_up_rule(cols["r5"], r2, r3)
        out = Prediction(*(np.full(len(u), np.nan) for _ in Prediction._fields))
        if ok.any():
            part = predict(
                *(x[ok] for x in (r1, r2, r3, c1, hs, low)),
                **{name: x[ok] for name, x in errors.items()},
                delay=np.broadcast_to(cols["delay"] * delay_scale, (len(u),))[ok],
                rise=np.broadcast_to(cols["rise"] * edges, (len(u),))[ok],
                fall=np.broadcast_to(cols["fall"] * edges, (len(u),))[ok],
                gbw=cols["gbw"][ok],
            )
            for name in Prediction._fields:
                getattr(out, name)[ok] = np.asarray(getattr(part, name))
            # U1's output range on the rails the levels stand for
            top = hs + cols["headroom"] - cols["swing_pos"]
            bottom = cols["swing_neg"] - (low + cols["vol"])
            with np.errstate(invalid="ignore"):
                clips = (np.asarray(out.peak_high_v) > top) | (np.asarray(out.peak_low_v) < bottom)
            for name in Prediction._fields:
                getattr(out, name)[clips] = np.nan
            ok &= ~clips
            if self.common_mode:  # the check's input common-mode ranges (``commonmode``)
                outside = ok & ~_inside_common_mode(out, ok, (r1, r2, r3, hs, low), cols)
                for name in Prediction._fields:
                    getattr(out, name)[outside] = np.nan
                ok &= ~outside
        ve = errors["vos1"] + cols["ib1"] * r3
        return RowModel(out, ve, ok, cols["slew1"], cols["slew1"])

    def peak_limits(
        self, stages: Sequence[StageOption], u: I64, levels: tuple[F64, F64]
    ) -> tuple[F64, F64]:
        """The square levels for push-pull rows; none (inf) for open-drain rows, whose high
        level follows the triangle (the model's ground there is U1's output range, which
        ``predict_rows``' validity holds)."""
        pulled = _columns(stages, u, None)["r5"] > 0.0
        top, bottom = (np.asarray(x, dtype=float) for x in levels)
        return np.where(pulled, np.inf, top), np.where(pulled, np.inf, bottom)

    def board_stage(self, board: BoardParts, spec: Spec) -> StageOption | str:
        """The stage of the board's U1, U2 (and R5) on the spec's nominal rails (no stock or
        rating checks): levels over the spec's resistance range widened to hold the board's
        own R1, R2, R3 (a board built from a stage option gets that option's levels and
        timing back, but for a stalled open-drain stage, whose vh_lo follows the Ve range),
        Ve over the board's R3."""
        parts = board.parts()
        u1, u2, r3 = parts.get("U1"), parts.get("U2"), parts.get("R3")
        if not (isinstance(u1, OpAmp) and isinstance(u2, Comparator)):
            return "U1, U2: a comparator-IC board needs an op amp U1 and a comparator U2"
        if not isinstance(r3, Resistor):
            return "R3: a comparator-IC board needs its integrator resistor"
        r5 = parts.get("R5") if u2.is_open_drain else None
        if u2.is_open_drain and not isinstance(r5, Resistor):
            return f"R5: the open-drain U2 {u2.id} needs a pull-up resistor"
        assert r5 is None or isinstance(r5, Resistor)
        rails = rails_from_supply(spec.supply)
        hs, low = sources(u2, rails)
        if not (hs > 0.0 and low > 0.0):
            return "its output cannot swing both sides of the reference on these rails"
        own = [p for d in ("R1", "R2", "R3") if isinstance(p := parts.get(d), Resistor)]
        box = load_box(spec, np.array([r.value_ohm for r in own]), np.array([r3.value_ohm]), own)
        ve = u1.offset_v + u1.bias_a * r3.value_ohm
        return make_stage(0, u1, u2, r5, box, rails, (ve, ve))


def _stages(stages: Sequence[StageOption], picked: I64) -> list[ComparatorStage]:
    """The stage options ``stages[n]`` for n in ``picked``, checked to be comparator-IC ones."""
    out = []
    for s in (stages[n] for n in picked):
        if not isinstance(s, ComparatorStage):
            raise TypeError(f"U2: stage {s.key} is not a comparator-IC stage")
        out.append(s)
    return out


def _inside_common_mode(
    pred: Prediction, ok: NDArray[np.bool_], row: tuple[F64, F64, F64, F64, F64],
    cols: dict[str, F64],
) -> NDArray[np.bool_]:  # fmt: skip
    """``commonmode.inside_common_mode`` of the rows where ``ok`` (False elsewhere); ``row``
    holds each row's R1, R2, R3, Hs and L."""
    inside = np.zeros(len(ok), dtype=bool)
    r1, r2, r3, hs, low = (x[ok] for x in row)
    inside[ok] = inside_common_mode(
        Prediction(*(np.asarray(getattr(pred, f))[ok] for f in Prediction._fields)),
        r1, r2, r3, cols["r5"][ok], hs, low, {name: x[ok] for name, x in cols.items()},
    )  # fmt: skip
    return inside


def _cm(value: float | None) -> float:
    """A common-mode limit as a column value: NaN for a blank (the input reaches its rail)."""
    return math.nan if value is None else value


def _columns(stages: Sequence[StageOption], u: I64, rails: Rails | None) -> dict[str, F64]:
    """Each row's stage constants (SI units), and its Hs and L on ``rails`` if given."""
    distinct, where = np.unique(np.asarray(u, dtype=np.int64), return_inverse=True)
    rows = _stages(stages, distinct)
    table: dict[str, list[float]] = {
        "r5": [s.pull_up_ohm for s in rows],
        "vos1": [s.opamp.offset_v for s in rows],
        "ib1": [s.opamp.bias_a for s in rows],
        "gbw": [s.opamp.gbw_hz for s in rows],
        "slew1": [s.opamp.slew_v_per_s for s in rows],
        "swing_pos": [s.opamp.swing_pos_v for s in rows],
        "swing_neg": [s.opamp.swing_neg_v for s in rows],
        "vos2": [s.comparator.offset_v for s in rows],
        "ib2": [s.comparator.bias_a for s in rows],
        "delay": [s.comparator.delay_s for s in rows],
        "rise": [s.comparator.rise_s for s in rows],
        "fall": [s.comparator.fall_s for s in rows],
        "vol": [s.comparator.vol_v for s in rows],
        "headroom": [s.comparator.voh_headroom_v or 0.0 for s in rows],
        "cm_neg2": [_cm(s.comparator.input_cm_neg_v) for s in rows],
        "cm_head2": [_cm(s.comparator.input_cm_pos_headroom_v) for s in rows],
        "cm_neg1": [_cm(s.opamp.input_cm_neg_v) for s in rows],
        "cm_head1": [_cm(s.opamp.input_cm_pos_headroom_v) for s in rows],
    }
    if rails is not None:
        levels = [sources(s.comparator, rails) for s in rows]
        table["hs"] = [h for h, _ in levels]
        table["low"] = [low for _, low in levels]
    return {name: np.array(x, dtype=np.float64).reshape(-1)[where] for name, x in table.items()}
