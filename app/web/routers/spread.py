"""Spread and synthesis endpoints: thin routes over the core's spread analyses.

The heavy ones (spread, synthesis, bench fit) run their ``run_*`` function in
a worker process (app/web/workers.py): admitted or refused at once (429),
stopped when the client goes away.  Snapping is light: a plain ``def`` route
in the thread pool.
"""

from __future__ import annotations

from typing import Any, Literal

from fastapi import APIRouter, Request
from pydantic import Field

from ringwise.analysis.reconcile import reconcile
from ringwise.analysis.spread import DEFAULT_SAMPLES, MAX_SAMPLES, spread_result
from ringwise.analysis.startup import MARGINAL_BELOW
from ringwise.analysis.synthesis import DEFAULT_GAIN, synthesize
from ringwise.design import PARAMETERS, Design, Device, Topology
from ringwise.preferred import SERIES, snap_design
from ringwise.quantities import SI
from ringwise.result import SpreadResult, from_attributes
from ringwise.web.schemas import RequestModel
from ringwise.web.workers import Progress, work_of

router = APIRouter(prefix="/api", tags=["spread"])

ERRORS: dict[int | str, dict[str, Any]] = {
    422: {"description": "Invalid input: every problem names its field"},
}
#: The heavy routes' answers: also 429 when too many of the kind are outstanding.
HEAVY_ERRORS: dict[int | str, dict[str, Any]] = {
    **ERRORS,
    429: {"description": "Too many of this kind running or waiting; see Retry-After"},
    503: {"description": "The server is stopping"},
}


_In = RequestModel


class Window(_In):
    low: SI("Hz", ge=1e-3, le=1e10) = Field(description="Lowest acceptable f_osc, Hz")
    high: SI("Hz", ge=1e-3, le=1e10) = Field(description="Highest acceptable f_osc, Hz")


class SpreadRequest(_In):
    design: Design
    samples: int = Field(
        default=DEFAULT_SAMPLES, ge=1, le=MAX_SAMPLES, description=f"Samples, at most {MAX_SAMPLES}"
    )
    seed: int = Field(default=1, ge=0, le=2**32 - 1, description="Random seed (reproducible)")
    margin: SI("", gt=1, le=100) = Field(
        default=MARGINAL_BELOW, description="Loop gain the margin yield asks for"
    )
    window: Window | None = None


def run_spread(req: SpreadRequest, progress: Progress | None = None) -> SpreadResult:
    """The spread of ``req`` (in a worker); stopped by ``progress``, it has the samples done."""
    window = (req.window.low, req.window.high) if req.window else None
    return spread_result(req.design, req.samples, req.seed, req.margin, window, progress)


@router.post("/spread", response_model=SpreadResult, responses=HEAVY_ERRORS)
async def post_spread(req: SpreadRequest, request: Request) -> SpreadResult:
    """Monte Carlo over tolerances and temperature: yield, percentiles, sensitivities."""
    return await work_of(request.app).run(request, "spread", run_spread, req)


class SnapRequest(_In):
    design: Design
    series: Literal[tuple(SERIES)] = Field(default="E24", description="IEC 60063 series")  # type: ignore[valid-type]
    keep_frequency: bool = Field(
        default=False,
        description="Re-trim one tank capacitor (C3, or the smaller of C1, C2) to keep f_osc",
    )


class PartChange(_In):
    part: str
    before: float
    after: float


class SnapOut(_In):
    design: Design
    changes: list[PartChange]
    f_before: float | None
    f_after: float | None
    gain_before: float
    gain_after: float
    trim: str | None = Field(
        default=None, description="The re-trim that keeps f_osc, or why it cannot be done"
    )
    trimmed: bool = Field(default=False, description="A capacitor was re-trimmed")


@router.post("/snap", response_model=SnapOut, responses=ERRORS)
def post_snap(req: SnapRequest) -> SnapOut:
    """Every part moved to the nearest standard value, with the effect on f_osc and gain."""
    r = snap_design(req.design, req.series, req.keep_frequency)
    return SnapOut(
        design=r.design,
        changes=[PartChange(part=p, before=a, after=b) for p, a, b in r.changes],
        f_before=r.f_before,
        f_after=r.f_after,
        gain_before=r.gain_before,
        gain_after=r.gain_after,
        trim=r.trim.text if r.trim else None,
        trimmed=r.trim is not None and r.trim.reason is None,
    )


