"""Start-up time of the light atom commands (``driven-atom lines``, ``state``, ``transition``).

Each command runs as a fresh ``python -m driven_atom ... --json`` process a few times; the script prints
the median wall time and its ratio to two baselines measured in the same run: a bare interpreter
(``python -c pass``) and ``python -c "import numpy"``. Ratios, not absolute times, are the
result: the machine may be shared.

    python benchmarks/atom_startup.py [--repeats 5]
"""
from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time

COMMANDS = {
    "python -c pass": [sys.executable, "-c", "pass"],
    "python -c 'import numpy'": [sys.executable, "-c", "import numpy"],
    "python -c 'import scipy.constants'": [sys.executable, "-c", "import scipy.constants"],
    "driven-atom lines --json": [sys.executable, "-m", "driven_atom", "lines", "--json"],
    "driven-atom state 3d --json": [sys.executable, "-m", "driven_atom", "state", "3d", "--json"],
    "driven-atom transition 2p 1s --json": [sys.executable, "-m", "driven_atom", "transition", "2p", "1s", "--json"],
}


def wall_time(argv: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(argv, check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    samples = {name: [] for name in COMMANDS}
    for _ in range(args.repeats):          # interleave so that load changes hit every command alike
        for name, argv in COMMANDS.items():
            samples[name].append(wall_time(argv))
    median = {name: statistics.median(v) for name, v in samples.items()}
    bare, numpy_ = median["python -c pass"], median["python -c 'import numpy'"]
    print(f"{'command':36s} {'median [s]':>10s} {'/ bare python':>14s} {'/ import numpy':>15s}")
    for name, value in median.items():
        print(f"{name:36s} {value:10.3f} {value / bare:14.2f} {value / numpy_:15.2f}")


if __name__ == "__main__":
    main()
