"""Simulation-based power of a trend test, designs compared, and the inverse questions.

For each design, R data sets are simulated from the population model (``monitor.power.model``)
with the scenario's steady change, each is fitted (by default with the trend engine's fast path),
and the test of no trend is made at level alpha on the stated side::

    two-sided  reject when |T| > q(1 - alpha/2)
    decline    reject when T < -q(1 - alpha)
    rise       reject when T >  q(1 - alpha)

with ``T = slope / se(slope)`` and q the normal (or t) quantile.  Power is the share of fits that
reject, with Monte-Carlo standard error ``sqrt(p (1 - p) / R)``.

Reproducibility and common random numbers: the caller's ``rng`` gives one root entropy; replicate
i of every design draws from ``SeedSequence(entropy, spawn_key=(0,)).spawn(R)[i]``, so the answer
does not depend on how many processes run the replicates or in which order they finish, and the
designs compared share their random draws as far as they overlap (the same good and bad years, the
same first stations: see ``monitor.power.simulate``).  Differences between designs are then not
masked by independent Monte-Carlo noise in each.

References
----------
Gerrodette, T. (1987). A power analysis for detecting trends. Ecology 68:1364-1372.
Johnson, P. C. D., Barry, S. J. E., Ferguson, H. M. and Mueller, P. (2015). Power analysis for
generalized linear mixed models in ecology and evolution. Methods in Ecology and Evolution 6:133-142.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Sequence
from concurrent.futures import Executor, ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize, stats

from monitor.errors import DesignError, Diagnostic
from monitor.families import FAMILIES as FAMILY_OBJECTS
from monitor.families import family as family_of
from monitor.power.approximation import (
    Approximation,
    approximate_detectable_change,
    approximate_power,
)
from monitor.power.fitting import FITTERS, fit_one
from monitor.power.model import Design, Scenario, VarianceComponents
from monitor.power.simulate import simulate_dataset
from monitor.settings import DEFAULT_CHANGE_MARGIN, year_effect_by_default

Progress = Callable[[int, int], None] | None

_OUTCOME_FIELDS = ("slope", "slope_se", "df", "lower", "upper", "call", "converged", "failed", "warned")


@dataclass(frozen=True)
class PowerResult:
    """Simulated power of one design for one scenario, with the approximation beside it."""

    design: Design
    scenario: Scenario
    components: VarianceComponents
    fitter: str
    n_replicates: int
    n_fitted: int
    n_failed: int
    n_not_converged: int
    power: float                   # share of fitted data sets whose test rejected no trend
    power_se: float                # Monte-Carlo SE sqrt(p (1 - p) / n_fitted)
    median_interval_width: float   # median width of the 95 % annual-change interval [fraction per year]
    share_right_call: float        # share of fits whose call matched the scenario's true call (nan: no calls)
    approximation: Approximation | None
    seed_entropy: int
    replicates: pd.DataFrame = field(repr=False, compare=False)
    diagnostics: tuple[Diagnostic, ...] = ()

    def to_dict(self) -> dict:
        """JSON-ready summary (no per-replicate table)."""
        d = self.design
        return {
            "design": {
                "n_stations": d.n_stations, "n_years": d.n_years, "revisit": d.revisit,
                "n_sites": d.sites_for(self.components), "quadrat_area_m2": d.quadrat_area,
                "area_exponent": d.area_exponent, "missed_share": d.missed_share,
            },
            "scenario": {
                "annual_change": self.scenario.annual_change, "alpha": self.scenario.alpha,
                "side": self.scenario.side, "margin": self.scenario.margin,
            },
            "family": self.components.family,
            "fitter": self.fitter,
            "n_replicates": self.n_replicates, "n_fitted": self.n_fitted, "n_failed": self.n_failed,
            "n_not_converged": self.n_not_converged,
            "power": _num(self.power), "power_se": _num(self.power_se),
            "median_interval_width": _num(self.median_interval_width),
            "share_right_call": _num(self.share_right_call),
            "approximate_power": None if self.approximation is None else self.approximation.power,
            "power_ceiling": None if self.approximation is None else self.approximation.ceiling,
            "approximation": None if self.approximation is None else self.approximation.label,
            "seed_entropy": self.seed_entropy,
            "diagnostics": [{"code": g.code, "message": g.message, "severity": g.severity} for g in self.diagnostics],
        }


def _num(x: float) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def results_frame(results: Sequence[PowerResult]) -> pd.DataFrame:
    """One row per design: the designs side by side."""
    rows = []
    for r in results:
        d = r.design
        rows.append({
            "n_stations": d.n_stations, "n_years": d.n_years, "revisit": d.revisit,
            "quadrat_area_m2": d.quadrat_area, "missed_share": d.missed_share,
            "annual_change": r.scenario.annual_change, "power": r.power, "power_se": r.power_se,
            "approximate_power": None if r.approximation is None else r.approximation.power,
            "power_ceiling": None if r.approximation is None else r.approximation.ceiling,
            "median_interval_width": r.median_interval_width, "share_right_call": r.share_right_call,
            "n_fitted": r.n_fitted, "n_failed": r.n_failed,
        })
    return pd.DataFrame(rows)


# --- the runner ---------------------------------------------------------------------------------

def _run_chunk(components: VarianceComponents, design: Design, scenario: Scenario, fitter: str,
               seeds: Sequence[np.random.SeedSequence]) -> list[tuple]:
    """Simulate and fit a run of replicates; top level so worker processes can import it."""
    out = []
    for seed in seeds:
        # a fresh copy of the seed: spawning streams from a generator advances its seed sequence, and
        # the same seeds serve every design (common random numbers)
        fresh = np.random.SeedSequence(seed.entropy, spawn_key=seed.spawn_key, pool_size=seed.pool_size)
        data = simulate_dataset(components, design, scenario, np.random.default_rng(fresh))
        outcome = fit_one(fitter, data, components, scenario)
        out.append(tuple(getattr(outcome, name) for name in _OUTCOME_FIELDS))
    return out


@dataclass(frozen=True)
class _Job:
    key: int
    design: Design
    scenario: Scenario


def _run_jobs(components: VarianceComponents, jobs: Sequence[_Job], fitter: str, n_replicates: int,
              entropy: int, n_workers: int | None, progress: Progress,
              progress_offset: int = 0, progress_total: int | None = None,
              executor: Executor | None = None) -> list[list[tuple]]:
    """Run every job's replicates, in this process, across a process pool, or on the ``executor`` given
    (any ``concurrent.futures.Executor``, e.g. a Dask client's; ``n_workers`` then sets the chunking)."""
    if fitter not in FITTERS:
        raise DesignError(f"fitter {fitter!r}: expected one of {', '.join(FITTERS)}")
    fam = family_of(components.family)
    if fitter.startswith("trend") and not fam.serves(components.measure):
        raise DesignError(f"the trend engine fits the {fam.name} family to {', '.join(fam.kinds)} values, not to "
                          f"{components.measure}; use fitter 'ols-log' for it")
    if fitter in ("ols-log", "yearly-means") and not fam.gaussian:
        raise DesignError(f"fitter '{fitter}' regresses log or logit values: use it with the "
                          f"{' or '.join(f.name for f in FAMILY_OBJECTS.values() if f.gaussian)} family only")
    if n_replicates < 1:
        raise DesignError("at least one replicate is needed")
    workers = (os.cpu_count() or 1) if n_workers is None else int(n_workers)
    if workers < 1:
        raise DesignError("n_workers must be at least 1")
    total = progress_total if progress_total is not None else len(jobs) * n_replicates
    # every job shares one list of replicate seeds: common random numbers across designs
    shared = np.random.SeedSequence(entropy, spawn_key=(0,)).spawn(n_replicates)
    seeds = {job.key: shared for job in jobs}
    results: list[list[tuple | None]] = [[None] * n_replicates for _ in jobs]
    done = progress_offset
    if progress is not None:
        progress(done, total)
    chunk = max(1, min(25, math.ceil(n_replicates / (4 * workers))))
    pieces = [(j, start) for j in range(len(jobs)) for start in range(0, n_replicates, chunk)]
    if executor is not None:
        _collect(executor, components, jobs, fitter, seeds, pieces, chunk, results, done, total, progress)
    elif workers == 1:
        for j, start in pieces:
            job = jobs[j]
            rows = _run_chunk(components, job.design, job.scenario, fitter, seeds[job.key][start:start + chunk])
            results[j][start:start + len(rows)] = rows
            done += len(rows)
            if progress is not None:
                progress(done, total)
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            _collect(pool, components, jobs, fitter, seeds, pieces, chunk, results, done, total, progress)
    return results  # type: ignore[return-value]


def _collect(pool: Executor, components, jobs, fitter, seeds, pieces, chunk, results, done, total, progress) -> None:
    """Submit every chunk of replicates to ``pool`` and put each back in its place as it finishes."""
    futures = {
        pool.submit(_run_chunk, components, jobs[j].design, jobs[j].scenario, fitter,
                    seeds[jobs[j].key][start:start + chunk]): (j, start)
        for j, start in pieces
    }
    for future in as_completed(futures):
        j, start = futures[future]
        rows = future.result()
        results[j][start:start + len(rows)] = rows
        done += len(rows)
        if progress is not None:
            progress(done, total)


def _summarise(components: VarianceComponents, job: _Job, fitter: str, rows: list[tuple], entropy: int,
               approximation: bool) -> PowerResult:
    table = pd.DataFrame(rows, columns=list(_OUTCOME_FIELDS))
    scenario = job.scenario
    fitted = table[~table["failed"]]
    n_fitted = len(fitted)
    n_failed = len(table) - n_fitted
    diagnostics: list[Diagnostic] = []
    if n_fitted:
        reject = reject_null(fitted["slope"].to_numpy(float), fitted["slope_se"].to_numpy(float),
                             fitted["df"].to_numpy(float), scenario.alpha, scenario.side)
        table["reject"] = False
        table.loc[fitted.index, "reject"] = reject
        power = float(reject.mean())
        power_se = math.sqrt(power * (1 - power) / n_fitted)
        width = float(np.median(fitted["upper"] - fitted["lower"]))
        calls = fitted["call"].dropna()
        share_right = float((calls == scenario.true_call).mean()) if len(calls) else math.nan
    else:
        power = power_se = width = share_right = math.nan
        table["reject"] = False
    n_not_converged = int((~fitted["converged"]).sum())
    if n_failed:
        diagnostics.append(Diagnostic(
            "fits_failed",
            f"{n_failed} of {len(table)} simulated data sets could not be fitted; power is over the {n_fitted} that could.",
        ))
    if n_not_converged:
        diagnostics.append(Diagnostic(
            "not_converged", f"{n_not_converged} of {n_fitted} fits did not report convergence; they are counted as fitted.",
        ))
    n_warned = int(fitted["warned"].sum())
    if n_warned:
        diagnostics.append(Diagnostic("fit_warnings", f"{n_warned} of {n_fitted} fits raised warnings.", "info"))
    approx = None
    if approximation:
        try:
            approx = approximate_power(components, job.design, scenario, df=analysis_df(fitter, job.design, components))
        except DesignError:
            approx = None
    return PowerResult(
        design=job.design, scenario=scenario, components=components, fitter=fitter,
        n_replicates=len(table), n_fitted=n_fitted, n_failed=n_failed, n_not_converged=n_not_converged,
        power=power, power_se=power_se, median_interval_width=width, share_right_call=share_right,
        approximation=approx, seed_entropy=entropy, replicates=table, diagnostics=tuple(diagnostics),
    )


def analysis_df(fitter: str, design: Design, components: VarianceComponents) -> float | None:
    """Degrees of freedom of the test the fitter makes, for the approximation beside it.

    The engine puts a year effect in the model wherever the series is long enough
    (``MIN_YEAR_EFFECT_YEARS``) and then judges the slope on t with n_years - 2 df; the yearly-means
    reference always does; the others use a normal reference.  None: the approximation's own rule.
    """
    if fitter == "yearly-means" or (fitter == "trend" and year_effect_by_default(design.n_years)):
        return float(design.n_years - 2)
    if fitter in ("trend", "trend-no-year", "ols-log"):
        return math.inf
    return None


def reject_null(slope: np.ndarray, slope_se: np.ndarray, df: np.ndarray, alpha: float, side: str) -> np.ndarray:
    """Whether each test of no trend rejects at level ``alpha`` on ``side`` (t with ``df``; inf = normal)."""
    statistic = np.asarray(slope, float) / np.asarray(slope_se, float)
    df = np.asarray(df, float)
    tail = alpha / 2 if side == "two-sided" else alpha
    q = np.where(np.isinf(df), stats.norm.isf(tail), stats.t.isf(tail, np.where(np.isinf(df), 1.0, df)))
    if side == "two-sided":
        return np.abs(statistic) > q
    if side == "decline":
        return statistic < -q
    if side == "rise":
        return statistic > q
    raise DesignError(f"test side {side!r}: expected two-sided, decline or rise")


def _entropy(rng: np.random.Generator) -> int:
    return int(rng.integers(0, 2**63 - 1))


def simulate_power(components: VarianceComponents, design: Design, scenario: Scenario, *,
                   rng: np.random.Generator, n_replicates: int = 500, n_workers: int | None = 1,
                   progress: Progress = None, fitter: str = "trend", approximation: bool = True) -> PowerResult:
    """Power of one design to detect the scenario's change, by simulation.

    Parameters
    ----------
    components : VarianceComponents
        Population model (from :func:`monitor.power.components_from_trend` or user values).
    design : Design
        Stations, years, revisit design, quadrat area, missed-visit share.
    scenario : Scenario
        Steady annual change, alpha, test side, margin.
    rng : numpy.random.Generator
        Gives the root seed (one draw); the result stores it as ``seed_entropy``.
    n_replicates : int
        R, simulated data sets.
    n_workers : int or None
        Processes; 1 runs in this process, None uses every CPU.  The answer does not depend on it.
    progress : callable(done, total) or None
        Called as replicates finish.
    fitter : str
        ``"trend"`` (the trend engine's fast path) or ``"ols-log"`` (reference, no random effects).
    approximation : bool
        Also compute Gerrodette's approximation for the design.

    Returns
    -------
    PowerResult

    Notes
    -----
    ``power = (1/R) sum_i 1[test i rejects]``, ``SE = sqrt(power (1 - power) / R)``.

    References
    ----------
    Johnson, P. C. D. et al. (2015). Methods in Ecology and Evolution 6:133-142.
    """
    return compare_designs(components, [design], scenario, rng=rng, n_replicates=n_replicates,
                           n_workers=n_workers, progress=progress, fitter=fitter, approximation=approximation)[0]


def compare_designs(components: VarianceComponents, designs: Sequence[Design], scenario: Scenario, *,
                    rng: np.random.Generator, n_replicates: int = 500, n_workers: int | None = 1,
                    progress: Progress = None, fitter: str = "trend",
                    approximation: bool = True, executor: Executor | None = None) -> list[PowerResult]:
    """Simulated power of several designs side by side (see :func:`simulate_power`).

    Every design's replicates are seeded from ``SeedSequence(entropy, spawn_key=(0,))`` (common
    random numbers, see the module docstring).  Use :func:`results_frame` for a table and
    :func:`monitor.power.plot_power` for the figure.  ``executor`` (any ``concurrent.futures.Executor``,
    such as a Dask client's) runs the replicates instead of a local pool of ``n_workers``; the answer is
    the same.
    """
    designs = list(designs)
    if not designs:
        raise DesignError("no designs to compare")
    entropy = _entropy(rng)
    jobs = [_Job(k, d, scenario) for k, d in enumerate(designs)]
    rows = _run_jobs(components, jobs, fitter, n_replicates, entropy, n_workers, progress, executor=executor)
    return [_summarise(components, job, fitter, r, entropy, approximation) for job, r in zip(jobs, rows, strict=True)]


def design_grid(n_stations: Sequence[int], n_years: Sequence[int], **fields: object) -> list[Design]:
    """Every combination of station and year counts, other design fields shared."""
    return [Design(n_stations=int(s), n_years=int(y), **fields) for y in n_years for s in n_stations]  # type: ignore[arg-type]


# --- inverse questions ------------------------------------------------------------------------

@dataclass(frozen=True)
class DesignSearch:
    """Answer to "what is the smallest number of stations (or years) reaching the target power?"."""

    vary: str                         # "n_stations" or "n_years"
    target: float
    value: int | None                 # smallest grid value whose simulated power reached the target
    result: PowerResult | None        # its simulation
    approximate_value: int | None     # the approximation's answer on the same grid (starting guess)
    evaluated: tuple[PowerResult, ...]  # every simulated grid value, in grid order
    note: str = ""

    def to_dict(self) -> dict:
        return {
            "vary": self.vary, "target": self.target, "value": self.value,
            "approximate_value": self.approximate_value, "note": self.note,
            "evaluated": [r.to_dict() for r in self.evaluated],
        }


def smallest_design(components: VarianceComponents, scenario: Scenario, design: Design, *,
                    vary: str = "n_stations", grid: Sequence[int], target: float = 0.8,
                    rng: np.random.Generator, n_replicates: int = 500, n_workers: int | None = 1,
                    progress: Progress = None, fitter: str = "trend",
                    executor: Executor | None = None) -> DesignSearch:
    """Smallest number of stations (or years) on ``grid`` whose simulated power reaches ``target``.

    The approximation's answer on the grid is simulated first; then a bisection over the grid,
    assuming power grows with the varied quantity, narrows to the smallest value whose
    simulated power is at least ``target``.  Every grid value shares the same replicate seeds
    (common random numbers), so the answer does not depend on the order of evaluation or the
    number of processes, and neighbouring grid values differ by the design, not by the draws.
    Simulated powers carry Monte-Carlo error; values near the target are worth re-running with
    more replicates.
    """
    if vary not in ("n_stations", "n_years"):
        raise DesignError("vary must be 'n_stations' or 'n_years'")
    if not 0 < target < 1:
        raise DesignError("target power must lie strictly between 0 and 1")
    values = sorted({int(v) for v in grid})
    if not values:
        raise DesignError("empty search grid")
    candidates = [design.with_(**{vary: v}) for v in values]
    approx_index = None
    for j, cand in enumerate(candidates):
        try:
            if approximate_power(components, cand, scenario).power >= target:
                approx_index = j
                break
        except DesignError:
            continue
    entropy = _entropy(rng)
    max_evaluations = 1 + math.ceil(math.log2(len(values) + 1))
    total = max_evaluations * n_replicates
    done = [0]
    evaluated: dict[int, PowerResult] = {}

    def power_at(j: int) -> float:
        if j not in evaluated:
            job = _Job(j, candidates[j], scenario)
            rows = _run_jobs(components, [job], fitter, n_replicates, entropy, n_workers, progress,
                             progress_offset=done[0], progress_total=total, executor=executor)
            done[0] += n_replicates
            evaluated[j] = _summarise(components, job, fitter, rows[0], entropy, True)
        return evaluated[j].power

    lo, hi = -1, len(values)  # invariant: power(lo) < target (or lo = -1), power(hi) >= target (or hi = len)
    first = approx_index if approx_index is not None else len(values) - 1
    if power_at(first) >= target:
        hi = first
    else:
        lo = first
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if power_at(mid) >= target:
            hi = mid
        else:
            lo = mid
    if progress is not None:
        progress(total, total)
    found = hi < len(values)
    note = "" if found else f"no {vary.replace('_', ' ')} on the grid reached power {target:g}"
    return DesignSearch(
        vary=vary, target=target, value=values[hi] if found else None,
        result=evaluated.get(hi) if found else None,
        approximate_value=values[approx_index] if approx_index is not None else None,
        evaluated=tuple(evaluated[j] for j in sorted(evaluated)), note=note,
    )


# --- detectable change ----------------------------------------------------------------------

@dataclass(frozen=True)
class DetectableChange:
    """Smallest steady change the design detects with the target power."""

    annual_change: float          # [fraction per year], negative for a decline
    period_change: float          # total change over ``over_years`` annual steps
    over_years: int
    power: float                  # the target
    method: str                   # "simulation" or "approximation"
    approximate_annual_change: float
    curve: pd.DataFrame | None    # simulated power at each evaluated change (simulation only)
    label: str = ""

    def to_dict(self) -> dict:
        return {
            "annual_change": self.annual_change, "period_change": self.period_change,
            "over_years": self.over_years, "power": self.power, "method": self.method, "label": self.label,
            "approximate_annual_change": self.approximate_annual_change,
            "curve": None if self.curve is None else self.curve.to_dict(orient="records"),
        }


def detectable_change(components: VarianceComponents, design: Design, *, alpha: float = 0.05,
                      side: str = "decline", power: float = 0.8, over_years: int | None = None,
                      margin: float = DEFAULT_CHANGE_MARGIN, method: str = "approximation",
                      rng: np.random.Generator | None = None, n_replicates: int = 200,
                      n_workers: int | None = 1, progress: Progress = None,
                      fitter: str = "trend") -> DetectableChange:
    """Smallest steady change over ``over_years`` detectable with ``power`` under ``design``.

    Parameters
    ----------
    components, design
        Population model and the current design.
    alpha, side, margin
        The test (see :class:`Scenario`); a two-sided test is asked about a decline.
    power : float
        Target power, 0.8 by default.
    over_years : int or None
        Annual steps the total change is reported over; by default the monitoring period
        (``n_years - 1`` steps from the first to the last survey).
    method : str
        ``"approximation"`` (Gerrodette 1987, instant) or ``"simulation"``.
    rng : numpy.random.Generator
        Needed for ``method="simulation"``.

    Returns
    -------
    DetectableChange

    Notes
    -----
    Simulation: power is simulated at slopes ``beta_0 * (0.5, 0.75, 1, 1.25, 1.5, 2)`` around
    the approximation's answer ``beta_0``, with the same seeds at every slope (common random
    numbers), and a probit curve ``P(reject) = Phi(a + c |beta|)`` is fitted to the rejection
    counts by maximum likelihood; its solution for ``power`` is the answer.
    """
    if method not in ("approximation", "simulation"):
        raise DesignError("method must be 'approximation' or 'simulation'")
    steps = design.n_years - 1 if over_years is None else int(over_years)
    approx_rate = approximate_detectable_change(components, design, alpha=alpha, side=side, power=power)
    sign = 1.0 if side == "rise" else -1.0
    if method == "approximation":
        rate = approx_rate
        curve = None
        label = "approximation (Gerrodette 1987)"
    else:
        if rng is None:
            raise DesignError("a simulated detectable change needs an rng")
        entropy = _entropy(rng)
        base = abs(math.log1p(approx_rate))
        multipliers = (0.5, 0.75, 1.0, 1.25, 1.5, 2.0)
        slopes = [sign * min(base * m, math.log(10.0)) for m in multipliers]
        jobs = [_Job(0, design, Scenario(math.expm1(b), alpha=alpha, side=side, margin=margin)) for b in slopes]
        total = len(jobs) * n_replicates
        summaries = []
        for i, job in enumerate(jobs):
            rows = _run_jobs(components, [job], fitter, n_replicates, entropy, n_workers, progress,
                             progress_offset=i * n_replicates, progress_total=total)
            summaries.append(_summarise(components, job, fitter, rows[0], entropy, False))
        curve = pd.DataFrame({
            "annual_change": [s.scenario.annual_change for s in summaries],
            "power": [s.power for s in summaries],
            "power_se": [s.power_se for s in summaries],
            "n_fitted": [s.n_fitted for s in summaries],
        })
        magnitude = _probit_solve(np.abs(np.asarray(slopes)), curve["power"].to_numpy(),
                                  curve["n_fitted"].to_numpy(), power)
        rate = math.expm1(sign * magnitude)
        label = f"simulation ({n_replicates} data sets at each of {len(slopes)} changes, probit curve)"
    return DetectableChange(
        annual_change=rate, period_change=(1 + rate) ** steps - 1, over_years=steps, power=power,
        method=method, approximate_annual_change=approx_rate, curve=curve, label=label,
    )


def _probit_solve(x: np.ndarray, p: np.ndarray, n: np.ndarray, target: float) -> float:
    """Fit P = Phi(a + c x) to binomial shares by maximum likelihood and solve for ``target``."""
    ok = np.isfinite(p) & (n > 0)
    x, k, n = x[ok], np.round(p[ok] * n[ok]), n[ok]
    if x.size < 2:
        raise DesignError("too few fitted data sets to trace the power curve")

    def nll(theta: np.ndarray) -> float:
        eta = theta[0] + theta[1] * x
        return -float(np.sum(k * stats.norm.logcdf(eta) + (n - k) * stats.norm.logsf(eta)))

    fit = optimize.minimize(nll, x0=np.array([-1.0, 1.0 / max(x.mean(), 1e-9)]), method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 4000})
    a, c = fit.x
    if not c > 0:
        raise DesignError("simulated power did not grow with the size of the change; use more replicates")
    return float((stats.norm.ppf(target) - a) / c)
