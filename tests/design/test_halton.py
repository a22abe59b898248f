"""Halton sequences against the radical-inverse definition (Halton 1960)."""

from fractions import Fraction

import numpy as np
import pytest

from monitor.design.halton import halton, radical_inverse


def _radical_inverse_exact(k: int, base: int) -> Fraction:
    # Halton, J. H. (1960) Numerische Mathematik 2:84-90: mirror the base-b digits of k
    # about the radix point, computed here exactly with fractions, digit by digit.
    out = Fraction(0)
    scale = Fraction(1, base)
    while k:
        k, digit = divmod(k, base)
        out += digit * scale
        scale /= base
    return out


def test_base_2_first_values():
    # van der Corput sequence in base 2 (Halton 1960): 1/2, 1/4, 3/4, 1/8, 5/8, 3/8, 7/8
    expected = [1 / 2, 1 / 4, 3 / 4, 1 / 8, 5 / 8, 3 / 8, 7 / 8]
    assert radical_inverse(np.arange(1, 8), 2) == pytest.approx(expected, abs=0)


def test_base_3_first_values():
    # base 3 (Halton 1960): 1/3, 2/3, 1/9, 4/9, 7/9, 2/9, 5/9, 8/9
    expected = [1 / 3, 2 / 3, 1 / 9, 4 / 9, 7 / 9, 2 / 9, 5 / 9, 8 / 9]
    assert radical_inverse(np.arange(1, 9), 3) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize("base", [2, 3, 5, 7])
def test_matches_exact_definition(base):
    ks = list(range(0, 2000, 7)) + [10**7 + 12345]
    got = radical_inverse(np.array(ks), base)
    exact = [float(_radical_inverse_exact(k, base)) for k in ks]
    assert got == pytest.approx(exact, rel=1e-14, abs=1e-15)


def test_random_start_is_a_shift_of_the_index():
    # Robertson et al. (2013) Biometrics 69:776-784: point k of a random-start sequence is
    # (phi_2(u1 + k), phi_3(u2 + k))
    u1, u2 = 123456, 7890
    pts = halton(50, (2, 3), (u1, u2))
    for k in (0, 1, 17, 49):
        assert pts[k, 0] == float(_radical_inverse_exact(u1 + k, 2))
        assert pts[k, 1] == pytest.approx(float(_radical_inverse_exact(u2 + k, 3)), rel=1e-14)


def test_negative_index_refused():
    with pytest.raises(ValueError):
        radical_inverse(-1, 2)
