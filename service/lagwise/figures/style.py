"""The Lagwise look and reproducible rendering (matplotlib, object API, no pyplot).

Palette (our own): slate ink for text and axes, teal for data, amber for models,
plum for warnings and spread, on white with a misty grid. Colour ramps are built
from those colours with lightness changing monotonically so that they read in grey
too. Renders are byte-reproducible: no timestamp in the metadata, text kept as SVG
``<text>`` (selectable, searchable), and element ids derived from a fixed salt.
"""

from __future__ import annotations

import io
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

import matplotlib
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure

if TYPE_CHECKING:
    from matplotlib.typing import RcKeyType  # the stubs key type, for the checker only

SLATE, TEAL, AMBER, PLUM, MIST, FOG = "#2f3e46", "#1b7f79", "#d68c15", "#8e4a7d", "#e9eef0", "#c9d2d6"
DIRECTION_COLOURS = (TEAL, "#3d5a80", "#b5651d", PLUM, "#7a8b2f", "#a23b3b")
ESTIMATE_RAMP = LinearSegmentedColormap.from_list("lagwise-estimate", ["#20304a", TEAL, "#8fbf8f", "#f1e7c2"])
SPREAD_RAMP = LinearSegmentedColormap.from_list("lagwise-spread", ["#f6f1f4", "#c59bb8", PLUM, "#3b1f36"])
DISSIMILARITY_RAMP = LinearSegmentedColormap.from_list(
    "lagwise-dissimilarity", ["#f5efe0", "#e0b25a", "#b5651d", "#4a2a1a"]
)
# Probability of exceeding a limit: pale (unlikely) to dark plum (likely), lightness falling throughout.
PROBABILITY_RAMP = LinearSegmentedColormap.from_list(
    "lagwise-probability", ["#eef4f3", "#9cc9c1", "#d68c15", PLUM, "#3b1f36"]
)
ERROR_RAMP = LinearSegmentedColormap.from_list("lagwise-error", ["#1b5e7a", "#7fb3c4", "#f4f2ec", "#e0a66b", "#9c4a16"])

RC: dict[RcKeyType, Any] = {
    "svg.fonttype": "none",  # text stays text: selectable and searchable in the SVG
    "svg.hashsalt": "lagwise",  # stable clip-path and glyph ids
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 9,
    "axes.titlesize": 11,
    "axes.labelsize": 9,
    "axes.edgecolor": SLATE,
    "axes.labelcolor": SLATE,
    "xtick.color": SLATE,
    "ytick.color": SLATE,
    "xtick.labelsize": 8,
    "ytick.labelsize": 8,
    "text.color": SLATE,
    "legend.frameon": False,
    "legend.fontsize": 8,
}
METADATA = {
    "svg": {"Date": None, "Creator": "Lagwise"},
    "png": {"Software": "Lagwise"},
}
DPI = 100
# rcParams are process-wide; one figure at a time keeps concurrent requests from seeing
# each other's settings (matplotlib is not thread-safe either).
_LOCK = threading.Lock()


def plain(text: str) -> str:
    """Text as given by a caller, with mathtext markers disarmed (``$`` shown literally)."""
    return text.replace("$", r"\$")


def style_axes(ax, title: str, subtitle: str | None = None) -> None:
    """Left-aligned title (with an optional one-line subtitle), open frame, quiet grid."""
    ax.set_title(title if subtitle is None else f"{title}\n{subtitle}", loc="left", color=SLATE, fontsize=10)
    ax.set_facecolor("white")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.grid(color=MIST, linewidth=0.8)
    ax.set_axisbelow(True)


@contextmanager
def _settings() -> Iterator[None]:
    with _LOCK, matplotlib.rc_context(RC):
        yield


def render(draw: Callable[[Figure], None], size: tuple[int, int], fmt: str) -> str | bytes:
    """Draw on a new figure of ``size`` pixels and return SVG text or PNG bytes.

    Same inputs, same bytes: the SVG carries no date and salted ids, the PNG no time.
    """
    with _settings():
        fig = Figure(figsize=(size[0] / DPI, size[1] / DPI), dpi=DPI, layout="constrained")
        draw(fig)
        buffer = io.BytesIO()
        fig.savefig(buffer, format=fmt, facecolor="white", metadata=METADATA[fmt])
    data = buffer.getvalue()
    return data.decode("utf-8") if fmt == "svg" else data
