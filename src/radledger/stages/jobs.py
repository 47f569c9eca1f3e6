"""Stage 1: every scene and day, each product written as soon as it is complete."""

from __future__ import annotations

from ..errors import UnknownClassError
from ..execution.engine import Engine
from ..execution.graph import FlagSummary, JobResult, run_job
from ..io.tables import read_emissivity_table
from ..physics.emissivity import missing_classes
from ..planning.checks import land_cover_classes
from ..planning.plan import Plan, unknown_classes_error

__all__ = ["run_jobs"]


def run_jobs(plan: Plan, engine: Engine, *, overwrite: bool) -> list[JobResult]:
    """Run every job of the plan in order; each result is reported as it finishes."""
    results = []
    for job in plan.jobs:
        try:
            r = run_job(plan, job, engine, overwrite=overwrite)
        except UnknownClassError:
            raise _name_all_classes(plan) from None
        results.append(r)
        engine.events.job_done(r)
        _warn_lost_pixels(r, plan, engine)
    return results


#: share of the grid a job may lose to out-of-range inputs before the run says so loudly
LOST_SHARE_WARNING = 0.01


def _warn_lost_pixels(result: JobResult, plan: Plan, engine: Engine) -> None:
    flags = next((s for s in result.summary.values() if isinstance(s, FlagSummary)), None)
    if flags is None:
        return
    share = flags.out_of_range / (plan.grid.width * plan.grid.height)
    if share > LOST_SHARE_WARNING:
        job = result.job
        engine.events.warn(f"{job.kind.singular} {job.label}: {share:.1%} of the grid ({flags.out_of_range} pixels) "
                           f"is NaN because an input lies outside its physical range; check the units, scale and "
                           f"offset of its inputs (radledger check names implausible layers)")


def _name_all_classes(plan: Plan) -> Exception:
    """A chunk met classes the table lacks: scan the whole land cover once to name every one."""
    cfg = plan.cfg
    src = next(j.sources["land_cover"] for j in plan.jobs if "land_cover" in j.sources)
    absent = missing_classes(land_cover_classes(src, plan.grid), read_emissivity_table(cfg.emissivity.table))
    return unknown_classes_error(cfg, absent)
