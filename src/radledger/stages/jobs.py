"""Stage 1: every scene and day, in batches of dates; each product written as soon as it is complete.

Dates are computed in batches (one task per chunk handles every date of a batch, so what is the
same for all of them is done once per chunk); while one batch of days gets its single compression
pass into COGs, in a background thread, the next batch computes.  Both cores stay busy, and each
batch's products appear as soon as its compression is done.  A scene is a batch of its own,
compressed before the next one starts (it is large, and its products should appear at once).
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

from ..errors import UnknownClassError
from ..execution.engine import Engine
from ..execution.graph import FlagSummary, JobResult, compute_batch
from ..io.tables import read_emissivity_table
from ..kinds import TimeKind
from ..physics.emissivity import missing_classes
from ..planning.checks import land_cover_classes
from ..planning.plan import Job, Plan, unknown_classes_error

__all__ = ["run_jobs", "batches", "BATCH_DATES"]

#: dates computed together by one chunk task: what is the same for every date (static layers,
#: coordinates, resampling geometry) is done once per batch; each batch's products appear together.
#: Days share most (static layers, the weather grids' geometry) and are cheap; a scene is costly and
#: shares little, so each scene is its own batch and its products appear as soon as it is done.
BATCH_DATES = {TimeKind.DAYS: 8, TimeKind.SCENES: 1}


def batches(jobs: list[Job], size: dict = BATCH_DATES) -> list[list[Job]]:
    """Consecutive jobs of one kind, at most ``size[kind]`` per batch."""
    out: list[list[Job]] = []
    for job in jobs:
        if out and out[-1][0].kind is job.kind and len(out[-1]) < size[job.kind]:
            out[-1].append(job)
        else:
            out.append([job])
    return out


def run_jobs(plan: Plan, engine: Engine, *, overwrite: bool, streams: tuple = ()) -> list[JobResult]:
    """Run every job of the plan; each result is reported (in plan order) as its products are written."""
    results: list[JobResult] = []
    # the compression of one batch overlaps the computation of the next (locally; a cluster's workers
    # write the intermediates, and the client compresses them in turn)
    pool = ThreadPoolExecutor(1, thread_name_prefix="radledger-cog") if not engine.distributed else None
    previous = pending = None

    def collect(done: list[JobResult]) -> None:
        for r in done:
            results.append(r)
            engine.events.job_done(r)
            _warn_lost_pixels(r, plan, engine)

    try:
        for batch in batches(plan.jobs):
            try:
                pending = compute_batch(plan, batch, engine, overwrite=overwrite, streams=streams)
            except UnknownClassError:
                raise _name_all_classes(plan) from None
            if previous is not None:
                collect(previous.result())
                previous = None
            if pool is None or batch[0].kind is TimeKind.SCENES:
                collect(pending.finish())    # a scene is big and stands alone: compress it before the next
            else:
                previous = pool.submit(pending.finish)
            pending = None
        if previous is not None:
            collect(previous.result())
            previous = None
    except BaseException:
        if pending is not None:       # computed but not handed to the compression: its temporaries go
            pending.abort()
        raise
    finally:
        if previous is not None:      # interrupted: the batch being compressed is complete - let it finish
            try:
                previous.result()
            except BaseException:     # noqa: BLE001 - its own failure removed its temporaries
                pass
        if pool is not None:
            pool.shutdown(wait=True)
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
