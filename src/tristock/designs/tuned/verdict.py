"""The full model's verdict on tuned candidates, each range decided once (``coverage``)."""

from __future__ import annotations

from tristock.designs.tuned.chains import covers
from tristock.designs.tuned.coverage import (
    RangeVerdict,
    amplitude_guaranteed,
    range_verdict,
    yield_holds,
)
from tristock.designs.tuned.model import TunedModel
from tristock.designs.tuned.report import design_from
from tristock.designs.tuned.search import Found, ids_of


class Verdicts:
    """The full model's verdict on candidates, each range decided once."""

    def __init__(self, model: TunedModel, samples: int, seed: int):
        self.model = model
        self.samples = samples
        self.seed = seed
        self.cache: dict[tuple[object, ...], tuple[RangeVerdict, bool]] = {}

    def one(self, found: Found, s: int) -> tuple[RangeVerdict, bool]:
        j = found.chain[s]
        key = ids_of(found.model, found.row, (j,))
        if key not in self.cache:
            d = design_from(found.model, found.row, (j,))
            data, at = found.data, found.index
            probes = (
                float(data.corner_bottom[at, j]),
                float(data.corner_top[at, j]),
                float(data.amp_high[at, j]),
                float(data.amp_low[at, j]),
            )
            spec = self.model.spec
            v = range_verdict(d, spec, 0, probes)
            good = v.ok and v.gl < v.gh and amplitude_guaranteed(spec, v)
            good = good and yield_holds(spec, d, 0, self.samples, self.seed)
            self.cache[key] = (v, good)
        return self.cache[key]

    def __call__(self, found: Found) -> tuple[bool, list[object]]:
        spec = self.model.spec
        assert spec.tuning is not None
        tu = spec.tuning
        verdicts = []
        for s in range(len(found.chain)):
            v, good = self.one(found, s)
            if not good:
                return False, []
            verdicts.append(v)
        ends = [(v.gl, v.gh) for v in verdicts]
        return covers(ends, tu.low_hz, tu.high_hz, tu.overlap_pct / 100), list(verdicts)
