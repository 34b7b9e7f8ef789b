"""Speed of the onset analysis: neutral curve at 100 wavenumbers plus the minimiser.

Goal: the full analysis (``analyse_onset`` with 100 curve points, the layer's minimum,
the box minimum and the resolution check) in under 2 s per case on one core.

    python3 benchmarks/onset_speed.py [--repeat R]

Prints one line per case: best-of-R wall time, the collocation degree, Ra_c and k_c.
"""

import argparse
import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from convsim.stability import analyse_onset  # noqa: E402

CASES = {
    "free-free, constant": dict(),
    "rigid-rigid, constant": dict(top_flow="no-slip", bottom_flow="no-slip"),
    "rigid top, heated within, insulating bottom": dict(
        top_flow="no-slip", bottom_heat="flux", bottom_value=0.0, internal_heating=1.0),
    "free-free, Frank-Kamenetskii 1e6": dict(
        viscosity="frank-kamenetskii", viscosity_parameters={"thermal_contrast": 1e6}),
    "rigid-rigid, Frank-Kamenetskii 1e30 (N=72)": dict(
        top_flow="no-slip", bottom_flow="no-slip", viscosity="frank-kamenetskii",
        viscosity_parameters={"thermal_contrast": 1e30}),
    "free-free, Arrhenius E=20 V=5": dict(
        viscosity="arrhenius",
        viscosity_parameters={"activation_energy": 20.0, "activation_volume": 5.0}),
    "free-free, Frank-Kamenetskii 1e6, minimum 1e-3": dict(
        viscosity="frank-kamenetskii",
        viscosity_parameters={"thermal_contrast": 1e6, "minimum": 1e-3}),
}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    threads = os.environ.get("OMP_NUM_THREADS", "unset")
    print(f"onset analysis, 100 curve wavenumbers, best of {args.repeat} "
          f"(OMP_NUM_THREADS={threads}); goal < 2 s")
    worst = 0.0
    for name, kwargs in CASES.items():
        best = float("inf")
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            result = analyse_onset(1e5, aspect=2.0, curve_points=100, **kwargs)
            best = min(best, time.perf_counter() - t0)
        worst = max(worst, best)
        print(f"  {name:<48s} {best:7.3f} s  N={result.points:<3d} "
              f"Ra_c={result.critical_rayleigh:.6g}  k_c={result.critical_wavenumber:.4f}")
    print(f"slowest case {worst:.3f} s: {'meets' if worst < 2.0 else 'MISSES'} the 2 s goal")


if __name__ == "__main__":
    main()
