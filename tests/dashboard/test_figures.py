"""Figure builders on known samples: the traces hold exactly the points given."""

from __future__ import annotations

import math

import numpy as np

from dashboard import figures
from dashboard.block_summary import LOOP_BIN_MS, loop_bins


def values(field: list) -> np.ndarray:
    """A trace field as numbers (None, a gap, as NaN)."""
    return np.array([np.nan if v is None else v for v in field], dtype=float)


T = np.array([0.0, 0.5, 1.0, 1.5])
RECOMPUTE = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [2.0, 0.5, 0.25], [3.0, 1.0, 0.5]])
REPORTED = np.array([[0.0, 0.0, 0.0], [1.0, 0.25, 0.1], [2.0, 1.0, math.pi], [3.0, 2.0, -3.5]])


def test_track_map_holds_both_paths_anchors_and_footprints():
    points = figures.TrackPoints(RECOMPUTE[:, :2], REPORTED[:, :2], RECOMPUTE[:1, :2], (3.0, 1.0, 0.5), (3.0, 2.0, -3.5))
    fig = figures.track_map(points, 144.0, 18.0, "in")
    data = fig["data"]
    assert [d["name"] for d in data[:2]] == [figures.RECOMPUTE_NAME, figures.REPORTED_NAME]
    assert data[0]["line"]["color"] != data[1]["line"]["color"]
    np.testing.assert_array_equal(values(data[0]["x"]), np.round(RECOMPUTE[:, 0], 3))
    np.testing.assert_array_equal(values(data[1]["y"]), np.round(REPORTED[:, 1], 3))
    assert values(data[figures.TRACK_ANCHORS]["x"]).tolist() == [0.0]
    body = data[figures.TRACK_RECOMPUTE_BODY]
    assert len(body["x"]) == figures.FOOTPRINT_POINTS
    assert fig["layout"]["xaxis"]["title"]["text"] == "x (in), forward, REP 103"
    assert fig["layout"]["yaxis"]["title"]["text"] == "y (in), left"
    border = fig["layout"]["shapes"][0]
    assert (border["x0"], border["x1"], border["y0"], border["y1"]) == (-72.0, 72.0, -72.0, 72.0)


def test_footprint_is_a_square_of_the_given_side_with_its_arrow_along_the_heading():
    xs, ys = figures.footprint((10.0, 20.0, math.pi / 2), 18.0)
    corners = np.array([(x, y) for x, y in zip(xs[:5], ys[:5])])
    # Facing +y (REP 103 heading 90 deg): front-left corner is at (x - 9, y + 9).
    np.testing.assert_allclose(corners[0], [1.0, 29.0], atol=1e-12)
    np.testing.assert_allclose(corners[2], [19.0, 11.0], atol=1e-12)
    assert xs[5] is None and xs[8] is None
    np.testing.assert_allclose([xs[7], ys[7]], [10.0, 20.0 + 1.4 * 9.0], atol=1e-12)  # arrow tip ahead
    assert figures.footprint(None, 18.0) == ([None] * 12, [None] * 12)
    assert figures.footprint((0.0, float("nan"), 0.0), 18.0)[0] == [None] * 12


def test_track_extension_appends_paths_and_replaces_footprints():
    points = figures.TrackPoints(RECOMPUTE[2:, :2], REPORTED[2:, :2], np.empty((0, 2)), (3.0, 1.0, 0.5), None)
    update, indices, keep = figures.track_extension(points, 18.0, 500)
    assert indices == [0, 1, 2, 3, 4]
    assert update["x"][0] == [2.0, 3.0] and update["y"][1] == [1.0, 2.0]
    assert update["x"][2] == []
    assert update["x"][4] == [None] * figures.FOOTPRINT_POINTS
    assert keep == {"x": [500, 500, 500, 12, 12], "y": [500, 500, 500, 12, 12]}


def test_pose_traces_overlay_both_sources_with_headings_in_wrapped_degrees():
    fig = figures.pose_traces(T, RECOMPUTE, REPORTED, "mm")
    data = fig["data"]
    assert len(data) == 6
    assert [d["name"] for d in data] == [figures.RECOMPUTE_NAME, figures.REPORTED_NAME] * 3
    assert [d["yaxis"] for d in data] == ["y", "y", "y2", "y2", "y3", "y3"]
    np.testing.assert_array_equal(values(data[0]["x"]), np.round(T, 3))
    np.testing.assert_array_equal(values(data[3]["y"]), np.round(REPORTED[:, 1], 3))
    heading = values(data[5]["y"])
    np.testing.assert_allclose(heading, [0.0, math.degrees(0.1), 180.0, math.degrees(-3.5) + 360.0], atol=5e-4)
    assert fig["layout"]["yaxis"]["title"]["text"] == "x (mm)"
    assert fig["layout"]["yaxis3"]["title"]["text"] == "heading (deg)"


