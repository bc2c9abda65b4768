r"""Reconciling a design with what the bench showed.

Unknowns that commonly explain a first unit's behaviour: the tank's effective
capacitance (part tolerance plus stray, as one scale factor on C1, C2 and C3),
the coil's Q, the transistor's β and, when the design has one, the load.
Measurements: the frequency, and optionally the threshold value of one part
(the decade-box experiment), the output amplitude and the collector current
(the bias, which β moves through the divider).  The fit minimises, by least
squares on the logarithms,

.. math:: \sum_m \left(\frac{\ln y_m^{model} - \ln y_m^{bench}}{\sigma_m}\right)^2
          + \sum_p \left(\frac{\ln p - \ln p_0}{\tau_p}\right)^2

with σ_m the reading's uncertainty and τ_p the part's tolerance (a prior that
keeps unconstrained unknowns at their nominal values), each unknown held
inside a plausible range for its class (bounds, ``RANGES``).  Several
explanations are fitted — the capacitance alone, with one more unknown per
further reading — and the one with the lowest Akaike score (misfit plus a
penalty per unknown) is reported, with its margin over the next: that is
which explanation the readings support and how strongly.  The posterior
uncertainty of each fitted unknown comes from the Jacobian at the solution;
an unknown counts as determined only when the readings narrow it to less than
``DETERMINED`` of its prior, and an explanation that leans on an unknown the
readings cannot pin (β of a common-base stage, whose loop gain hardly
depends on it) is passed over.

The threshold reading enters as the loop gain with that part at the bench's
value, which must be 1: :math:`\ln T(x_{bench})/(\sigma_{th} S)` with
:math:`S = \partial\ln T/\partial\ln x` at the nominal design — one
solve instead of a root search per evaluation.  Model evaluations are
remembered across the explanations (they share many points).

References
----------
Tarantola, *Inverse Problem Theory*, least squares with Gaussian priors
(from memory); ``scipy.optimize.least_squares``.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy.optimize import least_squares

from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.threshold import find_threshold
from ringwise.design import Design, get_param, with_param
from ringwise.errors import DesignError

#: Reading uncertainties (relative), common practice, no source: a counter
#: reading with the probe's loading, a decade box's step, a scope's amplitude,
#: a multimeter's current range.
SIGMA_F: Final = 1e-3
SIGMA_THRESHOLD: Final = 0.02
SIGMA_AMPLITUDE: Final = 0.03
SIGMA_IC: Final = 0.02
#: Prior widths (relative) of the unknowns beyond their catalogue tolerance.
STRAY_ALLOWANCE: Final = 0.05
Q_PRIOR: Final = 0.3
#: A real load's uncertainty beyond its part tolerance (a probe, a cable).
LOAD_ALLOWANCE: Final = 0.2
#: An unknown counts as determined when its posterior uncertainty is below this
#: fraction of its prior.
DETERMINED: Final = 0.5
UNKNOWNS: Final = ("C_scale", "Q_L", "beta", "R_load")
#: Plausible range of each unknown as factors on its nominal value (common
#: practice, no source): the capacitance within three prior widths (at most
#: ±50 %); a coil at a quarter to twice its stated Q; β within the class's
#: spread (the design's ``beta_ratio`` either way); the load within a factor 2.
C_RANGE_WIDTHS: Final = 3.0
C_RANGE_MAX: Final = 0.5
Q_RANGE: Final = (0.25, 2.0)
LOAD_RANGE: Final = (0.5, 2.0)
#: Smallest frequency reading accepted, Hz (far below any design here).
MIN_READING_HZ: Final = 1.0
#: Akaike's penalty per fitted unknown; ΔAIC over 10 is strong evidence, 4-10
#: moderate, below that weak (Burnham & Anderson, Model Selection and
#: Multimodel Inference, from memory).
AIC_PER_PARAMETER: Final = 2.0
#: Inside a chosen explanation the priors only regularise: widened by this.
PRIOR_WIDENING: Final = 10.0
#: Relative step of the parts and unknowns for the finite differences.
DIFF_STEP: Final = 1e-3
#: Stopping tolerances of each fit: the residuals are in reading sigmas, so a
#: change of 1e-4 in them is far below what a reading can tell.
FIT_TOL: Final = 1e-4
#: Model evaluations per explanation at most: the readings are nearly
#: log-linear in the unknowns, so a few Gauss-Newton steps on the shared
#: Jacobian settle it (the tests recover injected values to 2 % or better).
FIT_EVALUATIONS: Final = 16
#: Residual standing for "the model cannot be evaluated here".
UNUSABLE: Final = 1e3
#: |∂ln T/∂ln x| below this: the threshold reading says nothing about the loop.
MIN_THRESHOLD_SLOPE: Final = 1e-3

#: Progress callback: fraction done in [0, 1]; returning False stops the fit,
#: which then reports the best explanation fitted so far.
Progress = Callable[[float], bool | None]


class ReconcileError(DesignError):
    """Bench readings that cannot be used as given."""


@dataclass(frozen=True)
class Fitted:
    name: str
    nominal: float
    fitted: float
    change: float  # relative
    sigma: float  # posterior, relative
    prior: float
    determined: bool


@dataclass(frozen=True)
class Reconciled:
    as_built: Design
    fitted: list[Fitted]
    readings: dict[str, tuple[float, float, float]]  # name: (bench, nominal model, as-built model)
    explanation: str
    #: AIC difference to the next-best explanation (None when only one was possible)
    evidence: float | None
    #: explanations fitted, of how many; ``stopped`` when the caller stopped the fit
    tried: int = 0
    of: int = 0
    stopped: bool = False


def _apply(design: Design, p: np.ndarray) -> Design:
    """``design`` with the unknowns' log-factors ``p`` (C scale, Q_L, β, R_load) applied."""
    k, q, b, r = np.exp(np.concatenate([p, np.zeros(len(UNKNOWNS) - len(p))]))
    out = design
    for part in ("C1", "C2", "C3"):
        v = get_param(design, part)
        if v is not None:
            out = with_param(out, part, v * k)
    if design.tank.Q_L is not None:  # a coil (a crystal has no Q_L to fit)
        out = with_param(out, "Q_L", design.tank.Q_L * q)
    out = with_param(out, "beta", design.device.beta * b)
    if design.load.R_load is not None:
        out = with_param(out, "R_load", design.load.R_load * r)
    return out


