"""Time to a mean Nusselt number known to 2 % in a time-dependent stagnant-lid layer.

Usage (from the repository root; run it alone, with nothing else heavy on the machine):

    python3 benchmarks/stagnant_lid_mean.py [--grid 128] [--contrast 1e5] [--ra-bottom 1e7]
                                            [--precision 0.02] [--minutes 10]

Frank-Kamenetskii viscosity with the given contrast, Ra stated at the bottom wall
(physics.rayleigh_reference = "bottom"; the run converts it once), unit box, free-slip, heated from below, seeded noise start,
stop.mean_precision = precision.  Prints the run's end, steps, wall time, the means with
their intervals, the regime and whether the issue's goal (under 10 minutes at 128 x 128,
issue 10) is met.  A benchmark, not a test: it prints figures and never fails on speed.
"""

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))


def main():
    from convsim import api
    from convsim.config import parse_config
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--grid", type=int, default=128, help="cells through the depth")
    parser.add_argument("--aspect", type=float, default=1.0,
                        help="box width / depth; aspect x grid cells across")
    parser.add_argument("--contrast", type=float, default=1e5)
    parser.add_argument("--ra-bottom", type=float, default=1e7)
    parser.add_argument("--precision", type=float, default=0.02)
    parser.add_argument("--minutes", type=float, default=10.0)
    args = parser.parse_args()
    cfg = parse_config({
        "domain": {"nx": round(args.aspect * args.grid), "nz": args.grid, "aspect": args.aspect},
        "physics": {"rayleigh": args.ra_bottom, "rayleigh_reference": "bottom"},
        "viscosity": {"law": "frank-kamenetskii", "thermal_contrast": args.contrast},
        "start": {"perturbation": "noise", "amplitude": 0.05},
        "stop": {"mean_precision": args.precision, "max_steps": 10**7, "steady_tolerance": 1e-6},
    }, source="benchmark")

    class Deadline:                      # stop politely at the time budget (as Ctrl-C would)
        def on_start(self, sim, resumed): self.t0 = time.perf_counter()
        def on_step(self, report):
            if time.perf_counter() - self.t0 > 60 * args.minutes:
                raise KeyboardInterrupt
        def on_snapshot(self, snap): ...
        def on_finish(self, result): ...

    t0 = time.perf_counter()
    result = api.run(cfg, observers=[Deadline()])
    wall = time.perf_counter() - t0
    s = result.statistics
    print(f"{round(args.aspect * args.grid)}x{args.grid} (aspect {args.aspect:g}), contrast {args.contrast:g}, Ra_bottom {args.ra_bottom:g}: "
          f"{result.status} ({result.message}), settled {result.settled}")
    print(f"  steps {result.steps}, model time {result.time:.4g}, wall {wall:.1f} s")
    for q in ("nusselt_top", "nusselt_bottom", "vrms", "lid_thickness", "interior_temperature"):
        e = s[q]
        print(f"  {q:22s} {e['mean']:.5g} +- {e['ci95']:.2g} (from t = {e['from_time']:.4g})")
    print(f"  regime {result.lid['regime']}, mobility {result.lid['mobility']:.3g}")
    # the goal is a time-dependent case: a run that ends steady measures something else
    met = result.status == "mean-precision" and result.settled == "statistically-steady" \
        and wall < 60 * args.minutes
    why = " (the case is steady: not a time-dependent case; try --aspect 2)" \
        if result.status == "steady" else ""
    print(f"goal: mean Nu of a time-dependent case to {100 * args.precision:g} % in under "
          f"{args.minutes:g} minutes: {'met' if met else 'NOT met'}{why}")
    print(f"  {1e3 * wall / max(result.steps, 1):.1f} ms per step, mean step "
          f"{result.time / max(result.steps, 1):.3g}")


if __name__ == "__main__":
    main()
