"""Time modelgen.calibration on one device: solver-made I-V and C-V, repeated to N points.

Usage: python benchmarks/calibration_benchmark.py [POINTS] [REPEATS]

The invented device of tests/test_calibration.py (p+ 1e18 on n 2e16 cm^-3, 1 mm^2,
20 ohm contact): the drift-diffusion solver makes its I-V (forward to 20 mA
compliance, reverse to -1 V) and C-V (-5..0 V), with 1 % noise, each point
repeated until about POINTS in all (default 300); the calibration of the default
free keys (light doping, dominant lifetime, recombination lifetime, contact
resistance) starts 50 % to 10x away from the truth. Runs on one core. Prints the
best and median wall time of REPEATS runs (default 5), the solver's evaluations
and the fitted values against the truth.
"""

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import pathlib  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from modelgen import calibration  # noqa: E402
import test_calibration as case  # noqa: E402  (the device, the noisy curves, the starting point)


def main(points=300, repeats=5):
    import tomllib

    from modelgen import description, extraction, numeric

    res = extraction.derive(description.from_mapping(tomllib.loads(case.TRUTH_TOML)))
    window = numeric.Window(current_high=0.1, reverse_bias=-1.0, capacitance_low=-5.0, capacitance_high=0.0)
    t0 = time.perf_counter()
    sw = numeric.sweep(res, 0, window)
    print(f"solver sweep (the synthetic data): {time.perf_counter() - t0:.2f} s")
    iv, cv = case.measured(sw, 1, 0.01)
    k = max(1, round(points / (len(iv.v) + len(cv.v))))
    iv = case.curve("iv", np.repeat(iv.v, k), np.repeat(iv.y, k), np.repeat(iv.use, k))
    cv = case.curve("cv", np.repeat(cv.v, k), np.repeat(cv.y, k))
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        cal = calibration.calibrate(case.start(), iv, cv)
        times.append(time.perf_counter() - t0)
    print(f"calibration of {len(iv.v) + len(cv.v)} points, {len(cal.fitted)} keys: best {min(times):.2f} s, "
          f"median {np.median(times):.2f} s, {cal.iterations} evaluations")
    for key, fit in cal.fitted.items():
        true = case.TRUTH[key]
        print(f"  {key:24s} true {true:.4g}  fitted {fit['value']:.4g} +/- {fit['stderr']:.2g} "
              f"({100 * (fit['value'] / true - 1):+.2f} %)")


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:3]))
