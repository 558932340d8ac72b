"""The one palette: every figure draws from it, nothing depends on colour alone.

Outside references: the sRGB transfer function (IEC 61966-2-1) and CIE 1976 L* for lightness in
greyscale; colorspacious' simulation of colour-vision deficiencies (Machado, Oliveira and
Fernandes 2009) and its CAM02-UCS colour difference; matplotlib's own tab10 colours (the
default cycle) as what the figures must no longer wear.
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Iterator

import numpy as np
import pandas as pd
import pytest
from matplotlib.artist import Artist
from matplotlib.axes import Axes
from matplotlib.collections import Collection
from matplotlib.colors import TABLEAU_COLORS, to_hex, to_rgba_array
from matplotlib.figure import Figure
from matplotlib.image import AxesImage
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.text import Text

from riskshape import Config, monitor
from riskshape.alerts.model import Firing
from riskshape.outputs import palette, plots
from riskshape.research.events import portfolio_drawdown_events

GROUPS = {
    "dimensions": [m.color for m in palette.DIMENSIONS],
    "severities": [m.color for m in palette.SEVERITIES.values()],
    "marks": [palette.ALERT.color, palette.THRESHOLD.color, palette.BASELINE.color],
}


def _lightness(hex_colour: str) -> float:
    """CIE 1976 L* of an sRGB colour (IEC 61966-2-1 linearisation, D65 luminance weights)."""
    srgb = to_rgba_array(hex_colour)[0, :3]
    linear = np.where(srgb <= 0.04045, srgb / 12.92, ((srgb + 0.055) / 1.055) ** 2.4)
    y = float(linear @ np.array([0.2126, 0.7152, 0.0722]))
    return 116.0 * (y ** (1 / 3) if y > (6 / 29) ** 3 else y / (3 * (6 / 29) ** 2) + 4 / 29) - 16.0


@pytest.mark.parametrize("group", ["dimensions", "severities"])
def test_a_group_reads_in_greyscale(group: str) -> None:
    # distinct lightness: at least 15 L* units apart (L* of black 0, white 100; values checked
    # against the CIE formula's known points below)
    assert _lightness("#000000") == pytest.approx(0.0, abs=1e-9)
    assert _lightness("#FFFFFF") == pytest.approx(100.0, abs=1e-6)
    assert _lightness("#777777") == pytest.approx(50.0, abs=0.5)  # mid grey ~ L* 50 (from memory)
    lightness = sorted(_lightness(c) for c in GROUPS[group])
    assert min(np.diff(lightness)) >= 15.0, lightness


@pytest.mark.parametrize("group", sorted(GROUPS))
@pytest.mark.parametrize("deficiency", ["deuteranomaly", "protanomaly", "tritanomaly"])
def test_a_group_stays_apart_under_colour_vision_deficiencies(group: str, deficiency: str) -> None:
    colorspacious = pytest.importorskip("colorspacious", reason="the test extra carries colorspacious")
    # Machado et al. (2009) at full severity (dichromacy), via colorspacious; CAM02-UCS distance
    simulated = [
        np.clip(
            colorspacious.cspace_convert(
                to_rgba_array(c)[0, :3], {"name": "sRGB1+CVD", "cvd_type": deficiency, "severity": 100}, "sRGB1"
            ),
            0.0,
            1.0,
        )
        for c in GROUPS[group]
    ]
    distances = [colorspacious.deltaE(a, b, input_space="sRGB1") for a, b in itertools.combinations(simulated, 2)]
    assert min(distances) >= 20.0, distances  # ~1 unit is a just-noticeable difference in CAM02-UCS


def test_each_group_differs_by_shape_or_line_and_severity_by_word() -> None:
    dims = palette.DIMENSIONS
    assert len({m.marker for m in dims}) == len({m.linestyle for m in dims}) == len(dims) == 3
    assert [m.label for m in dims] == ["H0", "H1", "H2"]
    severities = palette.SEVERITIES
    assert sorted(severities) == ["critical", "info", "warning"]  # riskshape's severity words
    assert all(mark.label == word for word, mark in severities.items())
    assert len({m.marker for m in severities.values()}) == 3
    marks = [palette.ALERT, palette.THRESHOLD, palette.BASELINE]
    assert len({(m.marker, m.linestyle) for m in marks}) == 3
    assert len({palette.layer_style(k) for k in range(20)}) == 20


def test_the_palette_is_not_matplotlibs_default_cycle() -> None:
    tab10 = {c.upper() for c in TABLEAU_COLORS.values()}
    assert len(tab10) == 10
    assert palette.colours().isdisjoint(tab10)
    assert all(len(c) == 7 and c.startswith("#") for c in palette.colours())


def test_the_css_names_every_severity_and_dimension() -> None:
    css = palette.css()
    for word, mark in palette.SEVERITIES.items():
        assert f"--rs-severity-{word}:{mark.color};" in css and f".severity-{word}{{" in css
    for mark in palette.DIMENSIONS:
        assert f"--rs-{mark.label.lower()}:{mark.color};" in css


def test_the_report_style_uses_only_palette_colours() -> None:
    from riskshape.outputs import report

    style = report._STYLE
    literal = {c.upper() for c in re.findall(r"#[0-9A-Fa-f]{6}\b", style)}
    assert len(literal) >= 10 and literal <= palette.colours()
    assert re.search(r"#[0-9A-Fa-f]{3}\b", style) is None  # no short-hand colour outside the palette
    assert "var(--rs-ink)" in style and "var(--rs-bad)" in style


# --- the figures ------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def run(small_prices: pd.DataFrame):
    return monitor(small_prices, Config(window=20, step=2, maxdim=2, compute={"executor": "serial"}))


def _firings(run, column: str) -> list[Firing]:
    ends = run.window_ends
    return [
        Firing("r", column, "level", ends[i], float(run.features.loc[ends[i], column]), 1.0, severity)
        for i, severity in ((3, "info"), (9, "warning"), (15, "critical"), (21, "warning"))
    ]


def _figures(run) -> Iterator[tuple[str, Figure]]:
    end = run.window_ends[-1]
    diagrams = [run.diagram(end, k) for k in range(3)]
    corr, labels = plots.window_correlation(run, end)
    events = portfolio_drawdown_events(run.prices, 0.02)
    yield "window", plots.plot_window(run, end)
    columns = ["mean_correlation", "h0_total_persistence", "h1_landscape_l1", "h2_total_persistence"]
    alerts = {
        "h0_total_persistence": _firings(run, "h0_total_persistence"),
        "mean_correlation": run.window_ends[[2, 5]],
    }
    regimes = pd.DataFrame({"name": ["a", "b"], "start": [end, end], "end": [end, end]})
    regimes.loc[0, "start"] = run.window_ends[0]
    regimes.loc[0, "end"] = regimes.loc[1, "start"] = run.window_ends[10]
    summaries = plots.plot_summaries(run.features, columns, alerts=alerts, events=events, regimes=regimes)
    yield "summaries", summaries
    for name, ax in (
        ("diagram", plots.plot_diagram(diagrams)),
        ("barcode", plots.plot_barcode(diagrams)),
        ("landscape", plots.plot_landscape(diagrams[1], dim=1)),
        ("empty landscape", plots.plot_landscape(np.empty((0, 2)), dim=2)),
        ("dendrogram", plots.plot_dendrogram(corr, labels)),
        ("heatmap", plots.plot_correlation_heatmap(corr, labels)),
    ):
        assert isinstance(ax.figure, Figure)
        yield name, ax.figure


def _colours_of(artist: Artist) -> Iterator[str]:
    """The colours an artist paints with (fully transparent paint left out)."""
    if isinstance(artist, Line2D):
        paints = [artist.get_color()]
        if artist.get_marker() not in (None, "None", "", " "):
            paints += [artist.get_markerfacecolor(), artist.get_markeredgecolor()]
    elif isinstance(artist, Collection):
        if artist.get_array() is not None:  # colour-mapped (a colorbar's mesh): judged by its map
            return
        if not artist.get_paths():  # draws nothing (a colorbar's empty dividers)
            return
        paints = [*to_rgba_array(artist.get_facecolor()), *to_rgba_array(artist.get_edgecolor())]
    elif isinstance(artist, Patch):
        paints = [artist.get_facecolor(), artist.get_edgecolor()] if artist.get_visible() else []
        if artist.get_hatch():
            paints.append(artist.get_hatchcolor() if hasattr(artist, "get_hatchcolor") else artist.get_edgecolor())
    elif isinstance(artist, Text):
        paints = [artist.get_color()] if artist.get_text() else []
    else:
        paints = []
    for paint in paints:
        rgba = to_rgba_array(paint)[0]
        if rgba[3] > 0:
            yield to_hex(rgba, keep_alpha=False).upper()


def _drawn(fig: Figure) -> Iterator[Artist]:
    """What riskshape drew: the axes' lines, collections, patches, images and texts, and the figure's texts."""
    yield from fig.texts
    title = getattr(fig, "_suptitle", None)  # matplotlib keeps the suptitle apart from fig.texts
    if title is not None:
        yield title
    for ax in fig.axes:
        yield from (*ax.lines, *ax.collections, *ax.patches, *ax.images, *ax.texts)


def _signature(artist: Artist) -> tuple[object, ...]:
    """What tells a series apart besides its colour: marker shape, line style (dashes), hatch."""
    if isinstance(artist, Line2D):
        return ("line", artist.get_marker(), artist.get_linestyle())
    if isinstance(artist, Patch):
        return ("patch", artist.get_hatch(), artist.get_linestyle())
    if isinstance(artist, Collection):
        shape = tuple(np.round(artist.get_paths()[0].vertices, 3).ravel()) if artist.get_paths() else ()
        return ("collection", shape, str(artist.get_linestyle()))
    raise AssertionError(f"unexpected series {artist!r}")


def _series(ax: Axes) -> dict[str, Artist]:
    """The axes' artists that have a legend entry, by label (the drawn artists, not the legend's copies)."""
    legend = ax.get_legend()
    shown = {t.get_text() for t in legend.get_texts()} if legend is not None else set()
    return {a.get_label(): a for a in (*ax.lines, *ax.collections, *ax.patches) if a.get_label() in shown}


def test_every_figure_uses_only_palette_colours(run) -> None:
    allowed = palette.colours()
    checked = 0
    for name, fig in _figures(run):
        for artist in _drawn(fig):
            if isinstance(artist, AxesImage):
                assert artist.get_cmap().name == palette.diverging_colormap().name, name
                continue
            for colour in _colours_of(artist):
                checked += 1
                assert colour in allowed, f"{name}: {artist!r} paints {colour}, not a palette colour"
        for ax in fig.axes:  # a colorbar's mesh uses the correlation map's colours
            for mesh in (c for c in ax.collections if c.get_array() is not None):
                assert mesh.get_cmap().name == palette.diverging_colormap().name, name
    assert checked > 50  # the walk does reach the figures' marks


def test_each_series_differs_by_more_than_colour(run) -> None:
    legends = 0
    for name, fig in _figures(run):
        for ax in fig.axes:
            if ax.get_legend() is None:
                continue
            legends += 1
            series = _series(ax)
            assert len(series) == len(ax.get_legend().get_texts()), name  # every entry found
            signatures = {label: _signature(artist) for label, artist in series.items()}
            assert len(set(signatures.values())) == len(signatures), f"{name}: {signatures}"
    assert legends >= 8  # diagram (x2), barcode (x2), landscape (x2), four summaries


def test_severities_are_marked_by_shape_and_word(run) -> None:
    column = "h0_total_persistence"
    ax = plots.plot_summary(run.features[column], alerts=_firings(run, column))
    assert isinstance(ax, Axes)
    legend = ax.get_legend()
    assert legend is not None
    labels = [t.get_text() for t in legend.get_texts()]
    assert labels == [column, "alert: info", "alert: warning", "alert: critical", "threshold"]
    by_label = {line.get_label(): line for line in ax.lines}
    for word, mark in palette.SEVERITIES.items():
        line = by_label[f"alert: {word}"]
        assert line.get_marker() == mark.marker and line.get_linestyle() == "None"
    assert len(by_label["alert: warning"].get_xdata()) == 2 and len(by_label["threshold"].get_xdata()) == 4
