"""radledger: per-pixel surface net radiation for basin hydrology."""

from __future__ import annotations

__version__ = "0.1.0"

from .api import daily_net_radiation, net_radiation

from .runner import run

__all__ = ["__version__", "net_radiation", "daily_net_radiation", "run"]
