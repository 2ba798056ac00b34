"""Benchmark: closed-loop simulation points per second, one process against a process pool.

Both runs use the same setup (scenarios, points, seeds) and are timed in the same
process; the table prints points per second and the ratio pool / one process. On a
machine shared with other work the ratio varies from run to run.

    python benchmarks/simulate.py [--points 24] [--jobs 2] [examples/linear_stage.toml ...]
"""
from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

from symgain.design import derive
from symgain.model.toml_file import load_model
from symgain.analysis.simulation.campaign import prepare, run_campaign

ROOT = Path(__file__).resolve().parent.parent
DEFAULT = [ROOT / "examples" / n for n in ("greenhouse_cart.toml", "linear_stage.toml", "drone_altitude.toml")]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("models", nargs="*", type=Path, default=DEFAULT)
    parser.add_argument("--points", type=int, default=24)
    parser.add_argument("--jobs", type=int, default=2)
    args = parser.parse_args()
    print(f"{'model':28s} {'plant':10s} {'points':>6s} {'samples':>8s} {'1 process':>12s} "
          f"{f'{args.jobs} processes':>12s} {'ratio':>6s}")
    for path in args.models:
        design = derive(load_model(path))
        with tempfile.TemporaryDirectory() as folder:
            setup = prepare(design, folder, points=args.points, corners=False)
            one = run_campaign(setup, jobs=1)
            pool = run_campaign(setup, jobs=args.jobs)
        n = len(setup.points)
        rate1, rate2 = n / one.elapsed, n / pool.elapsed
        print(f"{path.stem:28s} {'nonlinear' if setup.plant.nonlinear else 'linear':10s} {n:6d} "
              f"{setup.cases[0].samples:8d} {rate1:9.1f}/s {rate2:9.1f}/s {rate2 / rate1:6.2f}")


if __name__ == "__main__":
    main()
