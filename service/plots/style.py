"""Colours, line styles and byte-for-byte reproducible output.

The palette is Okabe & Ito's (2008) colour-universal-design set of eight
colours, distinguishable with the common forms of colour-vision deficiency;
bands also differ by line style and fill, so a figure reads in grey scale too.
"""

from __future__ import annotations

import io
import math

import matplotlib
from matplotlib import ticker

# Fixed salt for the ids in SVG output (clip paths, glyphs): the same figure gives the same
# bytes in every process. Set once at import; nothing else in the service writes SVG.
matplotlib.rcParams["svg.hashsalt"] = "curvewise"
matplotlib.rcParams["svg.fonttype"] = "path"  # glyphs as paths: no dependence on client fonts
# Every text is drawn as written: a caller's "$" never starts matplotlib's math parser
# (whose syntax errors would otherwise surface while the figure is drawn).
matplotlib.rcParams["text.parse_math"] = False

OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}

DATA = {"color": OKABE_ITO["black"], "marker": "o", "markersize": 3.5, "linestyle": "none",
        "alpha": 0.8}
# The three flags of the diagnostics, one hollow shape each, drawn around the data point;
# sizes differ so that a point with several flags shows every shape.
_HOLLOW = {"linestyle": "none", "markerfacecolor": "none", "markeredgewidth": 1.2}
FLAGS = (
    ("outlier", "outlier", {"color": OKABE_ITO["vermillion"], "marker": "^",
                            "markersize": 8, **_HOLLOW}),
    ("high_leverage", "high leverage", {"color": OKABE_ITO["blue"], "marker": "s",
                                        "markersize": 9.5, **_HOLLOW}),
    ("influential", "influential", {"color": OKABE_ITO["reddish_purple"], "marker": "D",
                                    "markersize": 11.5, **_HOLLOW}),
)
OUTLIER_LIMIT = {"color": OKABE_ITO["vermillion"], "linestyle": "--", "linewidth": 0.9}
LEVERAGE_CUT = {"color": OKABE_ITO["blue"], "linestyle": ":", "linewidth": 1.2}
COOK_CUT = {"color": OKABE_ITO["reddish_purple"], "linestyle": "-.", "linewidth": 1.0}
AUXILIARY = {"color": OKABE_ITO["orange"], "linewidth": 1.6}
ENVELOPE = {"color": "#999999", "alpha": 0.3, "linewidth": 0}
ENVELOPE_MEAN = {"color": "#333333", "linestyle": ":", "linewidth": 1.1}
CURVE = {"color": OKABE_ITO["blue"], "linewidth": 1.8}
MEAN_BAND = {"color": OKABE_ITO["sky_blue"], "alpha": 0.45, "linewidth": 0}
OBS_BAND = {"color": OKABE_ITO["blue"], "linestyle": "--", "linewidth": 1.0}
SIM_BAND = {"color": OKABE_ITO["reddish_purple"], "linestyle": ":", "linewidth": 1.4}
REFERENCE = {"color": "#777777", "linestyle": "-", "linewidth": 0.8}
CRITERIA = (("aic", "AIC", OKABE_ITO["blue"], "o"),
            ("aicc", "AICc", OKABE_ITO["bluish_green"], "s"),
            ("bic", "BIC", OKABE_ITO["orange"], "^"))
CHOSEN_CANDIDATE = {"color": OKABE_ITO["blue"], "linewidth": 2.2}
CANDIDATES = (  # the other candidates of a comparison: colour and line style both differ
    {"color": OKABE_ITO["vermillion"], "linestyle": "--", "linewidth": 1.3},
    {"color": OKABE_ITO["bluish_green"], "linestyle": "-.", "linewidth": 1.3},
    {"color": OKABE_ITO["orange"], "linestyle": ":", "linewidth": 1.6},
    {"color": OKABE_ITO["reddish_purple"], "linestyle": (0, (5, 1, 1, 1)), "linewidth": 1.3},
    {"color": "#777777", "linestyle": (0, (1, 2)), "linewidth": 1.3},
)
CHOSEN = {"color": OKABE_ITO["vermillion"], "linestyle": ":", "linewidth": 1.2}

PNG_COMPRESS_LEVEL = 3  # zlib level: ~25% faster than the default 6 for ~10% larger files
FONT_SIZE = 8.5
TITLE_SIZE = 9.5
NOTE_SIZE = 7.5     # the line of numbers under each panel title
NOTE_COLOUR = "#444444"
LEGEND_SIZE = 8.0

# Nothing that changes between runs may reach the file: no dates, a fixed creator string.
_METADATA = {
    "png": {"Software": "Curvewise"},
    "svg": {"Date": None, "Creator": "Curvewise", "Format": None, "Type": None},
}


def style_axes(ax) -> None:
    """Plain, light axes: small fonts, light grid, no top/right frame."""
    ax.tick_params(labelsize=FONT_SIZE - 0.5, length=3)
    ax.grid(True, color="#E5E5E5", linewidth=0.6)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)


def log_x_axis(ax, x_min: float, x_max: float) -> None:
    """A logarithmic x axis with plain tick labels (0.01, 1, 100: never mathtext, which
    the service does not parse); decades, or 1-2-5 steps over less than two decades."""
    ax.set_xscale("log", nonpositive="mask")  # x <= 0 (blanks) fitted, not drawn
    decades = math.log10(x_max / x_min) if x_min > 0 and x_max > x_min else 0.0
    subs = (1.0,) if decades >= 2 else (1.0, 2.0, 5.0)
    ax.xaxis.set_major_locator(ticker.LogLocator(base=10, subs=subs, numticks=9))
    ax.xaxis.set_major_formatter(ticker.FuncFormatter(lambda v, _: f"{v:g}"))
    ax.xaxis.set_minor_formatter(ticker.NullFormatter())


def to_bytes(figure, fmt: str, dpi: int) -> bytes:
    """Render ``figure`` (already attached to an Agg canvas) to PNG or SVG bytes."""
    buffer = io.BytesIO()
    extra = {"pil_kwargs": {"compress_level": PNG_COMPRESS_LEVEL}} if fmt == "png" else {}
    figure.savefig(buffer, format=fmt, dpi=dpi, metadata=_METADATA[fmt], **extra)
    return buffer.getvalue()
