"""A design built at one of its worst-case corners, for the SPICE export.

``worst_case`` (``tristock.analysis.worstcase``) finds, for each extreme, the setting of every
spread variable (tolerances, rails, temperature, op-amp spread) as deviations z in [-1, 1];
``point_at`` moves the board's point there. The oscillator built from that point has every
value the model used at the extreme, so its prediction is the worst-case bound itself: a pot
folds in as in ``oscillator_of`` (R3 -> R_eff, C1 -> C1/β, Vos1 and Ib1 -> /β).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from tristock.analysis.spread import point_at, spread_board
from tristock.analysis.worstcase import worst_case
from tristock.circuits.board import Design
from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.timing import timing_network
from tristock.spec.model import Spec

#: ``--corner`` names -> the worst-case extreme they build.
CORNERS = {
    "fmin": "frequency_hz_lo",
    "fmax": "frequency_hz_hi",
    "amin": "amplitude_vpp_lo",
    "amax": "amplitude_vpp_hi",
}


def corner_oscillator(design: Design, spec: Spec, corner: str) -> tuple[Oscillator, str]:
    """The oscillator at worst-case ``corner`` (a key of CORNERS) and the setting there in
    words ("R1 21.48 kΩ (-0.1 %), V+ 11.4 V (-5 %), ...")."""
    key = CORNERS[corner]
    wc = worst_case(design, spec)
    board, variables = spread_board(design, spec)
    z = np.asarray([wc.deviations[key]], dtype=float)
    p = point_at(board, variables, z)

    def one(name: str) -> float:
        return float(np.asarray(getattr(p, name)).reshape(-1)[0])

    r_eff, beta = timing_network(one("r3"), one("rv"), one("alpha"), design.control, one("r4"))
    beta = float(beta)
    opamp = dataclasses.replace(
        OpAmpModel.from_part(design.u1),
        swing_pos_v=one("swing_pos"),
        swing_neg_v=one("swing_neg"),
        slew_rise_v_per_s=one("slew_rise"),
        slew_fall_v_per_s=one("slew_fall"),
        delay_s=one("delay"),
        gbw_hz=one("gbw"),
        offset_v=one("vos1") / beta,
        bias_a=one("ib1") / beta,
        comparator_offset_v=one("vos2"),
        comparator_bias_a=one("ib2"),
    )
    rails = Rails(one("v_pos"), one("v_neg"), board.v_ref)
    osc = Oscillator(one("r1"), one("r2"), float(r_eff), one("c1") / beta, opamp, rails)
    setting = ", ".join(f"{k} {v}" for k, v in wc.corners[key].items())
    return osc, setting
