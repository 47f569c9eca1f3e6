"""All the text the command line prints: the plan, run events, progress bars and the closing table."""

from __future__ import annotations

import sys
import time

from dask.callbacks import Callback

from .._version import __version__
from ..execution.events import RunEvents
from ..execution.graph import ValueSummary
from ..kinds import TimeKind
from ..planning.checks import human_bytes

__all__ = ["describe_plan", "ConsoleEvents", "WarningsOnly", "summary_table", "where_everything_went"]


def describe_plan(plan) -> str:
    """What ``radledger check`` prints: the config, grid, methods, outputs and every job."""
    cfg = plan.cfg
    lines = [f"config:  {cfg.path}", f"title:   {cfg.title}", f"grid:    {plan.grid.describe()}",
             f"methods: sky emissivity {cfg.methods.sky_emissivity}, clouds {cfg.methods.clouds}, "
             f"clear-sky shortwave {cfg.methods.clear_sky_shortwave}, scene to day "
             f"{cfg.methods.scene_to_day}",
             f"output:  {cfg.output.store + f' (staged in {plan.out})' if cfg.output.store else plan.out} "
             f"({', '.join(cfg.output.products)}; {cfg.output.compression})"]
    n_scene = sum(j.kind is TimeKind.SCENES for j in plan.jobs)
    n_day = len(plan.jobs) - n_scene
    lines.append(f"jobs:    {n_scene} scene(s), {n_day} day(s), {len(cfg.composites)} composite(s)"
                 + (f", zones from {cfg.zones.path}" if cfg.zones else ""))
    lines += _entries(plan)
    for c in cfg.composites:
        lines.append(f"  composite {c.name}: {c.source} {c.start} .. {c.end} "
                     f"({', '.join(c.statistics)}; min_count {c.min_count})")
    if plan.skipped:
        lines.append(f"skipped (on_missing: skip): {len(plan.skipped)} date(s)")
        lines += [f"  {label}: {why}" for label, why in plan.skipped]
    lines.append(f"estimated output size: {human_bytes(plan.estimated_bytes())}")
    return "\n".join(lines)


def _span(jobs) -> str:
    first, last = jobs[0].label, jobs[-1].label
    what = "dates" if jobs[0].kind is TimeKind.DAYS else "times"
    fmt = (lambda j: j.when.isoformat()) if jobs[0].kind is TimeKind.DAYS else \
        (lambda j: j.when.strftime("%Y-%m-%dT%H:%MZ"))
    return f"{len(jobs)} {what} {fmt(jobs[0])}" + (f" .. {fmt(jobs[-1])}" if first != last else "")


def _source_text(src) -> str:
    if hasattr(src, "scenes"):
        return f"interpolated between scene albedos (max_gap {src.max_gap:g} days)"
    if getattr(src, "variable", None):
        return f"{src.path} variable {src.variable} [{src.units}]"
    return f"{src.path}" + (f" [{src.units}]" if getattr(src, "units", "") else "")


def _layer_text(srcs: list, spec) -> str:
    """One input of an entry over its dates: the file, the template's files or the stack's steps."""
    paths = {getattr(s, "path", "") for s in srcs}
    text = _source_text(srcs[0])
    if len(paths) > 1:
        template = (spec.template or spec.path) if spec is not None and (spec.template or spec.is_template) \
            else "per date"
        text = f"{template}: {len(paths)} files, {srcs[0].path} .. {srcs[-1].path}"
    elif getattr(srcs[0], "steps", None) is not None and len(srcs) > 1:
        text += f", steps {srcs[0].steps[0]} .. {srcs[-1].steps[-1]}"
    return text


def _entries(plan) -> list[str]:
    """Each config entry: the dates or times it expands to and the inputs resolved for them."""
    by_entry: dict[str, list] = {}
    for j in plan.jobs:
        by_entry.setdefault(j.entry or j.label, []).append(j)
    specs = {e.key: e.layers for e in (*plan.cfg.scenes, *plan.cfg.days)}
    lines = []
    for entry, jobs in by_entry.items():
        lines.append(f"  {entry}: {_span(jobs)}; {len(jobs[0].outputs)} product(s) each")
        for layer in jobs[0].sources:
            srcs = [j.sources[layer] for j in jobs if layer in j.sources]
            spec = specs.get(entry, {}).get(layer)
            if getattr(srcs[0], "parts", None) is None:
                lines.append(f"      {layer}: {_layer_text(srcs, spec)}")
                continue
            # derived per pixel from other inputs (a scene's air temperature from the day's Tmax/Tmin)
            days = sorted({s.day for s in srcs})
            span = days[0].isoformat() + (f" .. {days[-1].isoformat()}" if len(days) > 1 else "")
            lines.append(f"      {srcs[0].method.replace(': ', ' at the scene time: ', 1)}; daily inputs of "
                         f"{span} (the local solar date of the grid centre)")
            for n, _ in srcs[0].parts:
                parts = [dict(s.parts)[n] for s in srcs]
                pspec = specs.get(entry, {}).get(n)
                lines.append(f"        {n}: {_layer_text(parts, pspec)}")
        notes = dict.fromkeys(n for j in jobs for n in j.notes)
        lines += [f"      note: {n}" for n in notes]
        if jobs[0].kind is TimeKind.SCENES and "shortwave_down" not in jobs[0].sources:
            lines.append("      note: clear-sky shortwave modelled (no shortwave_down)")
    return lines


class WarningsOnly(RunEvents):
    """``--quiet``: nothing but warnings, on stderr."""

    def warn(self, text: str) -> None:
        print(f"warning: {text}", file=sys.stderr, flush=True)


