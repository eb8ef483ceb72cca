import numpy as np


def match_roots(a, b):
    """Largest distance from a root in ``a`` to its nearest root in ``b`` (and back)."""
    a = np.atleast_1d(np.asarray(a, complex))
    b = np.atleast_1d(np.asarray(b, complex))
    assert a.size == b.size, (a.size, b.size)
    if a.size == 0:
        return 0.0
    d1 = max(np.min(np.abs(b - x)) for x in a)
    d2 = max(np.min(np.abs(a - x)) for x in b)
    return max(d1, d2)
