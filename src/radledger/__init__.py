"""radledger: per-pixel surface net radiation for basin hydrology."""

from __future__ import annotations

from ._version import __version__
from .api import daily_net_radiation, net_radiation


def run(config, **options):
    """Do everything ``config`` asks for, as ``radledger run`` does; return the product paths.

    Options: ``overwrite``, ``quiet`` (default True: print nothing), ``scheduler`` (a
    dask.distributed address), ``force``, ``output`` (overrides output.directory).
    Imported lazily: the physics API does not need Dask.
    """
    from .runner import run as _run

    if not options.pop("quiet", True):
        from .cli.console import ConsoleEvents
        options["events"] = ConsoleEvents()
    return _run(config, **options)


__all__ = ["__version__", "net_radiation", "daily_net_radiation", "run"]
