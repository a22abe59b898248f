"""Sample adequacy: quadrats needed for a stated precision, and the running mean."""

import numpy as np
import pytest
from scipy import stats

from monitor.errors import EstimationError
from monitor.estimate import quadrats_needed, quadrats_needed_from_moments, running_mean


@pytest.mark.parametrize(
    ("mean", "variance", "n", "n_min"),
    [
        # Published worked example: Cedar Creek Associates, Colowyo Mine bond release evaluation,
        # sec. 2.3 "Sample Adequacy Determination", Table 5A (Colorado Division of Reclamation,
        # Mining and Safety, Laserfiche document 1250747, page 52): n_min = t^2 s^2 / (0.1 xbar)^2,
        # t one-tailed 90 % with n - 1 df.
        (48.83, 188.06, 72, 13.20),
        (64.40, 134.67, 20, 5.72),
        (51.95, 204.58, 20, 13.36),
    ],
)
def test_adequacy_formula_matches_published_example(mean, variance, n, n_min):
    r = quadrats_needed_from_moments(mean, np.sqrt(variance), n_taken=n, precision=0.10,
                                     confidence=0.90, sided="one")
    assert r.n_required_at_pilot_df == pytest.approx(n_min, abs=0.005)
    assert r.adequate                          # all three were adequate in the report (n >= n_min)
    assert r.n_required <= n


def test_iterated_n_is_the_smallest_meeting_the_t_formula():
    # independent check with scipy.stats 1.17 t quantiles: n satisfies n >= (t_{n-1} s/(p m))^2
    # and n - 1 does not
    for cv in (0.3, 0.8, 1.5, 3.0):
        for precision in (0.1, 0.2, 0.3):
            r = quadrats_needed_from_moments(1.0, cv, precision=precision)

            def g(m, cv=cv, precision=precision):
                return (stats.t.ppf(0.975, m - 1) * cv / precision) ** 2

            assert r.n_required >= g(r.n_required)
            if r.n_required > 2:
                assert r.n_required - 1 < g(r.n_required - 1)
            assert r.n_required >= r.n_required_normal


def test_iteration_from_the_normal_value_converges_to_the_same_n():
    # the classic hand procedure: start with z, recompute with t at the current n, repeat
    cv, p = 1.2, 0.2
    n = (stats.norm.ppf(0.975) * cv / p) ** 2
    for _ in range(50):
        n_new = (stats.t.ppf(0.975, np.ceil(n) - 1) * cv / p) ** 2
        if np.ceil(n_new) == np.ceil(n):
            break
        n = n_new
    assert quadrats_needed_from_moments(5.0, 5.0 * cv, precision=p).n_required == int(np.ceil(n_new))


def test_finite_population_correction_reduces_n_as_cochran_4_2():
    base = quadrats_needed_from_moments(10.0, 8.0, precision=0.1)
    finite = quadrats_needed_from_moments(10.0, 8.0, precision=0.1, population_size=200)
    assert finite.n_required < base.n_required
    # Cochran 1977 eq. 4.2: n = n0 / (1 + n0 / N) with n0 at the t of the final n
    n = finite.n_required
    n0 = (stats.t.ppf(0.975, n - 1) * 0.8 / 0.1) ** 2
    assert n >= n0 / (1 + n0 / 200)
    n0m = (stats.t.ppf(0.975, n - 2) * 0.8 / 0.1) ** 2
    assert n - 1 < n0m / (1 + n0m / 200)


def test_simulated_precision_is_met_at_the_required_n():
    # seeded simulation: with the true sd, quadrats_needed's n gives |mean error| <= p * mu in at
    # least 95 % of samples; far fewer quadrats (the normal-theory n minus a third) do not
    rng = np.random.default_rng(404)
    mu, sigma, p = 20.0, 14.0, 0.2
    n = quadrats_needed_from_moments(mu, sigma, precision=p).n_required
    samples = rng.normal(mu, sigma, (20000, n))
    within = np.mean(np.abs(samples.mean(axis=1) - mu) <= p * mu)
    assert within >= 0.95
    fewer = int(n * 2 / 3)
    within_fewer = np.mean(np.abs(rng.normal(mu, sigma, (20000, fewer)).mean(axis=1) - mu) <= p * mu)
    assert within_fewer < 0.93


def test_additional_quadrats_and_achieved_precision():
    values = np.array([3, 0, 7, 2, 5, 9, 1, 4, 6, 2, 0, 8])
    r = quadrats_needed(values, precision=0.2)
    tq = stats.t.ppf(0.975, 11)              # scipy.stats
    assert r.achieved_precision == pytest.approx(tq * values.std(ddof=1) / np.sqrt(12) / values.mean())
    assert r.additional_required == r.n_required - 12 > 0
    assert not r.adequate and r.n == 12


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"mean": 0.0, "sd": 1.0}, "mean is 0"),
        ({"mean": 5.0, "sd": -1.0}, "standard deviation"),
        ({"mean": 5.0, "sd": 1.0, "precision": 0.0}, "precision"),
        ({"mean": 5.0, "sd": 1.0, "n_taken": 1}, "at least 2"),
        ({"mean": 5.0, "sd": 1.0, "confidence": 95}, "confidence"),
    ],
)
def test_adequacy_bad_input(kwargs, message):
    with pytest.raises(EstimationError, match=message):
        quadrats_needed_from_moments(**kwargs)


def test_adequacy_needs_two_values():
    with pytest.raises(EstimationError, match="at least 2"):
        quadrats_needed([4.0])


def test_running_mean_matches_scipy_interval_at_every_step():
    rng = np.random.default_rng(8)
    values = rng.poisson(6, 25).astype(float)
    r = running_mean(values, precision=0.2)
    assert r.n == 25 and len(r.steps) == 24 and r.steps[0].k == 2
    for step in r.steps:
        head = values[: step.k]
        lo, hi = stats.t.interval(0.95, step.k - 1, loc=head.mean(), scale=stats.sem(head))  # scipy.stats
        assert step.lower == pytest.approx(lo, rel=1e-9, abs=1e-12)
        assert step.upper == pytest.approx(hi, rel=1e-9, abs=1e-12)
    adequate = [s.k for s in r.steps if s.relative_half_width is not None and s.relative_half_width <= 0.2]
    assert r.first_adequate_k == (adequate[0] if adequate else None)
    frame = r.to_frame()
    assert list(frame["k"]) == list(range(2, 26))


def test_running_mean_with_leading_zeros_has_no_nan():
    r = running_mean([0, 0, 0, 4, 2])
    assert r.steps[0].relative_half_width is None
    assert all(np.isfinite([s.mean, s.lower, s.upper]).all() for s in r.steps)
