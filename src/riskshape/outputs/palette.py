"""riskshape's one palette: the colours, markers and line styles of every figure, the report and the console.

Nothing depends on colour alone. Each homology dimension, alert mark and threshold has its own
marker and line style besides its colour, each severity its own marker shape and its word, and
the colours of a group (H0/H1/H2; info/warning/critical) differ in lightness, so they stay apart
in greyscale print and under the common colour-vision deficiencies.

The colours are taken from Paul Tol's colour-blind-safe schemes (P. Tol, "Colour Schemes",
SRON technical note SRON/EPS/TN/09-002, https://personal.sron.nl/~pault/): the three colours
of his "high-contrast" scheme for H0, H1 and H2 (made for greyscale as well as colour-blind
readers), colours of his "light", "vibrant" and "muted" schemes for the severities and the
marks, his "pale" scheme for shading and his "sunset" diverging scheme for correlation maps.
Hex values are from memory of that note. Which colour stands for what is riskshape's own.

Examples
--------
>>> dimension_mark(1).marker, dimension_mark(1).linestyle
('^', '--')
>>> severity_mark("critical").label
'critical'
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

from riskshape.errors import ConfigError

if TYPE_CHECKING:  # matplotlib is imported only when a colormap is asked for (the report's CSS needs none)
    from matplotlib.colors import LinearSegmentedColormap

__all__ = [
    "Mark",
    "LineStyle",
    "DIMENSIONS",
    "SEVERITIES",
    "ALERT",
    "THRESHOLD",
    "BASELINE",
    "INK",
    "MUTED_INK",
    "RULE",
    "FAINT",
    "HEADER_FILL",
    "CODE_FILL",
    "REGIME_FILL",
    "EVENT_FILL",
    "EVENT_HATCH",
    "CAUTION_EDGE",
    "CAUTION_FILL",
    "GOOD",
    "BAD",
    "DIVERGING",
    "LINESTYLES",
    "dimension_mark",
    "severity_mark",
    "summary_mark",
    "layer_style",
    "diverging_colormap",
    "colours",
    "css",
]


LineStyle = Literal["-", "--", "-.", ":", ""]


@dataclass(frozen=True)
class Mark:
    """How one kind of series or mark is drawn.

    Attributes
    ----------
    color : str
        Hex colour ``#RRGGBB``.
    marker : str
        Matplotlib marker code.
    linestyle : str
        Matplotlib line style (``""`` for marks drawn without a line).
    label : str
        The word a legend or a table shows for it.
    """

    color: str
    marker: str
    linestyle: LineStyle
    label: str


# --- neutrals (greys; text, rules, fills) ---------------------------------------------------------
INK = "#222222"  # text and dendrogram links
MUTED_INK = "#595959"  # small print (the caution on figures)
RULE = "#888888"  # the diagonal of a diagram, heading rules
FAINT = "#BBBBBB"  # table borders (Tol's grey)
HEADER_FILL = "#EEEEEE"  # table headers
CODE_FILL = "#F5F5F5"  # preformatted text
REGIME_FILL = "#DDDDDD"  # every other regime, shaded (Tol's pale grey)

# --- homology dimensions: Tol's high-contrast scheme, dark to light -------------------------------
DIMENSIONS: tuple[Mark, ...] = (
    Mark("#004488", "o", "-", "H0"),  # high-contrast blue
    Mark("#BB5566", "^", "--", "H1"),  # high-contrast red
    Mark("#DDAA33", "s", ":", "H2"),  # high-contrast yellow
)

# --- severities: light to dark as they grow worse; a shape and a word each ------------------------
SEVERITIES: dict[str, Mark] = {
    "info": Mark("#99DDFF", "o", "", "info"),  # Tol light: light cyan
    "warning": Mark("#EE7733", "D", "", "warning"),  # Tol vibrant: orange
    "critical": Mark("#882255", "X", "", "critical"),  # Tol muted: wine
}

# --- marks on a summary's time line ----------------------------------------------------------------
ALERT = Mark("#CC3311", "v", "", "alert")  # Tol vibrant: red; an alert whose severity is not given
THRESHOLD = Mark("#44AA99", "_", "-.", "threshold")  # Tol muted: teal
BASELINE = Mark("#332288", "", "-.", "baseline")  # Tol muted: indigo; summaries of no dimension
EVENT_FILL = "#FFCCCC"  # Tol pale: pale red; drawdown events, also hatched
EVENT_HATCH = "//"

# --- the report ---------------------------------------------------------------------------------------
CAUTION_EDGE = "#882255"  # Tol muted: wine
CAUTION_FILL = "#FFF4F4"
GOOD = "#117733"  # Tol muted: green, always with words ("verifies")
BAD = "#CC3311"  # Tol vibrant: red, always bold and with words ("does NOT verify")

# --- correlation maps: Tol's sunset (diverging), -1 blue to +1 red -----------------------------------
DIVERGING: tuple[str, ...] = (
    "#364B9A",
    "#4A7BB7",
    "#6EA6CD",
    "#98CAE1",
    "#C2E4EF",
    "#EAECCC",
    "#FEDA8B",
    "#FDB366",
    "#F67E4B",
    "#DD3D2D",
    "#A50026",
)

LINESTYLES: tuple[LineStyle, ...] = ("-", "--", ":", "-.")
_LAYER_MARKERS: tuple[str, ...] = ("", "o", "s", "^", "D")


def dimension_mark(k: int) -> Mark:
    """The mark of homology dimension ``k`` (0, 1 or 2).

    Parameters
    ----------
    k : int
        The homology dimension.

    Returns
    -------
    Mark
        Its colour, marker, line style and label.

    Raises
    ------
    riskshape.errors.ConfigError
        If ``k`` is not 0, 1 or 2 (the dimensions riskshape computes).
    """
    if not 0 <= k < len(DIMENSIONS):
        raise ConfigError(f"palette: homology dimension must be 0, 1 or 2, got {k!r}")
    return DIMENSIONS[k]


def severity_mark(severity: str) -> Mark:
    """The mark of an alert of ``severity`` (``info``, ``warning`` or ``critical``).

    Parameters
    ----------
    severity : str
        The alert's severity.

    Returns
    -------
    Mark
        Its colour, its marker shape and its word.

    Raises
    ------
    riskshape.errors.ConfigError
        If ``severity`` is not one of the three.
    """
    try:
        return SEVERITIES[severity]
    except KeyError:
        raise ConfigError(f"palette: severity must be one of {sorted(SEVERITIES)}, got {severity!r}") from None


def summary_mark(column: str) -> Mark:
    """The line of a summary column: its dimension's mark for ``h<k>_...``, else :data:`BASELINE`.

    Parameters
    ----------
    column : str
        A feature column's name.

    Returns
    -------
    Mark

    Examples
    --------
    >>> summary_mark("h1_landscape_l1").label, summary_mark("mean_correlation").label
    ('H1', 'baseline')
    """
    prefix, _, _ = column.partition("_")
    if len(prefix) == 2 and prefix[0] == "h" and prefix[1] in "012":
        return DIMENSIONS[int(prefix[1])]
    return BASELINE


def layer_style(k: int) -> tuple[LineStyle, str]:
    """Line style and marker of the ``k``-th landscape layer (0-based); unique for the first 20 layers.

    Parameters
    ----------
    k : int
        The layer, from 0.

    Returns
    -------
    linestyle, marker : str, str
    """
    return LINESTYLES[k % len(LINESTYLES)], _LAYER_MARKERS[(k // len(LINESTYLES)) % len(_LAYER_MARKERS)]


def diverging_colormap() -> LinearSegmentedColormap:
    """The correlation map's colours (:data:`DIVERGING`) as a matplotlib colormap.

    Returns
    -------
    matplotlib.colors.LinearSegmentedColormap
    """
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("riskshape_diverging", list(DIVERGING))


def colours() -> frozenset[str]:
    """Every colour of the palette, as upper-case ``#RRGGBB``.

    Returns
    -------
    frozenset of str
    """
    marks = [*DIMENSIONS, *SEVERITIES.values(), ALERT, THRESHOLD, BASELINE]
    named = (INK, MUTED_INK, RULE, FAINT, HEADER_FILL, CODE_FILL, REGIME_FILL, EVENT_FILL)
    report = (CAUTION_EDGE, CAUTION_FILL, GOOD, BAD)
    return frozenset(c.upper() for c in (*(m.color for m in marks), *named, *report, *DIVERGING))


def css() -> str:
    """The palette as CSS custom properties and severity classes, for HTML pages.

    Returns
    -------
    str
        A ``:root{...}`` block (``--rs-ink``, ``--rs-h0``, ...) and ``.severity-<word>`` rules.
    """
    names = {
        "ink": INK,
        "muted-ink": MUTED_INK,
        "rule": RULE,
        "faint": FAINT,
        "header-fill": HEADER_FILL,
        "code-fill": CODE_FILL,
        "caution-edge": CAUTION_EDGE,
        "caution-fill": CAUTION_FILL,
        "good": GOOD,
        "bad": BAD,
        "alert": ALERT.color,
        "threshold": THRESHOLD.color,
        **{m.label.lower(): m.color for m in DIMENSIONS},
        **{f"severity-{word}": m.color for word, m in SEVERITIES.items()},
    }
    root = ":root{" + "".join(f"--rs-{name}:{value};" for name, value in names.items()) + "}"
    # severity in a page: a coloured edge beside the word (the word itself stays ink-coloured)
    rules = "".join(f".severity-{word}{{border-left:.4em solid var(--rs-severity-{word})}}" for word in SEVERITIES)
    return root + "\n" + rules + "\n"