class SynthesizeRequest(_In):
    topology: Topology = Topology.CE
    f: SI("Hz", ge=1e3, le=1e9) = Field(description="Target frequency, Hz")
    Vcc: SI("V", ge=0.5, le=1000) = Field(description="Supply, V")
    IC: SI("A", ge=1e-6, le=1.0) = Field(description="Collector current, A")
    gain: SI("", gt=1, le=20) = Field(default=DEFAULT_GAIN, description="Target loop gain")
    L: SI("H", ge=1e-12, le=1e3) | None = Field(default=None, description="Inductor to use, H")
    ratio: SI("", ge=0.01, le=100) | None = Field(default=None, description="C1/C2 to use")
    Q_L: SI("", ge=0.01, le=1e6) | None = Field(
        default=None, description="The coil's Q to keep (null: chosen)"
    )
    R_load: SI("Ω", ge=1e-3, le=1e12) | None = Field(
        default=None, description="The load to keep, Ω (null: no load)"
    )
    device: Device | None = Field(
        default=None, description="The transistor to keep (null: the general-purpose class)"
    )
    clapp: bool = Field(default=False, description="The Clapp form (C3 in series with L)")


class SynthesisOut(_In):
    design: Design
    f_osc: float | None
    gain: float
    reasons: list[str]
    f_target: float = Field(description="The target frequency, Hz")
    miss: float | None = Field(description="f_osc/f_target − 1 of the design returned")
    stopped: bool = Field(description="The search was stopped before its end")


def run_synthesize(req: SynthesizeRequest, progress: Progress | None = None) -> SynthesisOut:
    """The synthesis of ``req`` (in a worker); stopped, it has the best design so far."""
    r = synthesize(
        req.topology.value,
        req.f,
        req.Vcc,
        req.IC,
        gain=req.gain,
        L=req.L,
        ratio=req.ratio,
        Q_L=req.Q_L,
        R_load=req.R_load,
        device=req.device.model_dump() if req.device else None,
        clapp=req.clapp,
        progress=progress,
    )
    return from_attributes(SynthesisOut, r)


@router.post("/synthesize", response_model=SynthesisOut, responses=HEAVY_ERRORS)
async def post_synthesize(req: SynthesizeRequest, request: Request) -> SynthesisOut:
    """A buildable design from targets, in standard values, with a reason per choice."""
    return await work_of(request.app).run(request, "synthesize", run_synthesize, req)


class ThresholdReading(_In):
    param: Literal[tuple(PARAMETERS)]  # type: ignore[valid-type]
    value: SI("", ge=1e-15, le=1e12) = Field(description="Value at which it started (SI)")


class ReconcileRequest(_In):
    design: Design
    f_measured: SI("Hz", ge=1.0, le=1e10) = Field(description="Measured frequency, Hz")
    threshold: ThresholdReading | None = None
    amplitude: SI("V", ge=1e-6, le=1e4) | None = Field(
        default=None, description="Measured amplitude at the output node, V"
    )
    IC: SI("A", ge=1e-9, le=10.0) | None = Field(
        default=None, description="Measured collector current, A"
    )


class FittedOut(_In):
    name: str
    nominal: float
    fitted: float
    change: float
    sigma: float
    prior: float
    determined: bool


class ReadingOut(_In):
    bench: float
    nominal_model: float
    as_built_model: float


class ReconcileOut(_In):
    fitted: list[FittedOut]
    readings: dict[str, ReadingOut]
    explanation: str
    evidence_dAIC: float | None
    as_built: Design
    tried: int = Field(description="Explanations fitted")
    of: int = Field(description="Explanations there were to fit")
    stopped: bool = Field(description="The fit was stopped before trying them all")


@router.post("/reconcile", response_model=ReconcileOut, responses=HEAVY_ERRORS)
async def post_reconcile(req: ReconcileRequest, request: Request) -> ReconcileOut:
    """Fit capacitance, coil Q and β to bench readings; the as-built design."""
    return await work_of(request.app).run(request, "reconcile", run_reconcile, req)


def run_reconcile(req: ReconcileRequest, progress: Progress | None = None) -> ReconcileOut:
    """The bench fit of ``req`` (in a worker); stopped, it has the best explanation so far."""
    th = (req.threshold.param, req.threshold.value) if req.threshold else None
    r = reconcile(req.design, req.f_measured, th, req.amplitude, req.IC, progress=progress)
    return ReconcileOut(
        fitted=[FittedOut(**vars(f)) for f in r.fitted],
        readings={
            k: ReadingOut(bench=b, nominal_model=n, as_built_model=a)
            for k, (b, n, a) in r.readings.items()
        },
        explanation=r.explanation,
        evidence_dAIC=r.evidence,
        as_built=r.as_built,
        tried=r.tried,
        of=r.of,
        stopped=r.stopped,
    )
