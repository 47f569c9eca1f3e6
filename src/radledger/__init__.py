"""radledger: per-pixel surface net radiation for basin hydrology."""

from __future__ import annotations

__version__ = "0.1.0"

from .api import daily_net_radiation, net_radiation



def run(config, **options):
    """Do everything ``config`` asks for, as ``radledger run`` does; return the product paths.

    Options: ``overwrite``, ``quiet`` (default True), ``scheduler`` (a dask.distributed address),
    ``force``, ``output`` (overrides output.directory).  Imported lazily: the physics API does not
    need Dask.
    """
    from .runner import run as _run

    return _run(config, **options)

__all__ = ["__version__", "net_radiation", "daily_net_radiation", "run"]
