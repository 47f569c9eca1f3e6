"""Filling a chunked HDF5 dataset with chunks encoded on all cores and written as stored bytes.

HDF5 (and so h5py, h5netcdf and netCDF-C) read and write a filtered dataset under one lock:
the filters run on one core.  Here the filters' work is done in a thread pool and the finished
bytes are handed to HDF5 with ``H5Dwrite_chunk`` (h5py ``DatasetID.write_direct_chunk``), which
stores them as they are; readers decode them with the dataset's own filter pipeline.

The byte format of the two filters supported (HDF5 reference manual, H5Pset_shuffle and
H5Pset_deflate; HDF5's H5Zshuffle.c and H5Zdeflate.c):

* shuffle: the chunk's elements' first bytes, then all their second bytes, ... (a byte
  transpose of the ``(elements, itemsize)`` array; nothing to do for 1-byte elements);
* deflate: zlib's ``compress2`` at the dataset's level, i.e. a zlib stream (header and
  Adler-32) as :func:`zlib.compress` makes it; HDF5 stores it even when it is larger than the
  input, with the chunk's filter mask 0 (every filter applied).

A chunk is always stored at the full chunk shape: a chunk that sticks out of the dataset's
edge is padded (here with the dataset's fill value, as HDF5 itself does) and readers ignore the
padding.  Both the transpose copy and :func:`zlib.compress` release the GIL on large buffers.
"""

from __future__ import annotations

import os
import zlib
from collections import deque
from concurrent.futures import ThreadPoolExecutor
from typing import Callable, Iterable

import numpy as np

__all__ = ["deflate_settings", "encode_chunk", "write_chunks", "default_workers"]

_SHUFFLE, _DEFLATE = 2, 1  # HDF5 filter ids H5Z_FILTER_SHUFFLE, H5Z_FILTER_DEFLATE


def default_workers() -> int:
    """The cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


def deflate_settings(dset) -> tuple[bool, int]:
    """``(shuffle, level)`` of an h5py dataset whose filter pipeline is [shuffle,] deflate.

    Raises ValueError for any other pipeline (its byte format is not written here).
    """
    plist = dset.id.get_create_plist()
    filters = [plist.get_filter(i) for i in range(plist.get_nfilters())]
    ids = [f[0] for f in filters]
    if ids not in ([_DEFLATE], [_SHUFFLE, _DEFLATE]):
        raise ValueError(f"{dset.name}: filters {[f[3] for f in filters]} are not [shuffle,] deflate")
    return ids[0] == _SHUFFLE, int(filters[-1][2][0])


def encode_chunk(block: np.ndarray, *, shuffle: bool, level: int) -> bytes:
    """The stored bytes of one full chunk under [shuffle,] deflate at ``level``."""
    raw = np.ascontiguousarray(block)
    size = raw.dtype.itemsize
    if shuffle and size > 1:
        raw = np.ascontiguousarray(raw.reshape(-1).view(np.uint8).reshape(-1, size).T)
    return zlib.compress(memoryview(raw).cast("B"), level)


def write_chunks(dset, jobs: Iterable[tuple[tuple[int, ...], Callable[[], np.ndarray]]], *,
                 workers: int | None = None, per_worker: int = 2) -> int:
    """Fill ``dset`` (an h5py dataset open for writing) chunk by chunk.

    Parameters
    ----------
    dset : h5py.Dataset
        Chunked, with a [shuffle,] deflate pipeline and a fill value.
    jobs : iterable of (offset, read)
        ``offset`` is the index of the chunk's first element; ``read()`` returns that chunk's
        values (any shape up to the chunk shape: an edge chunk's part inside the dataset).
        ``read`` runs in a worker thread.
    workers : int, optional
        Threads reading and encoding (default: the cores available).
    per_worker : int, optional
        Chunks per worker in flight (read, encoded or waiting to be written); memory stays
        below ``workers * per_worker`` chunks plus each worker's buffers.

    Chunks are written in the order of ``jobs`` by the calling thread.  When a read fails the
    chunks not started are dropped, the running ones finish, and the error is raised.
    Returns the number of chunks written.
    """
    shuffle, level = deflate_settings(dset)
    shape, dtype = tuple(dset.chunks), dset.dtype
    fill = dset.fillvalue

    def encode(read):
        part = np.asarray(read())
        if part.ndim < len(shape):
            part = part.reshape((1,) * (len(shape) - part.ndim) + part.shape)
        if part.shape != shape:
            if any(p > s for p, s in zip(part.shape, shape)):
                raise ValueError(f"{dset.name}: a chunk of shape {part.shape} in chunks of {shape}")
            full = np.full(shape, fill, dtype)
            full[tuple(slice(0, p) for p in part.shape)] = part
            part = full
        return encode_chunk(part.astype(dtype, copy=False), shuffle=shuffle, level=level)

    workers = workers or default_workers()
    limit = max(1, workers * per_worker)
    pending: deque = deque()
    written = 0
    with ThreadPoolExecutor(workers, thread_name_prefix="radledger-h5") as pool:
        try:
            for offset, read in jobs:
                pending.append((offset, pool.submit(encode, read)))
                if len(pending) >= limit:
                    at, future = pending.popleft()
                    dset.id.write_direct_chunk(at, future.result(), filter_mask=0)
                    written += 1
            while pending:
                at, future = pending.popleft()
                dset.id.write_direct_chunk(at, future.result(), filter_mask=0)
                written += 1
        except BaseException:
            for _, future in pending:
                future.cancel()
            raise
    return written
