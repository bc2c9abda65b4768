r"""Reconciling a design with what the bench showed.

Unknowns that commonly explain a first unit's behaviour: the tank's effective
capacitance (part tolerance plus stray, as one scale factor on C1, C2 and C3),
the coil's Q, and the transistor's β.  Measurements: the frequency, and
optionally the threshold value of one part (the decade-box experiment) and
the output amplitude.  The fit minimises, by least squares on the logarithms,

.. math:: \sum_m \left(\frac{\ln y_m^{model} - \ln y_m^{bench}}{\sigma_m}\right)^2
          + \sum_p \left(\frac{\ln p - \ln p_0}{\tau_p}\right)^2

with σ_m the reading's uncertainty and τ_p the part's tolerance (a prior that
keeps unconstrained unknowns at their nominal values).  Several
explanations are fitted — the capacitance alone, with the coil's Q, with β,
with both — and the one with the lowest Akaike score (misfit plus a penalty
per unknown) is reported, with its margin over the next: that is which
explanation the readings support and how strongly.  The posterior
uncertainty of each fitted unknown comes from the Jacobian at the solution.

References
----------
Tarantola, *Inverse Problem Theory*, least squares with Gaussian priors
(from memory); ``scipy.optimize.least_squares``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy.optimize import least_squares

from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.threshold import find_threshold
from ringwise.design import Design, get_param, with_param
from ringwise.errors import DesignError

#: Reading uncertainties (relative), common practice, no source: a counter
#: reading with the probe's loading, a decade box's step, a scope's amplitude.
SIGMA_F: Final = 1e-3
SIGMA_THRESHOLD: Final = 0.02
SIGMA_AMPLITUDE: Final = 0.03
#: Prior widths (relative) of the unknowns beyond their catalogue tolerance.
STRAY_ALLOWANCE: Final = 0.05
Q_PRIOR: Final = 0.3
#: An unknown counts as determined when its posterior uncertainty is below this
#: fraction of its prior.
DETERMINED: Final = 0.5
UNKNOWNS: Final = ("C_scale", "Q_L", "beta")
#: Smallest frequency reading accepted, Hz (far below any design here).
MIN_READING_HZ: Final = 1.0
#: Explanations tried (indices into UNKNOWNS).
SUBSETS: Final = ((0,), (0, 1), (0, 2), (0, 1, 2))
#: Akaike's penalty per fitted unknown; ΔAIC over 10 is strong evidence, 4-10
#: moderate, below that weak (Burnham & Anderson, Model Selection and
#: Multimodel Inference, from memory).
AIC_PER_PARAMETER: Final = 2.0
#: Inside a chosen explanation the priors only regularise: widened by this.
PRIOR_WIDENING: Final = 10.0


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


def _apply(design: Design, p: np.ndarray) -> Design:
    k, q, b = np.exp(p)
    out = design
    for part in ("C1", "C2", "C3"):
        v = get_param(design, part)
        if v is not None:
            out = with_param(out, part, v * k)
    out = with_param(out, "Q_L", design.tank.Q_L * q)
    return with_param(out, "beta", design.device.beta * b)


def _model(design: Design, threshold_param: str | None, want_amp: bool) -> dict[str, float]:
    s = solve(design)
    if s.f_osc is None:
        raise ReconcileError("the model has no oscillation frequency at these values")
    out = {"f": s.f_osc}
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


def reconcile(
    design: Design,
    f_measured: float,
    threshold: tuple[str, float] | None = None,
    amplitude: float | None = None,
) -> Reconciled:
    """Fit C scale, Q_L and β to the bench readings; the as-built design and the verdict."""
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
    bench = {"f": f_measured}
    sigma = {"f": SIGMA_F}
    if threshold:
        bench["threshold"], sigma["threshold"] = threshold[1], SIGMA_THRESHOLD
    if amplitude is not None:
        bench["amplitude"], sigma["amplitude"] = amplitude, SIGMA_AMPLITUDE
    tol = design.tolerances
    prior = np.array([tol.C + STRAY_ALLOWANCE, Q_PRIOR, math.log(tol.beta_ratio) / 2])
    want_amp = amplitude is not None

    def fit_subset(free: tuple[int, ...]):
        def residuals(q: np.ndarray) -> np.ndarray:
            p = np.zeros(3)
            p[list(free)] = q
            try:
                m = _model(_apply(design, p), th_param, want_amp)
            except (ReconcileError, ValueError):
                return np.full(len(bench) + len(free), 1e3)
            r = [math.log(m[k] / bench[k]) / sigma[k] for k in bench]
            return np.concatenate([r, q / (PRIOR_WIDENING * prior[list(free)])])

        sol = least_squares(
            residuals, np.zeros(len(free)), method="lm", x_scale=prior[list(free)], diff_step=1e-4
        )
        chi2 = float(np.sum(sol.fun[: len(bench)] ** 2))
        return sol, chi2 + AIC_PER_PARAMETER * len(free)

    # Candidate explanations: the capacitance always (it sets the frequency), plus
    # at most one unknown per further reading.
    subsets = [s for s in SUBSETS if len(s) <= len(bench)]
    scored = sorted(((fit_subset(s), s) for s in subsets), key=lambda t: t[0][1])
    (best, best_score), free = scored[0]
    runner_up = scored[1][0][1] - best_score if len(scored) > 1 else None
    p = np.zeros(3)
    p[list(free)] = best.x
    post = prior.copy()
    try:
        cov = np.linalg.inv(best.jac.T @ best.jac)
        post[list(free)] = np.sqrt(np.diag(cov))
    except np.linalg.LinAlgError:
        pass
    as_built = _apply(design, p)
    nominal_model = _model(design, th_param, want_amp)
    built_model = _model(as_built, th_param, want_amp)
    names = {"C_scale": 1.0, "Q_L": design.tank.Q_L, "beta": design.device.beta}
    fitted = []
    for i, name in enumerate(UNKNOWNS):
        change = math.expm1(p[i])
        fitted.append(
            Fitted(
                name=name,
                nominal=names[name],
                fitted=names[name] * (1 + change),
                change=change,
                sigma=float(post[i]),
                prior=float(prior[i]),
                determined=i in free,
            )
        )
    readings = {k: (bench[k], nominal_model[k], built_model[k]) for k in bench}
    return Reconciled(as_built, fitted, readings, _explain(fitted, runner_up), runner_up)


def _explain(fitted: list[Fitted], margin: float | None) -> str:
    words = {
        "C_scale": "the tank's effective capacitance (tolerance plus stray)",
        "Q_L": "the coil's Q",
        "beta": "the transistor's β",
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
        text += f". Held at nominal (not needed to explain the readings): {', '.join(loose)}"
    if margin is not None:
        strength = "strong" if margin > 10 else "moderate" if margin > 4 else "weak"
        text += f". Evidence over the next explanation: {strength} (ΔAIC = {margin:.1f})"
    return text + "."