class ConsoleEvents(WarningsOnly):
    """Run events as lines on stdout; a progress bar on stderr when it is a terminal."""

    def __init__(self, stream=None, *, progress: bool | None = None):
        self.stream = stream or sys.stdout
        self.show_progress = sys.stderr.isatty() if progress is None else progress

    def say(self, text: str) -> None:
        print(text, file=self.stream, flush=True)

    def started(self, plan, engine) -> None:
        self.say(f"radledger {__version__}: {len(plan.jobs)} job(s) on {engine.kind}; grid {plan.grid.describe()}")

    def swept(self, paths) -> None:
        self.say(f"removed {len(paths)} temporary file(s) left by an interrupted run")

    def job_done(self, result) -> None:
        job = result.job
        notes = "".join(f"; {n}" for n in result.notes)
        if result.written:
            self.say(f"  {job.kind.singular} {job.label}: wrote {len(result.written)} product(s){notes}")
        elif result.skipped:
            self.say(f"  {job.kind.singular} {job.label}: up to date, skipped{notes}")

    def stage_done(self, stage: str, written: int, skipped: int = 0) -> None:
        if stage.startswith("composite "):
            self.say(f"  {stage}: wrote {written}, up to date {skipped}")
        elif stage == "weather":   # the grids and cross_validation.csv
            self.say(f"  weather from stations: wrote {written} file(s), up to date {skipped} grid(s)")
        elif stage == "validation":
            self.say(f"  validation against net radiometers: wrote {written} file(s) (tables and plots)")
        else:
            what = {"zones": "table(s)", "netcdf": "stack(s)", "quicklooks": "PNG(s)"}.get(stage, "file(s)")
            self.say(f"  {stage}: wrote {written} {what}")

    def finished(self, report) -> None:
        summary_table(report.results, self.stream)
        for label, why in report.plan.skipped:
            self.say(f"skipped (on_missing: skip): {label}: {why}")
        self.say(f"done in {report.seconds:.1f} s: {len(report.written)} written, {len(report.skipped)} up to "
                 f"date, under {report.plan.out}")

    def progress(self, label: str):
        return _Progress(label, sys.stderr) if self.show_progress else None

    def remote(self, label: str, address: str) -> None:
        if self.show_progress:
            print(f"  {label}: running on {address}", file=sys.stderr, flush=True)


def summary_table(results, stream=None) -> None:
    """The closing table: min / mean / max per product and job."""
    stream = stream or sys.stdout
    rows = []
    for r in results:
        job = f"{r.job.kind.singular} {r.job.label}"
        for n, s in r.summary.items():
            if isinstance(s, ValueSummary):
                rows.append((job, n, f"{s.min:.4g}" if s.count else "nan", f"{s.mean:.4g}",
                             f"{s.max:.4g}" if s.count else "nan", f"{s.count}"))
            else:
                rows.append((job, n, "", "", "",
                             f"{s.out_of_range} out of range, {s.input_missing} missing input"))
    if not rows:
        return
    head = ("job", "product", "min", "mean", "max", "valid px / flags")
    widths = [max(len(str(x[i])) for x in rows + [head]) for i in range(len(head))]
    print("  ".join(h.ljust(w) for h, w in zip(head, widths)), file=stream)
    print("  ".join("-" * w for w in widths), file=stream)
    for row in rows:
        print("  ".join(str(c).ljust(w) for c, w in zip(row, widths)), file=stream)


def where_everything_went(report) -> None:
    """The demo's closing lines: each output folder and the quicklook to open first."""
    out = report.plan.out
    groups = {}
    for p in report.paths:
        groups.setdefault(p.parent.name, []).append(p)
    print("\nwhere everything went:")
    for name in ("weather", "scenes", "days", "composites", "zones", "netcdf", "quicklooks", "validation"):
        if name in groups:
            print(f"  {out / name}/  ({len(groups[name])} files)")
    ql = out / "quicklooks"
    scenes = sorted(ql.glob("net_radiation_*T*.png")) if ql.exists() else []
    if scenes:
        print(f"net-radiation quicklooks: {ql}/net_radiation_*.png (e.g. {scenes[-1].name})")
    if (out / "weather" / "cross_validation.csv").exists():
        print(f"station gridding, leave-one-out errors: {out / 'weather' / 'cross_validation.csv'}")
    scatters = sorted((out / "validation").glob("scatter_*.png")) if (out / "validation").exists() else []
    if scatters:
        print(f"against the net radiometers: {out / 'validation'}/summary.csv and "
              f"{', '.join(p.name for p in scatters)}")


class _Progress(Callback):
    """A one-line progress bar on stderr (only used on a terminal)."""

    def __init__(self, label: str, stream):
        super().__init__()
        self.label, self.stream = label, stream
        self.total = self.done = 0
        self.t0 = time.monotonic()
        self._last = 0.0

    def _start_state(self, dsk, state):
        self.total = len(state["ready"]) + len(state["waiting"]) + len(state["running"]) + \
            len(state.get("finished", ()))

    def _posttask(self, key, result, dsk, state, worker_id):
        self.done += 1
        now = time.monotonic()
        if now - self._last > 0.2:
            self._last = now
            self._draw()

    def _finish(self, dsk, state, errored):
        self.done = self.total
        self._draw(end="\n")

    def _draw(self, end=""):
        frac = self.done / self.total if self.total else 1.0
        bar = "#" * int(frac * 30)
        print(f"\r  {self.label:24s} [{bar:30s}] {frac * 100:5.1f}%  {time.monotonic() - self.t0:6.1f} s",
              end=end, file=self.stream, flush=True)
