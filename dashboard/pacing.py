"""How often the page asks the server for news: the page-side scripts that pace its requests.

Owns the small scripts the callbacks register on the page (a gate for
ticking panels, the views' watchdog, the script that paints each answer and
asks for the next, and the one that keeps the disagreement's and the
signals' time axes together) and ``triggered_ids``. Strings and one helper:
no components, no callbacks of its own.
"""

from __future__ import annotations

from dash import ctx

from dashboard import ids

# A tick asks for an update only once the previous one has been answered, so
# that a slow browser or server never piles up requests (Dash drops the answer
# to a request that a newer one overtook, and the page would stand still).
# After STALL_TICKS unanswered ticks it asks again anyway. The diagnosis and
# guided-check panels tick through this gate.
STALL_TICKS = 25
ASK_WHEN_ANSWERED = f"""
function(n, cursor, request) {{
    if (!request || (cursor && cursor.tick === request.tick) || n - request.tick > {STALL_TICKS}) {{
        return {{tick: n || 0, at: Date.now()}};
    }}
    return window.dash_clientside.no_update;
}}
"""
# The views are paced by their answers instead (PAINT_AND_ASK_NEXT): each answer asks for
# the next update at once, though no sooner than MIN_GAP_MS after the
# previous request, without a tick in between (a tick and its gate cost the
# page a callback run's bookkeeping per update). Their interval is a
# watchdog: it asks when nothing is on its way, on the page's start, on
# Follow after Pause page, and STALL_MS after a request whose answer never
# came. The replay bar asks for its position with every request, while the
# bar is shown (no request per tick when live).
MIN_GAP_MS = 80
RESUME_MS = 1000  # more than MIN_GAP_MS: an answered request this old has no next one coming
STALL_MS = 10_000
_ASK = """
    const ask = {tick: (request ? request.tick : 0) + 1, at: Date.now()};
    const replaying = !(barClass || "").includes("hidden");
"""
WATCHDOG = f"""
function(n, cursor, request, barClass) {{
    const age = request ? Date.now() - (request.at || 0) : Infinity;
    const answered = !request || (cursor && cursor.tick === request.tick);
    if (!(answered ? age > {RESUME_MS} : age > {STALL_MS})) {{
        return [window.dash_clientside.no_update, window.dash_clientside.no_update];
    }}
    {_ASK.strip()}
    return [ask, replaying ? ask : window.dash_clientside.no_update];
}}
"""
# Each answer also paints texts (cursor["paint"]: readouts, status line, link
# table) straight into elements that hold no children for React, sparing a
# round of Dash's bookkeeping per text. Every answer carries every readout and
# the status line: Dash may run this once for two close answers, and texts that
# changed only in the first would be lost. The page skips unchanged texts and
# markup (the markup last painted is kept on the element).
PAINT_AND_ASK_NEXT = f"""
function(cursor, request, paused, barClass) {{
    const paint = (cursor && cursor.paint) || {{}};
    for (const [id, text] of Object.entries(paint.text || {{}})) {{
        const element = document.getElementById(id);
        if (element && element.textContent !== text) {{ element.textContent = text; }}
    }}
    for (const [id, markup] of Object.entries(paint.html || {{}})) {{
        const element = document.getElementById(id);
        if (element && element.dataset.painted !== markup) {{
            element.innerHTML = markup;
            element.dataset.painted = markup;
        }}
    }}
    if (paused || !cursor || !request || cursor.tick !== request.tick) {{ return; }}
    const next = () => {{
        {_ASK.strip()}
        window.dash_clientside.set_props("{ids.REQUEST}", {{data: ask}});
        if (replaying) {{ window.dash_clientside.set_props("{ids.REPLAY_REQUEST}", {{data: ask}}); }}
    }};
    const wait = {MIN_GAP_MS} - (Date.now() - (request.at || 0));
    if (wait > 0) {{ setTimeout(next, wait); }} else {{ next(); }}
}}
"""
# The disagreement and the robot's signals share a time axis: a zoom or pan of
# one (its relayoutData) is applied to the other's x axis at once, in the page.
# Applying a range the other already shows does nothing, so the two never
# answer each other back and forth.
SHARE_TIME_AXIS = """
function(first, second) {
    const ids = ["%s", "%s"];
    const fired = (window.dash_clientside.callback_context.triggered[0] || {}).prop_id || "";
    const from = fired.startsWith(ids[1]) ? 1 : 0;
    const change = from ? second : first;
    if (!change) { return; }
    let range = null;
    if ("xaxis.range[0]" in change) { range = [change["xaxis.range[0]"], change["xaxis.range[1]"]]; }
    else if ("xaxis.range" in change) { range = change["xaxis.range"]; }
    const auto = change["xaxis.autorange"] === true;
    if (!range && !auto) { return; }
    const other = document.querySelector("#" + ids[1 - from] + " .js-plotly-plot");
    if (!other || !other.layout || !window.Plotly) { return; }
    const axis = other.layout.xaxis || {};
    if (auto) {
        if (!axis.autorange) { window.Plotly.relayout(other, {"xaxis.autorange": true}); }
        return;
    }
    const shown = axis.range || [];
    if (shown[0] === range[0] && shown[1] === range[1]) { return; }
    window.Plotly.relayout(other, {"xaxis.range": range});
}
""" % (ids.ERRORS, ids.SIGNALS)


def triggered_ids() -> list[str]:
    """The ids of every input that triggered the running callback, first seen first.

    Dash merges the triggers of calls of one callback that wait in the page
    at once into one call; each of them must count.
    """
    return list(dict.fromkeys(ctx.triggered_prop_ids.values()))


