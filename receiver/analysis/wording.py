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
    """The confidence with the margin and the noise it was judged against, e.g. "high (margin
    2.98 in between the first and second explanation after the fit, 5640 times the clip's noise ...)".
    """
    unit = diagnosis.profile.distance_unit
    noise = diagnosis.noise
    if not math.isfinite(diagnosis.margin):
        return f"{diagnosis.confidence} (only one explanation fits this profile)"
    if noise.residual < ROUNDING_FLOOR:
        residual = f"the best explanation's residual 0 {unit}, encoder resolution {noise.resolution:.2g} {unit}, {noise.samples} samples"
    else:
        residual = (
            f"the best explanation's residual {noise.residual:.2g} {unit} over about {noise.independent:.0f} "
            f"independent samples of {noise.samples}, encoder resolution {noise.resolution:.2g} {unit}"
        )
    return (
        f"{diagnosis.confidence} (margin {diagnosis.margin:.3g} {unit} between the first and second "
        f"explanation after the fit, {_times(diagnosis.margin_over_noise)} the clip's noise of "
        f"{noise.level:.2g} {unit}: {residual})"
    )


# Residuals and spreads below this (distance unit) are the arithmetic's
# rounding, not the robot's: they read as 0 and come out the same on any CPU.
ROUNDING_FLOOR = 1e-9


def small(value: float, digits: int = 2) -> str:
    """A residual or spread to ``digits`` significant digits; "0" below ROUNDING_FLOOR."""
    return "0" if abs(value) < ROUNDING_FLOOR else f"{value:.{digits}g}"


def _times(ratio: float) -> str:
    return f"{ratio:.2g} times" if ratio < 10 else f"{ratio:,.0f} times"


def integration_words(diagnosis: Diagnosis) -> str:
    """How the robot code integrates, and how podwatch knows, e.g. "euler, as the profile says"."""
    found = diagnosis.integration
    unit = diagnosis.profile.distance_unit
    if found.source == "profile":
        return f"{found.method}, as the profile says ([reported] integration)"
    if found.source == "given":
        return f"{found.method}, as given"
    left = ", ".join(f"{m} {small(found.residuals[m])}" for m in sorted(found.residuals, key=found.residuals.get))
    if found.source == "clip":
        return f"{found.method}, found from the clip (RMS after the fit: {left} {unit})"
    tied = " or ".join(found.tied)
    out = f"{tied}: the clip cannot tell {'these' if len(found.tied) > 1 else 'it'} apart (RMS after the fit: {left} {unit})"
    if found.ruled_out:
        out += f"; {' and '.join(found.ruled_out)} ruled out"
    return out + f"; compared with {found.method}"


def explanation_id(ranked: Ranked) -> str:
    """A hypothesis id with the ones no clip can tell from it, e.g. "swapped:left,right (= ...)",
    and those that end in the same profile once fitted ("~ ...")."""
    text = ranked.hypothesis.id
    if ranked.equivalent:
        text += f" (= {', '.join(h.id for h in ranked.equivalent)})"
    if ranked.same_after_fit:
        text += f" (~ {', '.join(r.hypothesis.id for r in ranked.same_after_fit)})"
    return text


def after_fit(ranked: Ranked) -> str:
    """A leader's score after its fit (3 decimals), or "-" for an explanation not refined."""
    return f"{ranked.score_after:.3f}" if ranked.fit is not None else "-"


def change_lines(changes: list[str], say_none: bool = True) -> list[str]:
    """The "suggested profile change:" header and one indented line per change."""
    if not changes:
        return [f"{SUGGESTED}: none"] if say_none else []
    return [f"{SUGGESTED}:", *(f"  {change}" for change in changes)]


def guided_outcome(guided: GuidedResult) -> str:
    """ "all checks pass", the moves to make again, or how many problems and which."""
    flags = guided.flags
    if guided.passed:
        return "all checks pass"
    parts = []
    if guided.refused:
        parts.append(f"make again: {', '.join(STEP_NAMES[kind] for kind in guided.refused)} (see why above)")
    if flags or not parts:
        parts.append(f"{len(flags)} problem(s): " + ", ".join(flags))
    return "; ".join(parts)


STEP_NAMES = {"forward": "the push forward", "left": "the push to the left", "turn": "the turn"}
