"""Plain-text rendering of an :class:`~riskshape.explain.model.Explanation` (for the terminal and reports)."""

from __future__ import annotations

from riskshape.explain.model import ClusterExplanation, Explanation, LoopExplanation, Members

__all__ = ["render_text", "describe_cluster", "describe_clusters"]

_SHOWN = 12  # members listed before "..."


def describe_cluster(members: Members) -> str:
    """``{A, B, C}`` (at most a dozen names, then ``... (n in all)``)."""
    names = ", ".join(members[:_SHOWN])
    more = f", ... ({len(members)} in all)" if len(members) > _SHOWN else ""
    return "{" + names + more + "}"


def describe_clusters(groups: tuple[Members, ...]) -> str:
    """Clusters joined by ``+``, single assets counted together after the larger clusters.

    Examples
    --------
    >>> describe_clusters((("XQ01", "XQ02", "XQ03"), ("XQ04",), ("XQ05",)))
    '{XQ01, XQ02, XQ03} + 2 single assets {XQ04, XQ05}'
    """
    parts = [describe_cluster(g) for g in groups if len(g) > 1]
    singles = [g[0] for g in groups if len(g) == 1]
    if len(singles) == 1:
        parts.append(describe_cluster(tuple(singles)))
    elif singles:
        parts.append(f"{len(singles)} single assets {describe_cluster(tuple(singles))}")
    return " + ".join(parts)


def _count(n: int, word: str) -> str:
    return f"{n} {word}" + ("" if n == 1 else "s")


def _clusters(c: ClusterExplanation) -> list[str]:
    lines = [f"Clusters (H0), single linkage cut at distance {c.scale:.4f}: {c.scale_rule}."]
    if c.previous_end is None:
        lines.append(f"  First window of the run: nothing to compare; {_count(len(c.clusters_after), 'cluster')}.")
        return lines
    big_before = sum(1 for g in c.clusters_before if len(g) > 1)
    big_after = sum(1 for g in c.clusters_after if len(g) > 1)
    lines.append(
        f"  {c.previous_end}: {_count(len(c.clusters_before), 'cluster')} ({big_before} of 2+ assets); "
        f"{c.window_end}: {_count(len(c.clusters_after), 'cluster')} ({big_after} of 2+ assets)."
    )
    if not c.events:
        lines.append("  No cluster merged or split at this scale.")
    for e in c.events:
        if e.kind == "merge":
            lines.append(f"  Merged: {describe_clusters(e.before)} -> {describe_cluster(e.after[0])}")
        else:
            lines.append(f"  Split: {describe_cluster(e.before[0])} -> {describe_clusters(e.after)}")
    if c.entered:
        lines.append(f"  Entered the window: {', '.join(c.entered)}")
    if c.left:
        lines.append(f"  Left the window: {', '.join(c.left)}")
    if c.pair_changes:
        lines.append("  Largest correlation changes (before -> after):")
        for p in c.pair_changes:
            lines.append(f"    {p.first} ~ {p.second}: {p.before:+.3f} -> {p.after:+.3f} ({p.change:+.3f})")
    return lines


def _loops(x: LoopExplanation) -> list[str]:
    lines = ["Loops (H1), most persistent first:"]
    if not x.loops:
        lines.append("  No loop in this window.")
    for n, loop in enumerate(x.loops, start=1):
        since = f"{loop.windows_alive} window(s) in a row since {loop.first_seen}"
        if loop.lookback_exhausted:
            since = f"at least {since} (search limit reached)"
        lines.append(
            f"  {n}. born {loop.birth:.4f}, dies {loop.death:.4f} (persistence {loop.persistence:.4f}); {since}"
        )
        lines.append(f"     cycle: {' -> '.join(loop.members)} -> {loop.members[0] if loop.members else ''}")
    lines.append(f"  Method: {x.method}.")
    return lines


def render_text(explanation: Explanation) -> str:
    """Several lines of plain text describing an explanation (for the terminal and reports).

    Parameters
    ----------
    explanation : Explanation
        As built by :func:`riskshape.explain.explain_alert` or read by ``Explanation.from_json``.

    Returns
    -------
    str
        Lines joined by newlines, the first naming the summary and the window.

    Examples
    --------
    >>> from riskshape import Config, monitor
    >>> from riskshape.demo import generate_scenario
    >>> from riskshape.explain import explain_alert
    >>> scenario = generate_scenario(seed=1, n_days=90, assets_per_sector=3)
    >>> run = monitor(scenario.prices, Config(window=20, compute={"executor": "serial"}))
    >>> print(render_text(explain_alert(run, run.window_ends[-1], "h0_total_persistence")))  # doctest: +ELLIPSIS
    Explanation of h0_total_persistence at the window ending 2031-05-08
    Clusters (H0), single linkage cut at distance ...
      2031-04-10: 8 clusters (5 of 2+ assets); 2031-05-08: 7 clusters (6 of 2+ assets).
      Merged: 2 single assets {QV01, QV02} -> {QV01, QV02, QV03}
      Largest correlation changes (before -> after):
    ...
    """
    lines = [f"Explanation of {explanation.summary} at the window ending {explanation.window_end}"]
    if explanation.clusters is not None:
        lines += _clusters(explanation.clusters)
    if explanation.loops is not None:
        lines += _loops(explanation.loops)
    return "\n".join(lines)
