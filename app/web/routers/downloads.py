"""CSV downloads of the sheet's plots and of the Monte Carlo samples (``/api/csv``).

Each answer is a :mod:`ringwise.exports` table of the same data the sheet
draws, for the design in the query string (the share link's form).  The time
domain run's curves are downloaded from its job (``/api/simulate/jobs/{id}/csv``).
"""

from __future__ import annotations

from typing import Annotated, Final, Literal

from fastapi import APIRouter, Query, Request, Response

from ringwise.analysis.spread import DEFAULT_SAMPLES, MAX_SAMPLES, SpreadError, monte_carlo
from ringwise.design import Design
from ringwise.exports import (
    columns_csv,
    loop_table,
    noise_table,
    reactance_table,
    samples_table,
    tuning_table,
    what_if_table,
)
from ringwise.web.dependencies import ERRORS, csv_response, texts_for
from ringwise.web.errors import ApiError
from ringwise.web.tools import _design
from ringwise.web.view import build_view
from ringwise.web.workers import work_of

router = APIRouter(prefix="/api/csv")

#: The sheet's plots with a CSV, and the table of each.
SHEET_TABLES: Final = {
    "loop": loop_table,
    "sweep": what_if_table,
    "reactance": reactance_table,
    "noise": noise_table,
    "tuning": tuning_table,
}


@router.get("/sheet/{plot}", responses=ERRORS, response_class=Response)
def get_sheet_csv(
    plot: Literal["loop", "sweep", "reactance", "noise", "tuning"],
    request: Request,
    sweep_param: Annotated[
        str | None, Query(max_length=16, description="Part of the what-if sweep")
    ] = None,
) -> Response:
    """One of the sheet's plots as CSV, for the design in the query (a share link)."""
    texts, _link_problems = texts_for(request)
    view = build_view(texts, sweep_param, None, with_sweep=plot == "sweep", with_curves=True)
    if not view["ok"] or not view.get("curves") or not view["curves"].get(plot):
        problems = view.get("problems") or [
            {"field": "design", "message": "has no such curve", "type": "value_error"}
        ]
        raise ApiError(422, "the design in the query cannot be analysed", problems)
    header, cols = SHEET_TABLES[plot](view["curves"][plot])
    return csv_response(columns_csv(header, cols), f"ringwise-{plot}.csv")


@router.get("/spread", responses=ERRORS, response_class=Response)
async def get_spread_samples(
    request: Request,
    samples: Annotated[
        int, Query(ge=1, le=MAX_SAMPLES, description="Monte Carlo samples")
    ] = DEFAULT_SAMPLES,
    seed: Annotated[int, Query(ge=0, description="Random seed")] = 1,
) -> Response:
    """Every Monte Carlo sample at every temperature (the spread panel's run for the
    same samples and seed), for the design in the query."""
    texts, _link_problems = texts_for(request)
    design = _design(texts)
    text = await work_of(request.app).run(
        request, "spread", samples_csv, design, samples, seed, with_progress=False
    )
    return csv_response(text, "ringwise-spread-samples.csv")


def samples_csv(design: Design, samples: int, seed: int) -> str:
    """The Monte Carlo samples' CSV text (in a worker)."""
    try:
        run = monte_carlo(design, samples, seed)
    except SpreadError as err:
        raise ApiError(
            422, str(err), [{"field": "samples", "message": str(err), "type": "value_error"}]
        ) from err
    header, cols = samples_table(run)
    return columns_csv(header, cols)
