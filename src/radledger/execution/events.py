"""What a run reports as it goes; the command line prints it, the Python API stays silent.

Stages call these hooks; :class:`RunEvents` does nothing, and the CLI's
console subclass turns each event into a line of text.
"""

from __future__ import annotations

__all__ = ["RunEvents"]


class RunEvents:
    """Silent run events (override in a subclass to show them)."""

    def started(self, plan, engine) -> None:
        """The plan is built and the engine is ready."""

    def swept(self, paths: list[str]) -> None:
        """Temporaries of an interrupted run were removed."""

    def job_done(self, result) -> None:
        """A scene or day finished (``result.written`` / ``result.skipped``)."""

    def stage_done(self, stage: str, written: int, skipped: int = 0) -> None:
        """A later stage (a composite, zones, netcdf, quicklooks) finished."""

    def finished(self, report) -> None:
        """The whole run finished."""

    def warn(self, text: str) -> None:
        """Something the user should know although the run goes on (one line, names what and where)."""

    # progress of one graph (a job or a stage)
    def progress(self, label: str):
        """A context manager shown around one local computation (None: nothing shown)."""
        return None

    def remote(self, label: str, address: str) -> None:
        """A computation was handed to the cluster at ``address``."""
