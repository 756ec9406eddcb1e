"""The texts the page paints into its readouts and link table, built from numbers.

Owns how each readout and the link-health table read (units, dashes for
unknown values, escaped HTML). The page's own script paints them into their
elements (pacing.py): sent as components' children, each text cost the page
a round of Dash's bookkeeping. Pure: numbers in, strings out.
"""

from __future__ import annotations

import math
from html import escape

from dashboard import readouts
from receiver.live.session import LinkState, RobotSnapshot


def disagreement_values(disagreement: readouts.Disagreement | None, unit: str) -> list[str]:
    """Texts for POSITION_NOW ... HEADING_GROWTH, in that order, then GROWTH_STRETCH."""
    q = readouts.quote
    if disagreement is None:
        return [q(math.nan, unit)] * 3 + [q(math.nan, "deg")] * 3 + ["no robot to compare yet"]
    d, g = disagreement, disagreement.growth
    compared = math.isfinite(d.position_now)
    per_m = q(g.position_per_m, f"{unit}/m", sign=True) if math.isfinite(g.position_per_m) or not compared \
        else f"needs {readouts.MIN_TRAVEL_M:g} m"
    per_turn = q(g.heading_per_turn_deg, "deg/turn", 1, sign=True) if math.isfinite(g.heading_per_turn_deg) \
        or not compared else "needs \u00bc turn"
    return [
        q(d.position_now, unit), q(d.position_worst, unit), per_m,
        q(d.heading_now_deg, "deg", 1, sign=True), q(d.heading_worst_deg, "deg", 1), per_turn,
        growth_stretch(d),
    ]


def growth_stretch(d: readouts.Disagreement) -> str:
    """Over what the growth figures are computed, and from how far a rate is shown."""
    minimums = f"rates from {readouts.MIN_TRAVEL_M:g} m driven and \u00bc turn"
    if not math.isfinite(d.position_now):
        return f"growth: no pose from the robot to compare yet ({minimums})"
    g = d.growth
    start, end = d.stretch_s
    since = f"the re-anchor at {start:.1f} s" if g.from_anchor else f"the window's start ({start:.1f} s)"
    return (f"growth over {g.distance_m:.2f} m and {g.turns:.2f} turns, from {since} to {end:.1f} s; "
            f"{minimums}")


def loop_values(loop: readouts.LoopTiming, jitter_s: float) -> list[str]:
    """Texts for LOOP_RATE ... JITTER, in that order."""
    q = readouts.quote
    return [
        q(loop.rate_hz, "Hz", 1), q(loop.mean_s * 1000, "ms", 1), q(loop.p95_s * 1000, "ms", 1),
        q(loop.max_s * 1000, "ms", 1), f"{loop.long} loop{'' if loop.long == 1 else 's'}",
        q(jitter_s * 1000, "ms", 2),
    ]


_STATE_CLASS = {LinkState.LIVE: "live", LinkState.QUIET: "quiet", LinkState.WAITING: "waiting"}
LINK_HEAD = ("robot", "link", "messages", "rate", "gaps", "duplicates", "out of order", "decode errors")


def _cell(tag: str, text: str, css_class: str = "") -> str:
    attribute = f' class="{css_class}"' if css_class else ""
    return f"<{tag}{attribute}>{escape(text)}</{tag}>"


def link_table(
    snapshots: dict[str, RobotSnapshot], now: float, selected: str | None, unattributed: dict[str, int],
    receiver_lines: list[str] = (),
) -> str:
    """The link-health table as HTML (every text escaped), one row per robot; under it
    the receiver's own problems and notes (``receiver_lines``), one line each."""
    rows = []
    for robot, snap in sorted(snapshots.items()):
        if snap.state is LinkState.QUIET:
            state = f"no data for {max(now - snap.last_rx, 0.0):.0f} s"
        else:
            state = snap.state.value
        errors = ", ".join(f"{reason} {n}" for reason, n in sorted(snap.errors.items())) or "none"
        cells = [_cell("td", robot), _cell("td", state, f"state {_STATE_CLASS[snap.state]}")] + [
            _cell("td", text) for text in (f"{snap.messages}", f"{snap.rate_hz:.0f} msg/s", f"{snap.gaps}",
                                           f"{snap.duplicates}", f"{snap.late}", errors)]
        row_class = ' class="selected"' if robot == selected else ""
        rows.append(f"<tr{row_class}>{''.join(cells)}</tr>")
    lines = list(receiver_lines)
    if unattributed:
        text = ", ".join(f"{reason} {n}" for reason, n in sorted(unattributed.items()))
        lines.append(f"refused before a robot could be named: {text}")
    caption = f"<caption>{'<br>'.join(map(escape, lines))}</caption>" if lines else ""
    head = "".join(_cell("th", h) for h in LINK_HEAD)
    return f'<table class="link-table"><thead><tr>{head}</tr></thead><tbody>{"".join(rows)}</tbody>{caption}</table>'
