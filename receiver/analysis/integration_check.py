"""How the robot code integrates its pose: taken from the profile, or found from its reports.

Owns the choice of integration method that diagnosis and refinement compare
with, so that the difference between methods (Euler at a 25 ms loop leaves
inches over a few turns) is never fitted into a constant nor read as a
convention mistake. Found by refining the leading explanation once per
method: the method the robot code uses leaves the least. Pure: arrays in,
a finding out.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from receiver.analysis.judgement import Noise, beyond
from receiver.analysis.mistakes import Hypothesis
from receiver.analysis.refine import Fit, refine
from receiver.analysis.sample_clip import SampleClip
from receiver.odometry.robot import INTEGRATIONS

# Without a word from the profile, compare with the exact one first.
DEFAULT_METHOD = "arc"


@dataclass
class IntegrationFinding:
    """The method used (``method``), where it came from (``source``: "profile", "given",
    "clip" or "assumed"), and, when found from the clip, each method's RMS after the fit
    and which ones the clip rules out.
    """

    method: str
    source: str
    residuals: dict[str, float] = field(default_factory=dict)
    ruled_out: list[str] = field(default_factory=list)
    fits: dict[str, Fit] = field(default_factory=dict)

    @property
    def tied(self) -> list[str]:
        """The methods the clip could not tell from the one used (it included)."""
        return sorted((m for m in self.residuals if m not in self.ruled_out), key=self.residuals.get)

    @property
    def decided(self) -> str | None:
        """The method when the profile says it or the clip rules out all others, else None."""
        if self.source in ("profile", "given"):
            return self.method
        return self.method if self.source == "clip" else None

    def to_json(self) -> dict:
        """The finding as JSON: method, source, residuals (distance unit) and ruled-out methods."""
        return {
            "method": self.method,
            "source": self.source,
            "residuals": {m: float(f"{r:.6g}") for m, r in self.residuals.items()},
            "ruled_out": self.ruled_out,
        }


def find_integration(
    clip: SampleClip,
    hypothesis: Hypothesis,
    reported: np.ndarray,
    length: float,
    noise_floor: float,
    decides: float,
    loose: float = 1e-3,
) -> IntegrationFinding:
    """Refine ``hypothesis`` under each method; the one leaving the least is the robot code's.

    A method is ruled out when it leaves at least ``decides`` times the
    clip's noise (judgement.Noise of the best fit, with ``noise_floor`` as
    the resolution) beyond the best one. When all are ruled out but the best, the source is
    "clip"; otherwise "assumed" (the best of those left). The methods that
    do not lead are fitted to the relative tolerance ``loose`` only.
    """
    first = refine(clip, hypothesis, reported, DEFAULT_METHOD, length)
    # The other methods only need their residuals to a few digits, to compare.
    fits = {m: first if m == DEFAULT_METHOD else refine(clip, hypothesis, reported, m, length, loose) for m in INTEGRATIONS}
    best = min(INTEGRATIONS, key=lambda m: (fits[m].score_fitted, m != DEFAULT_METHOD))
    if best != DEFAULT_METHOD:
        fits[best] = refine(clip, hypothesis, reported, best, length)
    residuals = {m: fit.score_fitted for m, fit in fits.items()}
    noise = Noise.of(fits[best], noise_floor, len(clip)).level
    ruled_out = [m for m in INTEGRATIONS if beyond(residuals[m], residuals[best]) >= decides * noise]
    source = "clip" if len(ruled_out) == len(INTEGRATIONS) - 1 else "assumed"
    return IntegrationFinding(best, source, residuals, ruled_out, fits)
