"""Reuse of large output blocks.

A fresh block of tens of megabytes costs a page fault and a zero-fill per
page; the C allocator keeps freed arrays below a threshold (32 MB at most) for
reuse but gives larger ones back to the system at once, and even smaller ones
only when its heuristics allow. On a 0.25-degree global grid the outputs of one
budget are about 140 MB, so the fault cost rivals the arithmetic. The pool
gives such outputs the reuse that small arrays get: it remembers the last few
blocks it handed out and lends one again once nothing but the pool refers to it
(its reference count says so: every result array is a view that keeps its
block alive, so a block in use is never lent twice).
"""

from __future__ import annotations

import sys
import threading

import numpy as np

__all__ = ["BlockPool", "POOL", "take"]


class BlockPool:
    """A few recyclable float64 blocks, at most ``keep`` of them remembered."""

    def __init__(self, keep: int = 3):
        self.keep = keep
        self._blocks: list = []
        self._lock = threading.Lock()

    def take(self, shape) -> np.ndarray:
        """An uninitialised float64 array of ``shape``, recycled when one is free."""
        shape = tuple(int(n) for n in shape)
        with self._lock:
            for i in range(len(self._blocks)):
                # references: the list and getrefcount's own argument
                if self._blocks[i].shape == shape and sys.getrefcount(self._blocks[i]) <= 2:
                    return self._blocks[i]
            block = np.empty(shape)
            self._blocks.append(block)
            if len(self._blocks) > self.keep:
                free = [
                    i for i in range(len(self._blocks) - 1) if sys.getrefcount(self._blocks[i]) <= 2
                ]
                self._blocks.pop(free[0] if free else 0)
            return block

    def clear(self):
        """Forget every block (those in use live on with their users)."""
        with self._lock:
            self._blocks.clear()


#: The pool the core uses for results of a million points or more.
POOL = BlockPool()

#: Below this many float64 values a plain allocation is cheap enough.
MIN_POOLED = 1 << 20


def take(shape) -> np.ndarray:
    """An uninitialised float64 array: from the pool when large, else np.empty."""
    if int(np.prod(shape)) < MIN_POOLED:
        return np.empty(shape)
    return POOL.take(shape)
