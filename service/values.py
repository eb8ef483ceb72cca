"""Plain-value containers that the computation hands to the reply."""

from __future__ import annotations

import numpy as np


class FloatValues(list):
    """A list whose items are all Python floats: ``ndarray.tolist`` of a float64 array.

    A reply's schema and the rounding of its figures pass such a list on as a whole, without a type
    check per item (a Monte Carlo reply holds some 10,000 of them).
    """

    @classmethod
    def of(cls, values) -> "FloatValues":
        """The floats of ``values`` (any array-like of numbers), flattened, converted in C."""
        return cls(np.asarray(values, dtype=np.float64).ravel().tolist())


__all__ = ["FloatValues"]
