"""The ``radledger`` command: demo, run, check, info.

Exit status (the README's "Commands" lists the same):

* 0 success;
* 2 a problem with the user's config or inputs, found before or during the
  run (one line per problem on stderr, no traceback unless ``--debug``);
  products finished before it are kept;
* 3 the outputs could not be written: the disk is full (or a quota or file
  size limit was hit) or the disk failed; free space and rerun, it resumes;
* 4 the Dask cluster was lost (scheduler gone, workers dying); restart it and
  rerun, it resumes;
* 1 anything unexpected (a bug: the traceback is printed);
* 130/143 stopped by SIGINT/SIGTERM; 141 the reader of the output went away
  (``radledger info FILE | head``), as for any command killed by SIGPIPE.

In every case only whole products are left behind: each one is written beside
its target, checked, and renamed into place.
"""

from __future__ import annotations

import argparse
import logging
import os
import signal
import sys
import traceback
from pathlib import Path

from .._version import __version__
from ..errors import ClusterError, Problems, RadledgerError, WriteError

__all__ = ["main", "exit_status"]

EXIT_USER, EXIT_WRITE, EXIT_CLUSTER, EXIT_PIPE = 2, 3, 4, 141


def exit_status(exc: RadledgerError) -> int:
    """The exit status of a user-facing error (see the module docstring)."""
    if isinstance(exc, WriteError):
        return EXIT_WRITE
    if isinstance(exc, ClusterError):
        return EXIT_CLUSTER
    return EXIT_USER


class _Stopped(BaseException):
    """Raised in the main thread by SIGTERM so cleanup code runs as for Ctrl-C."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _on_signal(signum, frame):
    raise _Stopped(signum)


def _on_interrupt(signum, frame):
    raise KeyboardInterrupt


def _install_handlers() -> dict:
    """SIGTERM and SIGINT stop the run through the same cleanup.

    SIGINT is installed explicitly: a process started from a script in the
    background inherits SIGINT *ignored*, and Python then never raises
    KeyboardInterrupt, so Ctrl-C / ``kill -INT`` would be lost.
    """
    old = {signal.SIGTERM: signal.signal(signal.SIGTERM, _on_signal),
           signal.SIGINT: signal.signal(signal.SIGINT, _on_interrupt)}
    return old


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="radledger", description="Per-pixel surface net radiation maps "
                                "(instantaneous W m-2 and FAO-56 daily MJ m-2 day-1) as cloud-optimised GeoTIFFs.")
    p.add_argument("--version", action="version", version=f"radledger {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks for every error")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    d = sub.add_parser("demo", help="run the whole job on the shipped sample tiles")
    d.add_argument("--out", default="radledger-demo", help="output folder (default ./radledger-demo)")
    d.add_argument("--overwrite", action="store_true", help="recompute products that are up to date")
    d.add_argument("--quiet", action="store_true", help="print nothing but errors")

    r = sub.add_parser("run", help="do everything CONFIG asks for")
    r.add_argument("config", help="run config (YAML)")
    r.add_argument("--scheduler", metavar="ADDRESS", default=None,
                   help="address of a running dask.distributed scheduler, e.g. tcp://host:8786 "
                        "(default: $DASK_SCHEDULER_ADDRESS, else local threads)")
    r.add_argument("--overwrite", action="store_true", help="recompute products that are up to date")
    r.add_argument("--quiet", action="store_true", help="no progress and no summary")
    r.add_argument("--force", action="store_true", help="run even if the products may not fit on the disk")
    r.add_argument("--out", metavar="DIR", default=None,
                   help="output folder, instead of the config's output.directory (needed to write outside "
                        "the current folder with a config read from a URL)")

    c = sub.add_parser("check", help="validate CONFIG and every input, print the plan, compute nothing")
    c.add_argument("config")

    i = sub.add_parser("info", help="print a product's quantity, units, method, time, grid and provenance")
    i.add_argument("file")
    return p


def demo_config() -> Path:
    """configs/demo.yaml of the source tree (the README installs radledger editable from it)."""
    here = Path(__file__).resolve()
    for root in (here.parents[3], Path.cwd()):
        cand = root / "configs" / "demo.yaml"
        if cand.exists():
            return cand
    raise RadledgerError("configs/demo.yaml not found; run `radledger demo` from a clone of the radledger "
                         "repository (pip install -e .)")


def _tune_allocator() -> None:
    """glibc's malloc: reuse freed blocks of up to 32 MB instead of returning them to the system.

    A run allocates and frees the same few megabyte-sized arrays (a block, a tile, a slab) thousands
    of times; by default glibc maps each afresh, and the page faults were a fifth of a scene's CPU
    time (benchmarks/README.md).  One arena per core keeps the peak where it was.  Left alone when
    the user sets any ``MALLOC_*`` variable, and off glibc.
    """
    if not sys.platform.startswith("linux") or any(k.startswith("MALLOC_") for k in os.environ):
        return
    import ctypes
    try:
        mallopt = ctypes.CDLL("libc.so.6").mallopt
    except (OSError, AttributeError):
        return
    m_trim_threshold, m_mmap_threshold, m_arena_max = -1, -3, -8     # glibc's <malloc.h>
    mallopt(m_arena_max, max(2, os.cpu_count() or 1))
    mallopt(m_mmap_threshold, 32 << 20)
    mallopt(m_trim_threshold, 64 << 20)


def main(argv: list[str] | None = None) -> int:
    _tune_allocator()
    args = _parser().parse_args(argv)
    old = _install_handlers()
    try:
        return _dispatch(args)
    except Problems as exc:
        for p in exc.problems:
            print(f"error: {p}", file=sys.stderr)
        if args.debug:
            traceback.print_exc()
        print(f"radledger: {len(exc.problems)} problem(s); nothing was written", file=sys.stderr)
        return 2
    except RadledgerError as exc:
        print(f"error: {exc}", file=sys.stderr)
        if args.debug:
            traceback.print_exc()
        return exit_status(exc)
    except BrokenPipeError:
        # the reader went away (`radledger info FILE | head -1`): stop quietly, as a command killed
        # by SIGPIPE would; point stdout at /dev/null so the final flush does not fail again
        _silence_stdout()
        return EXIT_PIPE
    except KeyboardInterrupt:
        print("\nradledger: interrupted; finished products are kept, unfinished ones removed", file=sys.stderr)
        return 130
    except _Stopped as exc:
        print(f"radledger: stopped by signal {exc.signum}; finished products are kept, unfinished ones removed",
              file=sys.stderr)
        return 128 + exc.signum
    except Exception:  # a bug: say so, with the traceback
        traceback.print_exc()
        print("radledger: unexpected error (a bug); please report it with the traceback above", file=sys.stderr)
        return 1
    finally:
        for sig, handler in old.items():
            signal.signal(sig, handler)


def _silence_stdout() -> None:
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):
        pass


class _NoTraceback(logging.Filter):
    """A library's log line keeps its message but not its traceback (``--debug`` keeps both)."""

    def filter(self, record: logging.LogRecord) -> bool:
        record.exc_info = record.exc_text = record.stack_info = None
        return True