def _model(design: Design, threshold_param: str | None, want_amp: bool) -> dict[str, float]:
    """The readings as the model has them: f, the threshold value, the amplitude, I_C."""
    s = solve(design)
    if s.f_osc is None:
        raise ReconcileError("the model has no oscillation frequency at these values")
    out = {"f": s.f_osc, "IC": s.op.IC}
    if threshold_param is not None:
        th = find_threshold(design, threshold_param, start=s)
        if th.value is None:
            raise ReconcileError(f"the model has no threshold in {threshold_param}")
        out["threshold"] = th.value
    if want_amp:
        amp = steady_state(s).amp_out
        if amp is None:
            raise ReconcileError("the model has no steady amplitude at these values")
        out["amplitude"] = amp
    return out


class _Readings:
    """The bench readings and the model's log-residuals for them (remembered by p)."""

    def __init__(
        self,
        design: Design,
        bench: dict[str, float],
        threshold_param: str | None,
    ) -> None:
        self.design, self.bench, self.param = design, bench, threshold_param
        self.sigma = {
            "f": SIGMA_F,
            "threshold": SIGMA_THRESHOLD,
            "amplitude": SIGMA_AMPLITUDE,
            "IC": SIGMA_IC,
        }
        self.memo: dict[tuple[float, ...], np.ndarray] = {}
        nominal = solve(design)
        #: the nominal DC solution and frequency: where every evaluation's solve starts
        self.x0, self.f0 = nominal.op.x, nominal.f_osc
        self.slope = 1.0
        if threshold_param is not None:
            self.slope = self._threshold_slope()

    def _threshold_slope(self) -> float:
        """∂ln T/∂ln x of the threshold part at the bench's value, nominal design."""
        assert self.param is not None
        x = self.bench["threshold"]
        a = solve(with_param(self.design, self.param, x)).gain
        b = solve(with_param(self.design, self.param, x * (1 + DIFF_STEP))).gain
        if not (a > 0 and b > 0):
            raise ReconcileError(
                f"the model does not oscillate with {self.param} at the bench's threshold "
                "value; check the reading"
            )
        slope = math.log(b / a) / math.log1p(DIFF_STEP)
        if abs(slope) < MIN_THRESHOLD_SLOPE:
            raise ReconcileError(
                f"the loop gain hardly depends on {self.param}: its threshold says nothing"
            )
        return slope

    def residuals(self, p: np.ndarray) -> np.ndarray:
        key = tuple(np.round(p, 12))
        if key not in self.memo:
            self.memo[key] = self._residuals(p)
        return self.memo[key]

    def jacobian(self, p: np.ndarray) -> np.ndarray:
        """∂ residuals/∂p for every unknown at ``p`` (forward differences)."""
        r0 = self.residuals(p)
        cols = []
        for i in range(len(p)):
            q = p.copy()
            q[i] += DIFF_STEP
            cols.append((self.residuals(q) - r0) / DIFF_STEP)
        return np.column_stack(cols)

    def _residuals(self, p: np.ndarray) -> np.ndarray:
        try:
            d = _apply(self.design, p)
            s: Solved = solve(d, self.x0, self.f0)
            if s.f_osc is None:
                raise ReconcileError("no oscillation")
            model = {"f": s.f_osc, "IC": s.op.IC}
            if "amplitude" in self.bench:
                amp = steady_state(s).amp_out
                if amp is None:
                    raise ReconcileError("no amplitude")
                model["amplitude"] = amp
            out = []
            for k, v in self.bench.items():
                if k == "threshold":
                    assert self.param is not None
                    g = solve(with_param(d, self.param, v), s.op.x, s.f_osc).gain
                    if not g > 0:
                        raise ReconcileError("no loop at the threshold value")
                    out.append(math.log(g) / (self.sigma[k] * self.slope))
                else:
                    out.append(math.log(model[k] / v) / self.sigma[k])
            return np.array(out)
        except (ReconcileError, ValueError, ArithmeticError):
            return np.full(len(self.bench), UNUSABLE)


