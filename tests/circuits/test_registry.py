"""``circuits.TOPOLOGIES``: every key is its topology's own name, in the registration order,
and a look-up imports that topology's package only (common practice: a lazy registry must
answer as the eager one did; the modules loaded are checked in a fresh interpreter)."""

from __future__ import annotations

import json
import subprocess
import sys

from tristock.circuits import DEFAULT_TOPOLOGY, TOPOLOGIES

LOOK_UP = (
    "import json, sys; from tristock.circuits import TOPOLOGIES; "
    "names = list(TOPOLOGIES); t = TOPOLOGIES['duty_schmitt']; "
    "print(json.dumps([names, t.name, sorted(m for m in sys.modules if '_schmitt' in m)]))"
)


def test_keys_are_the_topologies_names_in_order() -> None:
    assert list(TOPOLOGIES) == [
        "opamp_schmitt",
        "comparator_schmitt",
        "clamped_schmitt",
        "duty_schmitt",
    ]
    assert all(TOPOLOGIES[name].name == name for name in TOPOLOGIES)
    assert TOPOLOGIES["opamp_schmitt"] is DEFAULT_TOPOLOGY
    assert TOPOLOGIES["clamped_schmitt"] is TOPOLOGIES["clamped_schmitt"]  # one object
    assert len(TOPOLOGIES) == len(set(TOPOLOGIES.values())) == 4
    assert "no_such_circuit" not in TOPOLOGIES


def test_a_look_up_imports_only_that_package() -> None:
    proc = subprocess.run(
        [sys.executable, "-c", LOOK_UP], capture_output=True, text=True, timeout=60, check=True
    )
    names, name, loaded = json.loads(proc.stdout)
    assert names == list(TOPOLOGIES) and name == "duty_schmitt"
    packages = {m.split(".")[2] for m in loaded}
    assert packages == {"opamp_schmitt", "duty_schmitt"}
