"""The two kinds of dated product: instantaneous scenes and daily totals."""

from __future__ import annotations

from enum import Enum

__all__ = ["TimeKind"]


class TimeKind(str, Enum):
    """A product's time kind; its value is the output folder's name (``scenes`` / ``days``)."""

    SCENES = "scenes"
    DAYS = "days"

    @property
    def singular(self) -> str:
        """``scene`` or ``day``, for messages."""
        return self.value[:-1]

    def __str__(self) -> str:
        return self.value
