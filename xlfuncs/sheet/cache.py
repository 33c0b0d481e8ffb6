"""A bounded LRU cache of fits, keyed by a hash of the cleaned numbers and the model.

A workbook that asks for the same fit in ten cells estimates once.  ``stats`` counts
estimations and hits so tests (and the curious) can see it work.
"""

from __future__ import annotations

import hashlib
from collections import OrderedDict

import numpy as np

__all__ = ["FitCache", "FIT_CACHE"]


class FitCache:
    def __init__(self, maxsize: int = 128):
        self.maxsize = maxsize
        self._data: OrderedDict = OrderedDict()
        self.stats = {"estimations": 0, "hits": 0}

    @staticmethod
    def key(values: np.ndarray, model: str, dist: str, estimation_key: tuple, regressors=None) -> tuple:
        digest = hashlib.blake2b(np.ascontiguousarray(values, dtype=float).tobytes(), digest_size=16).hexdigest()
        key = (digest, len(values), model, dist, estimation_key)
        if regressors is not None:
            X = np.ascontiguousarray(regressors, dtype=float)
            key += (hashlib.blake2b(X.tobytes(), digest_size=16).hexdigest(), X.shape)
        return key

    def get_or_fit(self, key, compute):
        if key in self._data:
            self._data.move_to_end(key)
            self.stats["hits"] += 1
            return self._data[key]
        result = compute()
        self.stats["estimations"] += 1
        self._data[key] = result
        if len(self._data) > self.maxsize:
            self._data.popitem(last=False)
        return result

    def clear(self):
        self._data.clear()
        self.stats = {"estimations": 0, "hits": 0}


FIT_CACHE = FitCache()
