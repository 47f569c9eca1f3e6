"""Shared test fixtures (kept small)."""

from __future__ import annotations

import dask
import pytest


def _refuse_to_compute(dsk, keys, **kwargs):
    raise AssertionError("a Dask graph was computed before anyone asked for it")


@pytest.fixture
def no_compute():
    """Within this fixture any Dask compute raises: proves code stays lazy."""
    with dask.config.set(scheduler=_refuse_to_compute):
        yield
