"""The page's compare view (dashboard/compare_runs.py, compare_panel.py): its rows are
`podwatch compare --json`'s, its curves are each run's disagreement against distance, and
the recordings are read from the folder in a worker thread, one comparison at a time."""

from __future__ import annotations

import json
import math
import shutil

import pytest
from dash import html

from dashboard.compare_panel import Comparer
from dashboard.compare_runs import HEAD, compare_tables, curves_figure, row_cells, runs_of
from dashboard.sources import LiveSource
from dashboard.tabs import Station
from dashboard.workbench_figures import RUN_COLOURS
from receiver.cli import main
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording import read_recording
from receiver.live.hub import Hub
from tests.conftest import FIXTURES

NAMES = ["practice-bot-figure-eight-reversed-right.jsonl.gz", "practice-bot-figure-eight-wide-track.jsonl.gz",
         "practice-bot-figure-eight.jsonl.gz"]
# The row's numbers as `compare --json` names them, and the RunRow's JSON the page's row gives.
NUMBERS = ("samples", "duration_s", "distance", "turns", "final_position_error", "final_heading_error_deg",
           "worst_position_error", "worst_heading_error_deg", "loop_mean_s", "loop_p95_s")


def text_of(component) -> str:
    if isinstance(component, (str, int, float)):
        return str(component)
    children = getattr(component, "children", None)
    if children is None:
        return ""
    if not isinstance(children, (list, tuple)):
        children = [children]
    return " ".join(text_of(child) for child in children)


def cli_compare(capsys, *args: str) -> dict:
    assert main(["compare", "--json", *args]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("given", [False, True])
def test_the_rows_are_the_command_lines(capsys, given):
    paths = [str(FIXTURES / name) for name in NAMES]
    profile_file = FIXTURES / "practice-bot.toml"
    expected = cli_compare(capsys, *paths, *(["--profile", str(profile_file)] if given else []))
    given_profiles = {"practice-bot": load_profile(profile_file)} if given else {}
    runs = [run for path in paths for run in runs_of(read_recording(path), given_profiles, 1000)[0]]
    assert len(runs) == len(expected["rows"]) == 3
    for run, row in zip(runs, expected["rows"]):
        page = run.row.to_json()
        for key in NUMBERS:
            assert page[key] == pytest.approx(row[key], rel=1e-12, abs=1e-12), key
        for key in ("position_per_m", "heading_deg_per_turn"):
            assert page["growth"][key] == pytest.approx(row["growth"][key], rel=1e-12, abs=1e-12), key
    # The profile values that differ: the wide-track recording's header, unless a profile is given for all.
    table = text_of(compare_tables(runs))
    if given:
        assert expected["profile_differences"] == {} and "profile values that differ: none" in table
    else:
        assert expected["profile_differences"] == {"wheel.left.y": [6.25, 6.45, 6.25], "wheel.right.y": [-6.25, -6.45, -6.25]}
        assert "wheel.left.y 6.25 6.45 6.25" in table and "wheel.right.y -6.25 -6.45 -6.25" in table


def test_the_table_shows_each_number_with_its_unit():
    runs, skipped = runs_of(read_recording(FIXTURES / NAMES[0]), {}, 1000)
    assert skipped == []
    cells = row_cells(runs[0].row)
    assert len(cells) == len(HEAD) - 2
    # `podwatch compare` of the same recording: 10.0 s, 227.8 in, 1.34 turns, 52.00 in, -2.20 deg, 61.24 in, 8.99 in/m
    assert cells[:7] == ["10.0 s", "227.8 in", "1.34", "52.000 in", "-2.20 deg", "61.239 in", "179.98 deg"]
    assert cells[7:] == ["8.99 in/m", "+1612.45 deg/turn", "10.2 ms", "10.8 ms"]


def test_the_curves_are_each_runs_disagreement_against_distance():
    runs = [run for name in NAMES for run in runs_of(read_recording(FIXTURES / name), {}, 1000)[0]]
    figure = curves_figure(runs)
    position, heading = figure["data"][:3], figure["data"][3:]
    assert [trace["line"]["color"] for trace in position] == list(RUN_COLOURS[:3])
    assert [trace["name"] for trace in position] == [f"#{k + 1} {name}" for k, name in enumerate(NAMES)]
    reversed_run, _, fixed_run = position
    # 977 samples, under the budget: every row drawn; the distance driven grows to the row's distance.
    assert len(reversed_run["x"]) == 977
    assert reversed_run["x"][-1] == pytest.approx(runs[0].row.distance_m, abs=1e-3)
    assert reversed_run["y"][-1] == pytest.approx(runs[0].row.final_position, abs=1e-3)
    assert max(fixed_run["y"]) < 1e-3  # the fixed robot agrees to within encoder resolution
    assert all(trace["yaxis"] == "y2" for trace in heading)
    assert figure["layout"]["xaxis"]["title"]["text"] == "distance driven (m)"
    # The reversed encoder's heading error through its many wraps: one line (compare's +1612 deg
    # per turn over 1.34 turns), each step under half a turn.
    turned = [y for y in heading[0]["y"] if y is not None]
    assert max(abs(b - a) for a, b in zip(turned, turned[1:])) < 180.0
    assert turned[-1] - turned[0] == pytest.approx(1612.45 * runs[0].row.growth.turns, rel=1e-3)


def test_curves_in_other_units_are_drawn_in_the_first_runs_unit():
    inches = runs_of(read_recording(FIXTURES / NAMES[0]), {}, 1000)[0][0]
    metric = load_profile(FIXTURES / "practice-bot-metric.toml")
    data = read_recording(FIXTURES / "practice-bot-metric-wander.jsonl.gz")
    millimetres = runs_of(data, {metric.name: metric}, 1000)[0][0]
    figure = curves_figure([inches, millimetres])
    assert figure["layout"]["yaxis"]["title"]["text"] == "position (in)"
    drawn = figure["data"][1]["y"][-1]
    assert drawn == pytest.approx(millimetres.row.final_position / 25.4, abs=1e-3)  # 1 in = 25.4 mm (SI)


def test_the_comparer_reads_in_its_worker_and_leaves_out_what_it_cannot_read(tmp_path):
    folder = tmp_path / "recordings"
    folder.mkdir()
    for name in NAMES[:2]:
        shutil.copy(FIXTURES / name, folder / name)
    (folder / "notes.txt").write_text("not a recording\n")
    station = Station(live=LiveSource(Hub({})))
    comparer = Comparer(station, folder, 1000)
    assert comparer.start("tab", [*NAMES[:2], "notes.txt", "../etc"]).startswith("reading 1 of 4")
    assert comparer.start("other", NAMES[:1]).startswith("still comparing")  # one at a time
    comparer.join(30)
    done = comparer.result("tab")
    assert done.done and [run.label for run in done.runs] == NAMES[:2]
    assert any(note.startswith("notes.txt: left out") for note in done.notes)
    assert any(note.startswith("../etc: left out") and "not the name of a file" in note for note in done.notes)
    assert done.progress == "compared 2 runs of 4 recordings"
    assert comparer.result("other") is None  # another tab sees nothing of it
    assert math.isfinite(done.runs[0].row.final_position)
    assert isinstance(compare_tables(done.runs, done.notes), html.Div)
