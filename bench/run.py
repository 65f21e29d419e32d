"""Run the benchmarks: ``python3 manage.py bench [variogram] [fitting] [kriging] [unattended] [variables] [large [section ...]] [simulation] [responses]``.

Words after ``large`` that name no suite are its sections (``bench large exact_kernel``).
"""

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
    names = [a for a in argv if a in SUITES] or list(SUITES)
    unknown = [a for a in argv if a not in SUITES]
    if unknown and names != ["large"]:
        raise SystemExit(f"sections ({', '.join(unknown)}) are given after the one suite that has them: large")
    for name in names:
        print(f"== {name} ==", flush=True)
        if name == "large":
            large.main(unknown or None)
        else:
            SUITES[name]()


if __name__ == "__main__":
    main(sys.argv[1:])
