"""radledger: per-pixel surface net radiation for basin hydrology."""

from __future__ import annotations

__version__ = "0.1.0"
