"""The one exception hierarchy of radledger.

Every error a user can cause (config, inputs, grid, units) derives from
:class:`RadledgerError`; the command line turns those into one line on stderr
and exit status 2.  Two problems of the machine rather than of the config get
their own status, because a rerun resumes once they are fixed: the outputs
could not be written (:class:`WriteError`, disk full: 3) and the Dask cluster
was lost (:class:`ClusterError`: 4).  Anything else is a bug and exits 1.
"""

from __future__ import annotations


class RadledgerError(Exception):
    """A problem with the user's config or inputs; the message says what to do."""


class ConfigError(RadledgerError):
    """The run config is malformed, misspelt or asks for something impossible."""


class InputError(RadledgerError):
    """An input raster or table is missing, unreadable or inconsistent."""


class GridError(RadledgerError):
    """The target grid cannot be built, or an input does not overlap it."""


class UnitError(RadledgerError):
    """Input values are implausible for the units the config declares."""


class UnknownClassError(InputError):
    """Land-cover classes occur that the emissivity table does not list."""


class OutputError(RadledgerError):
    """The output folder cannot be written, or the products would not fit."""


class WriteError(OutputError):
    """Writing a product failed part-way (disk full, quota, file size limit, I/O error); nothing
    unfinished is left at a final path."""


class DiskFullError(WriteError):
    """The output folder's disk ran out of space (or a quota or file size limit was reached)."""


class ClusterError(RadledgerError):
    """The Dask scheduler (or every worker) was lost during a run."""


class Problems(RadledgerError):
    """Several user problems found at once (``radledger check`` reports them all)."""

    def __init__(self, problems: list[RadledgerError]):
        self.problems = list(problems)
        super().__init__("\n".join(str(p) for p in self.problems))
