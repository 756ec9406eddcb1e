"""`podwatch recompute --signals`: a data.NAME column per signal after the contract columns."""

from __future__ import annotations

import csv
import io
import math

from receiver.cli import main
from tests.cli.test_recompute import COLUMNS
from tests.synthetic import constant_twist_messages, write_recording


def _run(capsys, *args):
    code = main(list(args))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _recording(tmp_path, practice_profile, metric_profile):
    bot = constant_twist_messages(practice_profile, seconds=1.0)
    other = constant_twist_messages(metric_profile, seconds=1.0)
    for k, m in enumerate(bot):
        if k % 4:
            m["data"] = {"arm": 0.5 * k} | ({"claw": 1e300} if k == 5 else {})
    for k, m in enumerate(other):
        m["data"] = {"lift": -float(k)}
    # the two robots interleaved, as a shared receiver records them
    messages = [m for pair in zip(bot, other) for m in pair]
    return write_recording(tmp_path / "two.jsonl", messages, [practice_profile, metric_profile]), bot, other


def test_signals_become_columns_with_empty_cells_where_absent(tmp_path, capsys, practice_profile, metric_profile):
    rec, bot, other = _recording(tmp_path, practice_profile, metric_profile)
    code, out, err = _run(capsys, "recompute", str(rec), "--signals")
    assert code == 0, err
    assert out.splitlines()[0] == COLUMNS + ",data.arm,data.claw,data.lift"
    rows = list(csv.DictReader(io.StringIO(out)))
    assert len(rows) == len(bot) + len(other)
    bot_rows = [r for r in rows if r["robot"] == practice_profile.name]
    other_rows = [r for r in rows if r["robot"] == metric_profile.name]
    assert [r["data.arm"] for r in bot_rows] == ["" if k % 4 == 0 else repr(0.5 * k) for k in range(len(bot))]
    assert [r["data.claw"] for r in bot_rows] == ["1e+300" if k == 5 else "" for k in range(len(bot))]
    assert all(r["data.lift"] == "" for r in bot_rows) and all(r["data.arm"] == "" for r in other_rows)
    assert [float(r["data.lift"]) for r in other_rows] == [-float(k) for k in range(len(other))]
    # the contract columns are the same as without --signals
    code, plain, _ = _run(capsys, "recompute", str(rec))
    assert code == 0
    plain_rows = list(csv.DictReader(io.StringIO(plain)))
    assert [{k: r[k] for k in COLUMNS.split(",")} for r in rows] == plain_rows
    assert all(math.isfinite(float(r["x"])) for r in rows)


def test_without_signals_the_columns_stay_the_contract(tmp_path, capsys, practice_profile, metric_profile):
    rec, _, _ = _recording(tmp_path, practice_profile, metric_profile)
    code, out, err = _run(capsys, "recompute", str(rec), "--out", str(tmp_path / "out.csv"))
    assert code == 0, err
    assert (tmp_path / "out.csv").read_text().splitlines()[0] == COLUMNS


def test_a_recording_without_signals_gets_no_extra_column(tmp_path, capsys, practice_profile):
    rec = write_recording(tmp_path / "plain.jsonl", constant_twist_messages(practice_profile), [practice_profile])
    code, out, err = _run(capsys, "recompute", str(rec), "--signals")
    assert code == 0, err
    assert out.splitlines()[0] == COLUMNS and len(out.splitlines()) == 1 + 201
