"""What a chunk task remembers between the reads of the dates it handles.

A task computes one chunk for a batch of dates, block by block.  Sources read through a
:class:`ReadMemo` keep there what the dates share: where each block's pixels fall on a coarser
source grid (io/resample.py), and each time stack's slab under the chunk for every step the batch
needs, read in one request instead of one per block and date (io/timestacks.py).
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["ReadMemo"]


@dataclass
class ReadMemo:
    chunk: object = None                                  # the task's chunk window
    warps: dict = field(default_factory=dict)             # (source grid, block) -> WindowWarp
    wanted: dict = field(default_factory=dict)            # (path, variable, raw) -> steps the batch reads
    slabs: dict = field(default_factory=dict)             # (path, variable, raw) -> (bounds, step index, array)

    def want(self, source) -> None:
        """Note the steps a time stack source will read (so the first read fetches them all)."""
        for _, part in getattr(source, "parts", ()):   # a layer derived from others: their steps
            self.want(part)
        steps = getattr(source, "steps", None)
        if steps is None:
            return
        key = (source.path, source.variable, source.raw)
        self.wanted[key] = tuple(sorted(set(self.wanted.get(key, ())) | set(steps)))
