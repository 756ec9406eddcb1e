"""The profile drawing: valid SVG carrying every wheel with its signed offsets."""

from __future__ import annotations

import xml.etree.ElementTree as ET

from dashboard.drawing import main, profile_svg
from tests.conftest import FIXTURES


def test_drawing_names_every_wheel_with_signed_offsets(practice_profile, metric_profile):
    text = profile_svg(practice_profile)
    root = ET.fromstring(text)
    words = " ".join(t.text or "" for t in root.iter("{http://www.w3.org/2000/svg}text"))
    assert "left" in words and "right" in words and "back" in words
    # REP 103 signs (common practice): right wheel y < 0, back wheel x < 0.
    assert "x +0.75, y -6.25" in words and "x -5.5, y 0" in words
    metric = " ".join(t.text or "" for t in ET.fromstring(profile_svg(metric_profile)).iter("{http://www.w3.org/2000/svg}text"))
    assert "right (reversed)" in metric and "(REP 103, mm)" in metric


def test_bundled_drawing_is_current():
    # The README shows dashboard/profile-practice-bot.svg; regenerate with
    # python -m dashboard.drawing replay_fixtures/practice-bot.toml dashboard/profile-practice-bot.svg
    from receiver.formats.profile_toml import load_profile

    bundled = (FIXTURES.parent / "dashboard" / "profile-practice-bot.svg").read_text()
    assert bundled == profile_svg(load_profile(FIXTURES / "practice-bot.toml"))


def test_command_line(tmp_path, capsys):
    out = tmp_path / "p.svg"
    assert main([str(FIXTURES / "practice-bot.toml"), str(out)]) == 0
    assert out.read_text().startswith("<svg")
    assert main([str(tmp_path / "missing.toml"), str(out)]) == 1
    assert "no such file" in capsys.readouterr().err