def test_a_heading_that_wraps_at_180_gets_a_gap_not_a_line_across_the_graph():
    # A robot turning counter-clockwise through 180 deg: 170, 179, then -179, -170.
    t = np.array([1.0, 2.0, 3.0, 4.0])
    heading = np.radians([170.0, 179.0, 181.0, 190.0])
    poses = np.column_stack([t, t, heading])
    fig = figures.pose_traces(t, poses, poses, "in")
    for trace in fig["data"][4:]:
        assert trace["x"] == [1.0, 2.0, 2.5, 3.0, 4.0]
        assert trace["y"][:2] == [170.0, 179.0] and trace["y"][2] is None and trace["y"][3:] == [-179.0, -170.0]
    assert fig["data"][0]["x"] == [1.0, 2.0, 3.0, 4.0]  # x and y keep every point
    update, _, _ = figures.pose_extension(t, poses, poses, 100)
    assert update["x"][5] == [1.0, 2.0, 2.5, 3.0, 4.0] and update["y"][5][2] is None
    # The heading error is drawn unwrapped (view.py unwraps it): one line, no gaps.
    errors = figures.disagreement_traces(t, np.zeros(4), np.array([170.0, 179.0, 181.0, 190.0]), "in")
    assert errors["data"][1]["x"] == [1.0, 2.0, 3.0, 4.0] and errors["data"][1]["y"] == [170.0, 179.0, 181.0, 190.0]
    assert errors["layout"]["yaxis2"]["title"]["text"] == "heading, unwrapped (deg)"


def test_appended_headings_break_at_a_wrap_between_the_graph_and_them():
    # The graph ends at 0.5 s with 175 deg (recompute) and 0 deg (reported); the
    # new rows start past the wrap for the recompute only.
    t = np.array([1.0, 2.0])
    poses = np.column_stack([t, t, np.radians([185.0, 190.0])])
    update, _, _ = figures.pose_extension(t, poses, poses * [1, 1, 0], 100, before=(0.5, math.radians(175.0), 0.0))
    assert update["x"][4] == [0.75, 1.0, 2.0] and update["y"][4] == [None, -175.0, -170.0]
    assert update["x"][5] == [1.0, 2.0] and update["y"][5] == [0.0, 0.0]


def test_wrapped_degrees_keeps_180_and_maps_minus_180_to_it():
    np.testing.assert_allclose(figures.wrapped_degrees(np.array([math.pi, -math.pi, 3 * math.pi / 2])), [180, 180, -90])


def test_pose_extension_sends_the_new_rows_of_every_trace():
    update, indices, keep = figures.pose_extension(T[1:2], RECOMPUTE[1:2], REPORTED[1:2], 100)
    assert indices == list(range(6)) and keep == 100
    assert update["x"] == [[0.5]] * 6
    assert update["y"] == [[1.0], [1.0], [0.0], [0.25], [0.0], [round(math.degrees(0.1), 3)]]


def test_disagreement_traces_and_extension():
    err = np.array([0.0, 0.25, np.nan, 1.0])
    head = np.array([0.0, -1.0, 2.0, 3.0])
    fig = figures.disagreement_traces(T, err, head, "in")
    np.testing.assert_array_equal(values(fig["data"][0]["y"]), np.round(err, 3))
    np.testing.assert_array_equal(values(fig["data"][1]["y"]), np.round(head, 3))
    assert fig["layout"]["yaxis"]["title"]["text"] == "position (in)"
    update, indices, keep = figures.disagreement_extension(T, err, head, 10)
    assert update["y"][0] == [0.0, 0.25, None, 1.0]


def test_loop_traces_mark_long_loops_and_the_threshold():
    fig = figures.loop_traces(T, np.array([10.0, 60.0, 9.0, 11.0]), T[1:2], np.array([60.0]), 50.0)
    assert values(fig["data"][figures.LOOP_LONG]["y"]).tolist() == [60.0]
    assert fig["layout"]["shapes"][0]["y0"] == 50.0
    assert fig["data"][figures.LOOP_LONG]["name"] == "longer than 50 ms"


def test_loop_histogram_counts_each_loop_once_and_highlights_long_bins():
    loop_ms = np.array([10.2, 10.7, 11.1, 55.0, np.nan])
    index, counts = loop_bins(loop_ms / 1000.0)
    fig = figures.loop_histogram(index, counts, LOOP_BIN_MS, 50.0, 21.75, 48.0)
    short, long = fig["data"]
    assert sum(short["y"]) == 3 and sum(long["y"]) == 1
    assert dict(zip(short["x"], short["y"]))[10.5] == 2
    assert [x for x, y in zip(long["x"], long["y"]) if y] == [55.5]
    assert min(long["x"]) > 50.0 > max(short["x"])
    assert [a["text"] for a in fig["layout"]["annotations"]] == ["mean 21.8 ms", "p95 48.0 ms"]


def test_histogram_labels_read_away_from_each_other_so_they_never_overlap():
    index, counts = loop_bins(np.array([0.0100, 0.0101, 0.0102]))
    for mean_ms, p95_ms in ((10.1, 10.2), (30.0, 10.2)):  # close together; a mean above p95 (a long tail)
        notes = figures.loop_histogram(index, counts, LOOP_BIN_MS, 50.0, mean_ms, p95_ms)["layout"]["annotations"]
        low, high = sorted(notes, key=lambda note: note["x"])
        assert (low["xanchor"], high["xanchor"]) == ("right", "left")  # each on the far side of its own line
        assert low["y"] == high["y"] and low["x"] <= high["x"]
    one = figures.loop_histogram(index, counts, LOOP_BIN_MS, 50.0, 10.1, float("nan"))["layout"]["annotations"]
    assert [(n["text"], n["xanchor"]) for n in one] == [("mean 10.1 ms", "left")]


def test_as_list_rounds_and_turns_nan_into_gaps():
    assert figures.as_list(np.array([1.234567, np.nan, 2.0])) == [1.235, None, 2.0]
    assert figures.as_list(np.empty(0)) == []
