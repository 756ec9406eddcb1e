"""Shared fixtures: the bundled example profiles and small synthetic runs."""

from __future__ import annotations

from pathlib import Path

import pytest

from receiver.formats.profile_toml import load_profile

FIXTURES = Path(__file__).resolve().parent.parent / "replay_fixtures"


@pytest.fixture
def practice_profile():
    return load_profile(FIXTURES / "practice-bot.toml")


@pytest.fixture
def metric_profile():
    return load_profile(FIXTURES / "practice-bot-metric.toml")
