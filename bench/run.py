"""Run the benchmarks: ``python3 manage.py bench [variogram] [fitting] [kriging] [unattended] [variables] [large] [simulation] [responses]``."""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import fitting  # noqa: E402
import kriging  # noqa: E402
import large  # noqa: E402
import responses  # noqa: E402
import simulation  # noqa: E402
import unattended  # noqa: E402
import variables  # noqa: E402
import variogram  # noqa: E402

SUITES = {
    "variogram": variogram.main,
    "fitting": fitting.main,
    "kriging": kriging.main,
    "unattended": unattended.main,
    "variables": variables.main,
    "large": large.main,
    "simulation": simulation.main,
    "responses": responses.main,
}


def main(argv):
    names = argv or list(SUITES)
    for name in names:
        print(f"== {name} ==", flush=True)
        SUITES[name]()


if __name__ == "__main__":
    main(sys.argv[1:])
