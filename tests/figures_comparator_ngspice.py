"""Print the comparator-IC model's errors against ngspice on the four boards of
tests/circuits/test_comparator_ngspice.py (the README's model-vs-ngspice rows).

Run: python tests/figures_comparator_ngspice.py   (needs ngspice on PATH; about a minute)
"""

from __future__ import annotations

import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent / "circuits"))

from test_comparator_ngspice import CASES, oscillator

from ngspice_harness import run_ngspice
from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT


def measure(name: str) -> dict[str, float]:
    return run_ngspice(COMPARATOR_SCHMITT.netlist(oscillator(name), periods=3), timeout_s=300.0)


def main() -> None:
    with ThreadPoolExecutor(max_workers=2) as pool:
        runs = dict(zip(CASES, pool.map(measure, CASES), strict=True))
    print("case             frequency   error    amplitude  error    duty (model/ngspice)  timing")
    for name, meas in runs.items():
        p = oscillator(name).prediction()
        f, vpp, duty = float(p.frequency_hz), float(p.amplitude_vpp), float(p.duty_high)
        f_err = 1.0 / meas["per"] / f - 1.0
        a_err = (meas["vtmax"] - meas["vtmin"]) / vpp - 1.0
        print(
            f"{name:16s} {f:9.4g} Hz {f_err:+.1e}  {vpp:6.4g} V {a_err:+.1e}  "
            f"{100 * duty:.3f} / {100 * meas['duty']:.3f} %   {100 * float(p.timing_share):.2f} %"
        )


if __name__ == "__main__":
    main()
