"""The full model's verdict on tuned candidates, each range decided once (``coverage``)."""

from __future__ import annotations

from tristock.designs.tuned.chains import covers
from tristock.designs.tuned.coverage import (
    RangeVerdict,
    amplitude_guaranteed,
    range_verdicts,
    yield_holds,
)
from tristock.designs.tuned.model import TunedModel
from tristock.designs.tuned.report import design_from
from tristock.designs.tuned.search import Found, ids_of


def _probes(found: Found, j: int) -> tuple[float, float, float, float]:
    """The search's corner values of capacitor j's range (``coverage.range_verdicts``)."""
    data, at = found.data, found.index
    return (
        float(data.corner_bottom[at, j]),
        float(data.corner_top[at, j]),
        float(data.amp_high[at, j]),
        float(data.amp_low[at, j]),
    )


class Verdicts:
    """The full model's verdict on candidates, each range decided once."""

    def __init__(self, model: TunedModel, samples: int, seed: int):
        self.model = model
        self.samples = samples
        self.seed = seed
        self.cache: dict[tuple[object, ...], tuple[RangeVerdict, bool]] = {}

    def prepare(self, founds: list[Found]) -> None:
        """Decide every range of these candidates not decided yet, their boxes searched
        together (``coverage.range_verdicts``)."""
        todo: dict[tuple[str, ...], tuple[Found, int]] = {}
        for found in founds:
            for j in found.chain:
                key = ids_of(found.model, found.row, (j,))
                if key not in self.cache:
                    todo.setdefault(key, (found, j))
        if not todo:
            return
        designs = [design_from(f.model, f.row, (j,)) for f, j in todo.values()]
        probes = [_probes(f, j) for f, j in todo.values()]
        spec = self.model.spec
        found_verdicts = range_verdicts(designs, spec, 0, probes)
        for key, d, v in zip(todo, designs, found_verdicts, strict=True):
            good = v.ok and v.gl < v.gh and amplitude_guaranteed(spec, v)
            good = good and yield_holds(spec, d, 0, self.samples, self.seed)
            self.cache[key] = (v, good)

    def one(self, found: Found, s: int) -> tuple[RangeVerdict, bool]:
        key = ids_of(found.model, found.row, (found.chain[s],))
        if key not in self.cache:
            self.prepare([found])
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
