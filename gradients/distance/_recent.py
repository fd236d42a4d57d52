"""Results of expensive, pure computations on arrays, kept for the next caller that needs them.

A report run asks several analyses for the same derived matrices: Gower's centred matrix of
the community dissimilarities (and its eigenvalues) for every dbRDA, forward-selection step
and PERMANOVA; the Moran eigenvector maps of the one geography for every spatially
constrained Mantel test; the principal coordinates of each hypothesis' distances for its
simple and partial Mantel tests. :class:`Recent` keeps the last few such results, keyed by a
digest of the input's bytes, so the second caller gets the first one's (read-only) arrays,
bit for bit what a new computation would give, and a changed input is never mistaken for
another.
"""

from __future__ import annotations

import hashlib
import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable
from typing import Any

import numpy as np

__all__ = ["Recent", "digest"]


def digest(array: np.ndarray) -> tuple[str, tuple[int, ...], bytes]:
    """A key for the content of an array: dtype, shape and a BLAKE2 digest of its bytes."""
    a = np.ascontiguousarray(array)
    return (a.dtype.str, a.shape,
            hashlib.blake2b(a.view(np.uint8).reshape(-1), digest_size=20).digest())


class Recent:
    """The last ``size`` results of expensive, pure functions, by a key of their inputs."""

    def __init__(self, size: int) -> None:
        self.size = size
        self._items: OrderedDict[Hashable, Any] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key: Hashable, compute: Callable[[], Any]) -> Any:
        """The result stored under ``key``, or ``compute()``'s, stored (arrays made read-only)."""
        with self._lock:
            if key in self._items:
                self._items.move_to_end(key)
                return self._items[key]
        value = compute()
        for v in value if isinstance(value, tuple) else (value,):
            if isinstance(v, np.ndarray):
                v.flags.writeable = False
        with self._lock:
            self._items[key] = value
            while len(self._items) > self.size:
                self._items.popitem(last=False)
        return value

    def __call__(self, function: Callable[[np.ndarray], Any], array: np.ndarray) -> Any:
        """``function(array)``, computed once per content of ``array``."""
        return self.get((function.__name__, digest(array)), lambda: function(array))

    def clear(self) -> None:
        with self._lock:
            self._items.clear()