def _quiet_cluster_logs() -> None:
    """dask.distributed logs its reconnection attempts with tracebacks; the user gets one line from us."""
    import distributed  # noqa: F401  (sets up its loggers and handlers)
    quiet = _NoTraceback()
    for name in ("distributed", "distributed.client", "distributed.comm", "tornado", "tornado.application", ""):
        for handler in logging.getLogger(name).handlers:
            handler.addFilter(quiet)


def _say_waiting(message: str) -> None:
    print(f"radledger: {message}", file=sys.stderr, flush=True)


def _text_argument(value: str, what: str) -> str:
    """A path from the command line that is valid UTF-8 (else a one-line user error)."""
    from ..io.paths import printable
    try:
        os.fsencode(value).decode("utf-8")
    except UnicodeDecodeError:
        raise RadledgerError(f"{printable(value)}: the {what} path is not valid UTF-8 text; rename it") from None
    return value


def _dispatch(args) -> int:
    from ..config import load_config
    from .console import ConsoleEvents, WarningsOnly, describe_plan, where_everything_went

    if args.command == "info":
        from ..outputs.info import describe_product
        text = describe_product(_text_argument(args.file, "product"))
        print(text, flush=True)
        return 0
    if args.command == "check":
        from ..io.remote import fingerprint_session
        from ..planning.plan import make_plan
        from ..runner import disk_problems
        cfg = load_config(_text_argument(args.config, "config"))
        with fingerprint_session():
            plan = make_plan(cfg, force=True)   # the disk estimate below counts only what is missing
        problems = disk_problems(plan)
        if problems:
            raise problems[0]
        print(describe_plan(plan), flush=True)
        print("check: config and inputs OK; nothing computed", flush=True)
        return 0
    from ..runner import run_config
    events = WarningsOnly() if args.quiet else ConsoleEvents()
    if args.command == "demo":
        cfg = load_config(demo_config(), output_override=_out_folder(_text_argument(args.out, "--out")))
        report = run_config(cfg, overwrite=args.overwrite, events=events, on_wait=_say_waiting)
        if not args.quiet:
            where_everything_went(report)
        return 0
    if (args.scheduler or os.environ.get("DASK_SCHEDULER_ADDRESS")) and not args.debug:
        _quiet_cluster_logs()
    out = _out_folder(_text_argument(args.out, "--out")) if args.out else None
    cfg = load_config(_text_argument(args.config, "config"), output_override=out)
    run_config(cfg, overwrite=args.overwrite, scheduler=args.scheduler, force=args.force, events=events,
               on_wait=_say_waiting)
    return 0


def _out_folder(text: str) -> str:
    """``--out DIR``: a local folder as an absolute path; an ``s3://`` prefix as given."""
    from ..io.objectstore import is_store_url

    return text if is_store_url(text) else os.path.abspath(text)


if __name__ == "__main__":
    sys.exit(main())
