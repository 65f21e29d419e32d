"""The benchmark modules live in bench/ and import each other by plain name, as bench/run.py runs them."""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "bench"))
