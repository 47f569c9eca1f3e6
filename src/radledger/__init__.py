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


def open_products(directory, kind="days", **options):
    """The products a run wrote under ``directory`` as one lazy ``xarray.Dataset`` (time, y, x).

    ``kind``: ``"days"`` or ``"scenes"``.  One variable per product with CF attributes, ``time``
    in UTC (days: 00:00 UTC plus a ``date`` coordinate), the CRS via rioxarray (``ds.rio.crs``).
    Options: ``products`` (names to keep), ``chunks`` (Dask chunk edge, default 512).
    Imported lazily: the physics API does not need xarray or rioxarray.
    """
    from .outputs.cube import open_products as _open_products

    return _open_products(directory, kind, **options)


__all__ = ["__version__", "net_radiation", "daily_net_radiation", "run", "open_products"]
