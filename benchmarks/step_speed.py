"""Time per step split by phase, steps per second and peak memory.

    python3 benchmarks/step_speed.py [--grids 32,64,128,256,512] [--steps 50]

For constant viscosity (case 1a set-up) and a viscosity contrast of 1e3 (case 2a set-up), runs
a short transient from the perturbed conductive start (after a warm-up) and prints the mean
wall time per step of each phase: advect (explicit term), diffuse (implicit solve),
stokes (flow solve, including any refactorisation), of which factor, and diagnose; then
steps per second and the peak resident memory of this process (it only grows, so run one
grid per process for clean memory figures: --grids 256).
"""

import argparse
import resource
import time


from convsim.config import Config
from convsim.run.build import build_model
from convsim.run.initial import initial_temperature


def measure(law, n, steps):
    cfg = Config().replace(domain__nx=n, domain__nz=n, physics__rayleigh=1e4,
                           viscosity__law=law, viscosity__thermal_contrast=1e3 if law != "constant" else 1.0)
    model = build_model(cfg)
    state = model.initial_state(initial_temperature(model.grid, model.thermal, 0.0, cfg.start, 1e4))
    for _ in range(10):
        state, _ = model.step(state)
    phases, refactors = {}, 0
    t0 = time.perf_counter()
    for _ in range(steps):
        state, report = model.step(state)
        refactors += report.refactored
        for k, v in report.seconds.items():
            phases[k] = phases.get(k, 0.0) + v
    wall = time.perf_counter() - t0
    return model.stokes_solver, {k: 1e3 * v / steps for k, v in phases.items()}, steps / wall, refactors


def main():
    from convsim.threads import limit_threads
    limit_threads()          # as a run does: one thread in every pool unless asked
    parser = argparse.ArgumentParser()
    parser.add_argument("--grids", default="32,64,128,256,512")
    parser.add_argument("--steps", type=int, default=50)
    args = parser.parse_args()
    print(f"{'law':>18} {'grid':>5} {'solver':>9} {'advect':>7} {'diffuse':>8} {'stokes':>7} "
          f"{'factor':>7} {'diagn.':>7} {'steps/s':>8} {'refact.':>7} {'peak MiB':>9}   (ms per step)")
    for law in ("constant", "frank-kamenetskii"):
        for n in (int(v) for v in args.grids.split(",")):
            steps = max(5, args.steps * 64 // max(n, 64))
            solver, ph, rate, refactors = measure(law, n, steps)
            peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
            print(f"{law:>18} {n:>5} {solver:>9} {ph.get('advect', 0):7.2f} {ph.get('diffuse', 0):8.2f} "
                  f"{ph.get('stokes', 0):7.2f} {ph.get('factor', 0):7.2f} {ph.get('diagnose', 0):7.2f} "
                  f"{rate:8.1f} {refactors:>4}/{steps:<3} {peak:9.0f}")


if __name__ == "__main__":
    main()
