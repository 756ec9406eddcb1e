"""Refinement: the continuous constants the robot code uses, fitted to its reported pose.

Owns the least-squares fit (scipy.optimize.least_squares) of track width,
sideways-wheel forward offset and per-wheel distance scale for one
hypothesis, their standard errors from the Jacobian, and which of them a
clip actually determines. Pure: arrays and profiles in, a Fit out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from receiver.analysis.mistakes import Hypothesis
from receiver.analysis.sample_clip import SampleClip
from receiver.odometry.conventions import imu_heading_change
from receiver.odometry.integrate import integrate, wrap_angle
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import Profile, forward_pair, sideways_wheels

# A constant is "determined" by a clip when its standard error is below this
# fraction of its size (or of the robot's size, for an offset near zero).
DETERMINED_REL = 0.01
# A fitted value replaces the profile's only when it differs by more than
# this fraction and by more than three standard errors: refitting noise
# into a profile helps nobody.
SIGNIFICANT_REL = 0.002
# Singular values of the Jacobian below this fraction of the largest are
# directions the clip says nothing about.
_RANK_REL = 1e-7
# How far a fit may move a constant: track width and diameters within this
# factor of the hypothesis's value, a sideways wheel's forward offset within
# the robot's characteristic length of it. A constant off by more is a
# mistake for the hypotheses to name, not a small error for the fit: a
# free fit could reverse a wheel with a negative diameter or swap two wheels
# with a negative track width, and then every explanation would fit.
SCALE_BOUND = 2.0
# The fitted values replace the profile's only when together they explain
# at least this many encoder counts' travel (RMS) more than the profile's:
# less is noise that pushed the fit along a direction the clip hardly sees.
MEANINGFUL_COUNTS = 3.0


@dataclass(frozen=True)
class Fitted:
    """One fitted constant, in ``unit``: the hypothesis profile's value (``before``), the
    fitted value and its standard error (``std``).
    """

    name: str
    before: float  # the value the hypothesis's profile has
    fitted: float
    std: float  # one standard error; inf when the clip does not determine it
    unit: str
    scale: float  # the size "determined" and "significant" are judged against
    meaningful: bool = True  # False when the fit as a whole explained too little to apply

    @property
    def determined(self) -> bool:
        """True when the clip pins the value down: ``std`` within DETERMINED_REL of ``scale``."""
        return bool(self.std <= DETERMINED_REL * self.scale)

    @property
    def significant(self) -> bool:
        """True when the fit replaces the profile's value: determined, and off by more than
        three standard errors and more than SIGNIFICANT_REL of ``scale``.
        """
        change = abs(self.fitted - self.before)
        return self.meaningful and self.determined and change > max(3.0 * self.std, SIGNIFICANT_REL * self.scale)

    def to_json(self) -> dict:
        """The constant as JSON; "applied" says whether the fit replaced the profile's value,
        an undetermined std is null.
        """
        std = self.std if math.isfinite(self.std) else None
        return {
            "name": self.name,
            "profile": round(self.before, 9),
            "fitted": round(self.fitted, 9),
            "std": None if std is None else float(f"{std:.3g}"),
            "unit": self.unit,
            "determined": self.determined,
            "applied": self.significant,
        }


@dataclass
class Fit:
    """The refinement of one hypothesis: each constant, the RMS residual (distance unit)
    before and after, and the profile with the significant values in it.
    """

    values: list[Fitted]
    score_before: float
    score_after: float  # with the significant fitted values in (``profile``)
    profile: Profile  # the hypothesis's profile with the significant fitted values in it
    method: str = "arc"  # the integration the fit compared with
    residuals: int = 0  # how many residuals the RMS is over (3 per sample)
    score_fitted: float = math.nan  # with every fitted value in: the least this hypothesis can leave
    correlation: float = 0.0  # the residuals' lag-one correlation (see lag_one_correlation)

    @property
    def independent_samples(self) -> float:
        """About how many independent samples the residuals hold (at least one)."""
        samples = self.residuals / 3.0
        return max(samples * (1.0 - self.correlation) / (1.0 + self.correlation), 1.0)

    @property
    def free_parameters(self) -> int:
        """How many constants were fitted."""
        return len(self.values)


class _Model:
    """Profile <-> parameter vector (track width, sideways x offsets, distance scales)."""

    def __init__(self, base: Profile, length: float) -> None:
        self.base = base
        self.pair = forward_pair(base)
        if self.pair is not None and base.wheels[self.pair[0]].y == base.wheels[self.pair[1]].y:
            self.pair = None  # no track width to fit (a sign hypothesis put both on one side)
        self.sideways = sideways_wheels(base)
        unit = base.distance_unit
        names, values, scales, units = [], [], [], []
        if self.pair is not None:
            a, b = (base.wheels[i] for i in self.pair)
            names.append("track width")
            values.append(abs(a.y - b.y))
            scales.append(abs(a.y - b.y))
            units.append(unit)
        for i in self.sideways:
            names.append(f"{base.wheels[i].name} wheel forward offset")
            values.append(base.wheels[i].x)
            scales.append(length)
            units.append(unit)
        for w in base.wheels:
            names.append(f"{w.name} wheel diameter")
            values.append(w.diameter)
            scales.append(w.diameter)
            units.append(unit)
        self.names, self.start = names, np.asarray(values)
        self.scales, self.units = np.asarray(scales), units
        self.offset = np.zeros(len(names), dtype=bool)
        self.offset[int(self.pair is not None) : int(self.pair is not None) + len(self.sideways)] = True

    def values(self, u: np.ndarray) -> np.ndarray:
        """The constants for the fit's free variables ``u`` (0 at the start), kept inside their
        bounds smoothly: an offset moves by at most its scale, a length by a factor of SCALE_BOUND.

        A plain bounded fit (scipy's trf with bounds) cost several times as much per call.
        """
        t = np.tanh(u)
        return np.where(self.offset, self.start + self.scales * t, self.start * SCALE_BOUND**t)

    def slopes(self, u: np.ndarray) -> np.ndarray:
        """d values / d u at ``u``."""
        t = np.tanh(u)
        return (1.0 - t * t) * np.where(self.offset, self.scales, self.values(u) * math.log(SCALE_BOUND))

    def profile(self, p: np.ndarray) -> Profile:
        wheels = list(self.base.wheels)
        k = 0
        if self.pair is not None:
            i, j = self.pair
            centre = 0.5 * (wheels[i].y + wheels[j].y)
            side = math.copysign(0.5 * p[0], wheels[i].y - wheels[j].y)
            wheels[i] = replace(wheels[i], y=centre + side)
            wheels[j] = replace(wheels[j], y=centre - side)
            k = 1
        for i in self.sideways:
            wheels[i] = replace(wheels[i], x=float(p[k]))
            k += 1
        for i in range(len(wheels)):
            wheels[i] = replace(wheels[i], diameter=float(p[k]))
            k += 1
        return self.base.with_wheels(tuple(wheels))


def _std_errors(jac: np.ndarray, residual_variance: float) -> np.ndarray:
    """Standard errors from J (m, p); inf for parameters in directions the data leaves free."""
    _, sv, vt = np.linalg.svd(jac, full_matrices=False)
    free = sv <= _RANK_REL * sv[0] if sv.size and sv[0] > 0 else np.ones(sv.shape, dtype=bool)
    inv = np.where(free, 0.0, 1.0 / np.where(free, 1.0, sv) ** 2)
    var = (vt.T**2 * inv).sum(axis=1) * residual_variance
    touches_free = ((vt[free].T ** 2) > 1e-12).any(axis=1) if free.any() else np.zeros(len(var), dtype=bool)
    return np.where(touches_free, np.inf, np.sqrt(var))


def lag_one_correlation(residuals: np.ndarray) -> float:
    """The residuals' (3, N) mean lag-one correlation, in [0, 1): how much each follows the one before.

    Residuals of an integrated pose are far from independent: one packet's
    rounding stays in every pose after it. With a lag-one correlation rho,
    N such residuals hold about N (1 - rho) / (1 + rho) independent ones
    (the first-order autoregressive model), and the variance of a fitted
    value grows by (1 + rho) / (1 - rho).
    """
    rho = []
    for row in residuals:
        a, b = row[1:] - row[1:].mean(), row[:-1] - row[:-1].mean()
        scale = math.sqrt(float(a @ a) * float(b @ b))
        if scale > 0.0:
            rho.append(float(a @ b) / scale)
    return min(max(float(np.mean(rho)) if rho else 0.0, 0.0), 1.0 - 1e-6)


def refine(
    clip: SampleClip, hypothesis: Hypothesis, reported: np.ndarray, method: str, length: float, tolerance: float = 1e-8
) -> Fit:
    """Fit the hypothesis's continuous constants so its recompute best matches ``reported`` (N, 3, REP 103).

    Residuals are the anchored pose differences, heading weighted by the
    robot's characteristic ``length`` (so both read as distances).
    ``tolerance`` is the relative change in cost (and in the constants) at
    which the fit stops: a runner-up only needs its score to a few digits.
    """
    model = _Model(hypothesis.robot_profile, length)
    anchor_at = np.flatnonzero(clip.anchor)
    anchor_pose = reported[anchor_at]
    dth_imu = None
    if hypothesis.robot_profile.uses_imu:
        prev = np.concatenate([clip.imu[:1], clip.imu[:-1]])
        dth_imu = imu_heading_change(clip.imu, prev, hypothesis.robot_profile.reported)

    def residuals(p: np.ndarray) -> np.ndarray:
        kin = Kinematics(model.profile(p))
        deltas = kin.body_delta(kin.travel(clip.dcounts), dth_imu)
        deltas[clip.anchor] = 0.0
        poses = integrate(deltas, np.zeros(3), method, anchor_at, anchor_pose, clip.loops)
        d = poses - reported
        return np.concatenate([d[:, 0], d[:, 1], length * wrap_angle(d[:, 2])])

    def rms(r: np.ndarray) -> float:
        return float(np.sqrt(3.0 * np.mean(r**2)))

    start_residual = residuals(model.start)
    # Imported here: scipy.optimize takes about a second to import, which every
    # podwatch command would otherwise pay at start-up.
    from scipy.optimize import least_squares

    result = least_squares(
        lambda u: residuals(model.values(u)), np.zeros(len(model.start)), method="trf", ftol=tolerance, xtol=tolerance
    )
    fitted = model.values(result.x)
    m, p = len(result.fun), len(model.start)
    rho = lag_one_correlation(result.fun.reshape(3, -1))
    variance = float(result.fun @ result.fun) / max(m - p, 1) * (1.0 + rho) / (1.0 - rho)
    std_u = _std_errors(result.jac, variance)
    known = np.isfinite(std_u)
    std = np.where(known, np.where(known, std_u, 0.0) * model.slopes(result.x), np.inf)
    values = [
        Fitted(name, float(before), float(after), float(s), unit, float(scale))
        for name, before, after, s, unit, scale in zip(model.names, model.start, fitted, std, model.units, model.scales)
    ]
    before = rms(start_residual)
    applied = np.where([v.significant for v in values], fitted, model.start)
    after = rms(residuals(applied))
    resolution = float(np.abs([w.travel_per_count for w in model.base.wheels]).max())
    if before - after < MEANINGFUL_COUNTS * resolution:
        values = [replace(v, meaningful=False) for v in values]
        applied, after = model.start, before
    return Fit(values, before, after, model.profile(applied), method, m, min(rms(result.fun), before), rho)
