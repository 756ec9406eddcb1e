"""The page's structure: pickers of a few choices open without a search box, and the numbers
lead the grid (so that they come first on a tablet, where the grid is one column)."""

from __future__ import annotations

from dash import dcc

from dashboard import editor_form, ids, layout
from dashboard.settings import Settings
from receiver.odometry.profile_edit import PROFILE_SETTINGS, WHEEL_SETTINGS

FEW = 8  # choices a person reads at a glance: no search box for these


def components(node):
    yield node
    children = getattr(node, "children", None)
    for child in children if isinstance(children, (list, tuple)) else [children]:
        if child is not None and not isinstance(child, (str, int, float)):
            yield from components(child)


def test_pickers_of_a_few_choices_have_no_search_box():
    page = layout.build(Settings(), replay_mode=True)
    pickers = [c for c in components(page) if isinstance(c, dcc.Dropdown)]
    # The robot picker starts empty; a team has a few robots.
    few = [c for c in pickers if c.id == ids.ROBOT or 0 < len(c.options) <= FEW]
    assert {ids.ROBOT, ids.WINDOW, ids.SPEED, ids.DIAGNOSE_SECONDS, ids.EDITOR_METHOD} <= {c.id for c in few}
    assert all(c.searchable is False for c in few), [c.id for c in few if c.searchable is not False]
    # Lists that may grow long keep their search box: recordings, a robot's signals (up to 32 a message).
    long = {c.id: c for c in pickers if c.id in (ids.RECORDING_CHOICE, ids.SIGNAL_PICK)}
    assert len(long) == 2 and all(getattr(c, "searchable", True) is not False for c in long.values())
    # The profile editor's fields of a few choices (units, conventions, true or false).
    chosen = [editor_form._control(key, setting, None) for key, setting in {**PROFILE_SETTINGS, **WHEEL_SETTINGS}.items()
              if setting.choices or setting.kind is bool]
    assert chosen and all(c.searchable is False for c in chosen if isinstance(c, dcc.Dropdown))


def test_the_numbers_lead_the_grid():
    page = layout.build(Settings(), replay_mode=False)
    grid = next(c for c in components(page) if getattr(c, "className", "") == "grid")
    first = grid.children[0]
    inside = {c.id for c in components(first) if getattr(c, "id", None)}
    assert {ids.POSITION_NOW, ids.HEADING_GROWTH, ids.GROWTH_STRETCH, ids.LOOP_P95, ids.JITTER} <= inside
    assert not any(isinstance(c, dcc.Graph) for c in components(first))
