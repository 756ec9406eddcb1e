"""The words the checks' results are shown in, shared by the command line and the page.

Owns how a diagnosis, its explanations, a guided-check line and a suggested
profile change read, so that ``podwatch diagnose`` and the dashboard say the
same thing in the same words. Strings only: no printing, no HTML.
"""

from __future__ import annotations

import math

from receiver.analysis.diagnose import Diagnosis, Ranked
from receiver.analysis.guided_check import GuidedResult

TOP_HYPOTHESES = 5
CHECK_MARK = {True: "pass", False: "FAIL", None: "----"}
SUGGESTED = "suggested profile change"


def clip_line(diagnosis: Diagnosis) -> str:
    """What the clip held, e.g. "practice-bot: 1000 samples over 10.0 s; 310 in driven, 900 deg turned"."""
    unit = diagnosis.profile.distance_unit
    return (
        f"{diagnosis.robot}: {diagnosis.samples} samples over {diagnosis.duration_s:.1f} s; "
        f"{diagnosis.travel:.3g} {unit} driven, {math.degrees(diagnosis.rotation_rad):.0f} deg turned"
    )


def confidence_words(diagnosis: Diagnosis) -> str:
    """The confidence with the margin behind it, e.g. "high (margin 3.1 in between ...)"."""
    return (
        f"{diagnosis.confidence} (margin {diagnosis.margin:.3g} {diagnosis.profile.distance_unit} "
        "between the first and second explanation)"
    )


def explanation_id(ranked: Ranked) -> str:
    """A hypothesis id with the ones no clip can tell from it, e.g. "swapped:left,right (= ...)"."""
    equivalent = ranked.equivalent
    return ranked.hypothesis.id + (f" (= {', '.join(h.id for h in equivalent)})" if equivalent else "")


def change_lines(changes: list[str], say_none: bool = True) -> list[str]:
    """The "suggested profile change:" header and one indented line per change."""
    if not changes:
        return [f"{SUGGESTED}: none"] if say_none else []
    return [f"{SUGGESTED}:", *(f"  {change}" for change in changes)]


def guided_outcome(guided: GuidedResult) -> str:
    """ "all checks pass", or how many problems and which."""
    flags = guided.flags
    return "all checks pass" if guided.passed else f"{len(flags)} problem(s): " + ", ".join(flags)
