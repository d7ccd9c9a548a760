"""Cold start of ``driven-atom estimate`` on the demo lab case (configs/lab/kestrel_lyman_alpha.toml).

Both commands run as whole fresh processes, interleaved, several times; the script prints one JSON
object with the median wall times and their ratio:

* ``python -c "import numpy, scipy"`` (the floor any numpy/scipy program pays),
* ``python -m driven_atom estimate configs/lab/kestrel_lyman_alpha.toml --json``.

The issue's target is an answer in under 0.5 s on the machine where the baseline takes about 0.15 s;
ratios, not absolute times, are the result (the machine may be shared).

    python benchmarks/estimate.py [--repeats 7]
"""
from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
COMMANDS = {
    "baseline": [sys.executable, "-c", "import numpy, scipy"],
    "estimate": [sys.executable, "-m", "driven_atom", "estimate",
                 str(REPO / "configs" / "lab" / "kestrel_lyman_alpha.toml"), "--json"],
}


def wall_time(argv: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(argv, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=REPO)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    args = parser.parse_args()
    samples = {name: [] for name in COMMANDS}
    for name, argv in COMMANDS.items():          # one warm-up each (file-system cache, .pyc files)
        wall_time(argv)
    for _ in range(args.repeats):
        for name, argv in COMMANDS.items():
            samples[name].append(wall_time(argv))
    median = {name: statistics.median(v) for name, v in samples.items()}
    print(json.dumps({"estimate_s": round(median["estimate"], 4), "numpy_scipy_s": round(median["baseline"], 4),
                      "ratio": round(median["estimate"] / median["baseline"], 3), "repeats": args.repeats,
                      "python": sys.version.split()[0]}))


if __name__ == "__main__":
    main()
