"""The profile editor's state for one browser tab: the edits tried, their undo history, the method.

Owns what the page keeps in its own store (never on the server): the
selected robot, the edits as `--set` texts against the loaded profile, the
integration method, and the earlier states that Undo returns to. A change
from a form field is read with formats/profile_set.py (the messages of
`--set`) and checked with odometry/profile_edit.py; after each change the
edits are kept as the fewest `--set` settings that give the same profile, so
the page shows exactly the options that repeat it on the command line. Pure:
profiles and plain data in and out; no Dash, no clock, no I/O.
"""

from __future__ import annotations

import hashlib
import shlex
from dataclasses import dataclass, replace
from typing import Any

from receiver.formats.profile_set import edited_profile, edits_as_text, parse_edit
from receiver.odometry.integrate import METHODS
from receiver.odometry.profile_edit import (
    PROFILE_SETTINGS,
    WHEEL_SETTINGS,
    Value,
    apply_edits,
    edits_between,
    profile_values,
    show_value,
)
from receiver.odometry.robot import Profile

SOURCE = "editor"  # how a refused edit names where it came from
DEFAULT_METHOD = "arc"
# Undo steps kept: a person dragging a value makes one step per pause, and the
# page sends the whole store with every edit.
UNDO_STEPS = 100


@dataclass(frozen=True)
class Step:
    """One state of the editor: the edits (`--set` texts, in order) and the method."""

    edits: tuple[str, ...] = ()
    method: str = DEFAULT_METHOD


@dataclass(frozen=True)
class EditorState:
    """A tab's editor for ``robot``: the current step and the earlier ones (oldest first)."""

    robot: str | None = None
    now: Step = Step()
    history: tuple[Step, ...] = ()

    @classmethod
    def from_store(cls, data: Any, robot: str | None) -> EditorState:
        """The state the page's store holds for ``robot``; a fresh one when it holds another robot's
        or nothing usable (a store is the page's: read it defensively)."""
        if not isinstance(data, dict) or data.get("robot") != robot:
            return cls(robot)
        try:
            now = _step(data.get("now"))
            history = tuple(_step(s) for s in data.get("history") or ())[-UNDO_STEPS:]
        except (TypeError, ValueError):
            return cls(robot)
        return cls(robot, now, history)

    def to_store(self) -> dict:
        """Plain JSON for the page's store."""
        return {"robot": self.robot, "now": _plain(self.now), "history": [_plain(s) for s in self.history]}

    @property
    def edited(self) -> bool:
        """True when the state differs from the loaded profile with the default method."""
        return self.now != Step()

    def profile(self, loaded: Profile) -> Profile:
        """``loaded`` with the edits made; ProfileError if they no longer apply (another profile loaded)."""
        return edited_profile(loaded, self.now.edits, SOURCE)

    def _push(self, step: Step) -> EditorState:
        if step == self.now:
            return self
        return replace(self, now=step, history=(*self.history, self.now)[-UNDO_STEPS:])

    def with_field(self, loaded: Profile, key: str, text: str) -> EditorState:
        """One form field changed to ``text``: the edit read and checked against the profile as it
        stands (``key`` as `--set` spells it, wheels by index: "wheel.1.reversed"); ProfileError
        naming the key when refused. A value equal to the current one changes nothing."""
        current = self.profile(loaded)
        edit = parse_edit(current, key, text, SOURCE)
        return self.with_profile(loaded, apply_edits(current, [edit], SOURCE))

    def with_profile(self, loaded: Profile, target: Profile) -> EditorState:
        """Edits that turn ``loaded`` into ``target`` (same wheels), as one undoable step: how a
        field change and the diagnosis's suggested profile arrive."""
        texts = tuple(edits_as_text(loaded, edits_between(loaded, target)))
        return self._push(Step(texts, self.now.method))

    def with_method(self, method: str) -> EditorState:
        """Integrate with ``method`` (one of integrate.METHODS) from now on."""
        if method not in METHODS:
            raise ValueError(f"unknown method {method!r}")
        return self._push(Step(self.now.edits, method))

    def reset(self) -> EditorState:
        """Back to the loaded profile and the default method (an undoable step)."""
        return self._push(Step())

    def undo(self) -> EditorState:
        """The state before the last change; the same state when there is none."""
        if not self.history:
            return self
        return replace(self, now=self.history[-1], history=self.history[:-1])

    def options(self) -> str:
        """The command-line options that repeat the current step: "--set KEY=VALUE ... --method M"."""
        words = [w for text in self.now.edits for w in ("--set", text)]
        if self.now.method != DEFAULT_METHOD:
            words += ["--method", self.now.method]
        return shlex.join(words)


def _step(data: Any) -> Step:
    if data is None:
        return Step()
    edits, method = data["edits"], data["method"]
    if not all(isinstance(e, str) for e in edits) or method not in METHODS:
        raise ValueError("not an editor step")
    return Step(tuple(edits), method)


def _plain(step: Step) -> dict:
    return {"edits": list(step.edits), "method": step.method}


def field_keys(profile: Profile) -> list[str]:
    """Every editable key of ``profile`` in editor order, wheels by index ("wheel.0.x"): the
    form's fields, stable while a wheel is renamed."""
    keys = list(PROFILE_SETTINGS)
    for index in range(len(profile.wheels)):
        keys += [f"wheel.{index}.{key}" for key in WHEEL_SETTINGS]
    return keys


def field_values(profile: Profile) -> dict[str, Value]:
    """The value of each of ``field_keys(profile)``."""
    named = profile_values(profile)
    values: dict[str, Value] = {key: named[key] for key in PROFILE_SETTINGS}
    for index, wheel in enumerate(profile.wheels):
        values.update({f"wheel.{index}.{key}": getattr(wheel, key) for key in WHEEL_SETTINGS})
    return values


def field_text(value: Any) -> str:
    """A form field's value as `--set` reads it (a number input sends a number, a choice its text;
    an emptied or unreadable number arrives as None, read as an empty text)."""
    if value is None:
        return ""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return show_value(float(value))
    return show_value(value) if isinstance(value, bool) else str(value)


def profile_signature(profile: Profile) -> str:
    """A short text that changes whenever any value of ``profile`` does: what the page remembers
    its form and a diagnosis's suggestion were made for."""
    return hashlib.sha1(repr(profile).encode()).hexdigest()[:16]