def _priors_and_ranges(design: Design) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Prior widths (log) and the plausible range (log bounds) of every unknown."""
    tol = design.tolerances
    c_prior = tol.C + STRAY_ALLOWANCE
    prior = np.array(
        [c_prior, Q_PRIOR, math.log(tol.beta_ratio) / 2, tol.of("R_load") + LOAD_ALLOWANCE]
    )
    c = math.log1p(min(C_RANGE_WIDTHS * c_prior, C_RANGE_MAX))
    b = math.log(tol.beta_ratio)
    lo = np.array([-c, math.log(Q_RANGE[0]), -b, math.log(LOAD_RANGE[0])])
    hi = np.array([c, math.log(Q_RANGE[1]), b, math.log(LOAD_RANGE[1])])
    return prior, lo, hi


def _subsets(n_readings: int, has_load: bool) -> list[tuple[int, ...]]:
    """Explanations: the capacitance always, plus at most one unknown per further reading."""
    others = [1, 2] + ([3] if has_load else [])
    out = []
    for k in range(0, min(n_readings - 1, len(others)) + 1):
        out += [(0, *c) for c in itertools.combinations(others, k)]
    return out


@dataclass(frozen=True)
class _Fit:
    free: tuple[int, ...]
    x: np.ndarray
    sigma: np.ndarray  # posterior (log) of the free unknowns
    score: float
    determined: bool


def _posterior(J: np.ndarray, fallback: np.ndarray) -> np.ndarray:
    """Posterior standard deviations (log) from the Jacobian of the residuals."""
    try:
        return np.sqrt(np.diag(np.linalg.inv(J.T @ J)))
    except np.linalg.LinAlgError:
        return fallback


def reconcile(
    design: Design,
    f_measured: float,
    threshold: tuple[str, float] | None = None,
    amplitude: float | None = None,
    IC: float | None = None,
    progress: Progress | None = None,
) -> Reconciled:
    """Fit C scale, Q_L, β (and the load) to the bench readings; the as-built design.

    ``IC`` is the measured collector current, A.  ``progress`` is called with the
    fraction done after each explanation; when it returns False the fit stops and
    the best explanation so far is reported (``stopped``).
    """
    if not f_measured >= MIN_READING_HZ:
        raise ReconcileError(f"f_measured must be at least {MIN_READING_HZ:g} Hz, got {f_measured}")
    th_param = threshold[0] if threshold else None
    if th_param is not None:
        try:
            present = get_param(design, th_param) is not None
        except ValueError as err:
            raise ReconcileError(str(err)) from err
        if not present:
            raise ReconcileError(f"threshold part {th_param!r} is not part of this design")
        if not threshold[1] > 0:
            raise ReconcileError("the threshold value must be positive")
    if amplitude is not None and not amplitude > 0:
        raise ReconcileError("the amplitude must be positive")
    if IC is not None and not IC > 0:
        raise ReconcileError("the collector current must be positive")
    bench = {"f": f_measured}
    if threshold:
        bench["threshold"] = threshold[1]
    if amplitude is not None:
        bench["amplitude"] = amplitude
    if IC is not None:
        bench["IC"] = IC
    readings = _Readings(design, bench, th_param)
    prior, lo, hi = _priors_and_ranges(design)
    n = len(UNKNOWNS)

    # One Jacobian at the nominal design serves every explanation (the readings
    # are close to log-linear in the unknowns over their ranges); the chosen
    # explanation's uncertainties are then taken at its own solution.
    J0 = readings.jacobian(np.zeros(n))

    def fit(free: tuple[int, ...], start: np.ndarray) -> _Fit:
        idx = list(free)
        prior_rows = np.diag(1.0 / (PRIOR_WIDENING * prior[idx]))

        def residuals(q: np.ndarray) -> np.ndarray:
            p = np.zeros(n)
            p[idx] = q
            return np.concatenate([readings.residuals(p), q / (PRIOR_WIDENING * prior[idx])])

        def jac(q: np.ndarray) -> np.ndarray:
            return np.vstack([J0[:, idx], prior_rows])

        sol = least_squares(
            residuals,
            np.clip(start[idx], lo[idx], hi[idx]),
            bounds=(lo[idx], hi[idx]),
            jac=jac,
            x_scale=prior[idx],
            ftol=FIT_TOL,
            xtol=FIT_TOL,
            gtol=FIT_TOL,
            max_nfev=FIT_EVALUATIONS,
        )
        chi2 = float(np.sum(sol.fun[: len(bench)] ** 2))
        sigma = _posterior(sol.jac, PRIOR_WIDENING * prior[idx])
        determined = bool(np.all(sigma < DETERMINED * prior[idx]))
        return _Fit(free, sol.x, sigma, chi2 + AIC_PER_PARAMETER * len(free), determined)

    subsets = _subsets(len(bench), design.load.R_load is not None)
    fits: list[_Fit] = []
    stopped = False
    for i, free in enumerate(subsets):
        # start from the best fit so far of a smaller explanation inside this one
        start = np.zeros(n)
        inner = [f for f in fits if set(f.free) < set(free)]
        if inner:
            parent = min(inner, key=lambda f: f.score)
            start[list(parent.free)] = parent.x
        fits.append(fit(free, start))
        if progress is not None and progress((i + 1) / len(subsets)) is False:
            stopped = i + 1 < len(subsets)
            break

    def at_solution(f: _Fit) -> _Fit:
        """``f`` with its uncertainties from the Jacobian at its own solution."""
        p = np.zeros(n)
        idx = list(f.free)
        p[idx] = f.x
        J = np.vstack([readings.jacobian(p)[:, idx], np.diag(1.0 / (PRIOR_WIDENING * prior[idx]))])
        sigma = _posterior(J, PRIOR_WIDENING * prior[idx])
        determined = bool(np.all(sigma < DETERMINED * prior[idx]))
        return _Fit(f.free, f.x, sigma, f.score, determined)

    # An explanation counts only when the readings pin every unknown it uses;
    # the capacitance alone always counts (the frequency pins it).  Judged at
    # each candidate's own solution, best score first.
    usable: list[_Fit] = []
    for f in sorted(fits, key=lambda f: f.score):
        judged = at_solution(f) if len(f.free) > 1 and (not usable or f.determined) else f
        if judged.determined or len(judged.free) == 1:
            usable.append(judged)
        if len(usable) == 2:
            break
    best = usable[0]
    runner_up = usable[1].score - best.score if len(usable) > 1 else None
    p = np.zeros(n)
    p[list(best.free)] = best.x
    post = prior.copy()
    post[list(best.free)] = best.sigma
    as_built = _apply(design, p)
    nominal_model = _model(design, th_param, amplitude is not None)
    built_model = _model(as_built, th_param, amplitude is not None)
    names = {
        "C_scale": 1.0,
        "Q_L": design.tank.Q_L,
        "beta": design.device.beta,
        "R_load": design.load.R_load,
    }
    fitted = []
    for i, name in enumerate(UNKNOWNS):
        nominal = names[name]
        if nominal is None:
            continue
        change = math.expm1(p[i])
        fitted.append(
            Fitted(
                name=name,
                nominal=nominal,
                fitted=nominal * (1 + change),
                change=change,
                sigma=float(post[i]),
                prior=float(prior[i]),
                determined=bool(i in best.free and float(post[i]) < DETERMINED * prior[i]),
            )
        )
    table = {k: (bench[k], nominal_model[k], built_model[k]) for k in bench}
    explanation = _explain(fitted, runner_up)
    if stopped:
        explanation += (
            f" Stopped after {len(fits)} of {len(subsets)} explanations: the best of those."
        )
    return Reconciled(
        as_built, fitted, table, explanation, runner_up, len(fits), len(subsets), stopped
    )


def _explain(fitted: list[Fitted], margin: float | None) -> str:
    words = {
        "C_scale": "the tank's effective capacitance (tolerance plus stray)",
        "Q_L": "the coil's Q",
        "beta": "the transistor's β",
        "R_load": "the load",
    }
    told = [
        f"{words[f.name]} is {100 * f.change:+.1f} % (± {100 * f.sigma:.1f} %)"
        for f in fitted
        if f.determined
    ]
    loose = [words[f.name] for f in fitted if not f.determined]
    text = "The readings are explained by: " + (
        "; ".join(told) if told else "nothing in particular"
    )
    if loose:
        text += f". Not determined by these readings (held at nominal): {', '.join(loose)}"
    if margin is not None:
        strength = "strong" if margin > 10 else "moderate" if margin > 4 else "weak"
        text += f". Evidence over the next explanation: {strength} (ΔAIC = {margin:.1f})"
    return text + "."
