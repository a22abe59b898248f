r"""Radical-inverse (van der Corput) and Halton sequences.

For an integer :math:`k \ge 0` written in base :math:`b` as :math:`k = \sum_j a_j b^j`,
the radical inverse is :math:`\phi_b(k) = \sum_j a_j b^{-j-1}`, the digits mirrored about
the radix point.  The Halton point with index :math:`k` in bases :math:`(b_1, \dots, b_d)`
is :math:`(\phi_{b_1}(k), \dots, \phi_{b_d}(k))`; with pairwise coprime bases the sequence
fills :math:`[0, 1)^d` evenly.  A *random-start* sequence (Robertson et al. 2013) starts
each coordinate at its own random index: :math:`x_k = (\phi_{b_1}(u_1 + k), \dots)`.

References
----------
Halton, J. H. (1960). On the efficiency of certain quasi-random sequences of points in
evaluating multi-dimensional integrals. Numerische Mathematik 2:84-90.
Robertson, B. L., Brown, J. A., McDonald, T. and Jaksons, P. (2013). BAS: Balanced
Acceptance Sampling of natural resources. Biometrics 69:776-784.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np


def radical_inverse(index: int | np.ndarray, base: int) -> np.ndarray:
    r"""Radical inverse :math:`\phi_b(k)` of non-negative integers ``index`` in ``base``.

    Parameters
    ----------
    index : int or array of int
        Non-negative integers :math:`k`.
    base : int
        Base :math:`b \ge 2`.

    Returns
    -------
    numpy.ndarray of float in [0, 1)

    Notes
    -----
    :math:`\phi_b(k) = \sum_j a_j b^{-j-1}` where :math:`k = \sum_j a_j b^j`, so
    :math:`\phi_2(1, 2, 3, \dots) = 1/2, 1/4, 3/4, \dots`.

    References
    ----------
    Halton, J. H. (1960). Numerische Mathematik 2:84-90.
    """
    if base < 2:
        raise ValueError("base must be at least 2")
    k = np.array(index, dtype=np.int64, copy=True, ndmin=1)
    if np.any(k < 0):
        raise ValueError("indices must be non-negative")
    out = np.zeros(k.shape, dtype=float)
    f = 1.0 / base
    while np.any(k > 0):
        out += f * (k % base)
        k //= base
        f /= base
    return out


def halton(n: int, bases: Sequence[int] = (2, 3), start: Sequence[int] | int = 0) -> np.ndarray:
    r"""``n`` Halton points in :math:`[0,1)^d`, coordinate ``j`` starting at index ``start[j]``.

    Parameters
    ----------
    n : int
        Number of points.
    bases : sequence of int
        Pairwise coprime bases, one per dimension (default 2 and 3).
    start : int or sequence of int
        Index of the first point, per dimension (random-start Halton when drawn at random).

    Returns
    -------
    numpy.ndarray, shape (n, d)

    References
    ----------
    Halton (1960); Robertson et al. (2013) Biometrics 69:776-784 (random start).
    """
    starts = [int(start)] * len(bases) if np.isscalar(start) else [int(s) for s in start]
    if len(starts) != len(bases):
        raise ValueError("one start index per base is needed")
    k = np.arange(n, dtype=np.int64)
    return np.column_stack([radical_inverse(s + k, b) for s, b in zip(starts, bases, strict=True)])
