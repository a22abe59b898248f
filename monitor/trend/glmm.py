r"""Maximum-likelihood fitting of generalized linear mixed models (the trend engine's core).

Model
-----
For observation i (a visit of station j(i) in site s(i), recorded by observer o(i))::

    eta_i = offset_i + x_i' beta + sd_station * u_station[j(i)]
            + sum_terms sd_term * z_term,i * u_term[level_term(i)]
            + sd_obs * u_obs[i]
    y_i | eta_i ~ family(eta_i),        all u ~ N(0, 1) independently.

"Terms" are the random effects other than the station intercept and the
observation-level effect: a site intercept (z = 1), a site slope (z = centred year),
an observer intercept (z = 1, crossed with station), a year intercept (crossed with
station and site; independent, or AR(1) over consecutive years) and a site-by-year
intercept (nested in site and in year, crossed with station).  The random effects are
"spherical" (u ~ N(0, I), or N(0, R) with R the AR(1) correlation matrix, whose inverse
is tridiagonal) and their standard deviations enter as scale factors, as in lme4
(Bates et al. 2015).  With a year effect, the fixed effects that are constant within
years get a t reference with between-year df (``coefficient_df``).

Laplace approximation
---------------------
With ``h(u) = sum_i log f(y_i | eta_i) - |u|^2 / 2`` and ``H = -d2h/du2`` at the mode u^::

    log L(beta, sd) ~= h(u^) - log det(H) / 2.

It is exact for the Gaussian family (the cover model), where the same code therefore
gives the exact ML and, with + p/2 log(2 pi) - log det(X' V^-1 X)/2, the REML
log-likelihood.  Adaptive Gauss-Hermite quadrature (AGQ) with K nodes replaces the
Laplace integral per station when the station intercept is the only random effect:

    log L_j = -log(A_j)/2 + log sum_k w_k exp(g_j(u^_j + x_k / sqrt(A_j)) + x_k^2/2),

with (x_k, w_k) the probabilists' Gauss-Hermite rule, g_j the station's log joint
density (standard-normal prior included) and A_j its curvature at the mode
(Pinheiro & Bates 1995; Liu & Pierce 1994).

Fitting
-------
Stage 1: for each value of the log-SD vector, penalised iteratively reweighted
least squares (PIRLS: Newton's method with step halving) finds the joint mode of
(beta, u); an outer bounded quasi-Newton search (L-BFGS-B) maximises the Laplace
approximation over the log-SDs (and the log dispersion of NB2 / Gaussian).
Stage 2 (non-Gaussian families, or AGQ): beta joins the outer search and PIRLS finds
u alone, which gives the Laplace (or AGQ) maximum likelihood estimate proper, as
lme4's glmer (nAGQ >= 1) and glmmTMB do.  Standard errors come from the numerical
Hessian of the Laplace log-likelihood over (beta, log-SDs, log dispersion), as in
glmer (use.hessian = TRUE) and glmmTMB; for the Gaussian family from
(X' V^-1 X)^-1 as lmer does.

Structure
---------
Newton's system  H [u_obs, u_station, v] = g  is solved by block elimination: the
observation-level effects (diagonal) are eliminated first, which only rescales the
weights, w~_i = w_i / (1 + sd_obs^2 w_i); then the station intercepts (diagonal, since
a station touches only its own rows), which leaves a small dense Schur complement over
v = (site, site-slope, observer and year effects, and beta).  A site-by-year effect is
eliminated between the two: after the stations, its cells couple only within a site, so
they leave one dense K x K block per site (K years), eliminated site by site before v.
This is a sparse Cholesky
factorisation in which the fill-in is confined to v: all sums over a station's or a
level's rows are np.bincount calls, so one Newton step costs O(n + n_station * m + m^3)
with m = len(v), and no n x n (or n_station x n_station) matrix is ever formed.
Crossed observer effects live in the dense block, which is exact for any crossing
pattern and cheap while there are up to a few hundred observers and sites (the usual
case in a monitoring programme); a general sparse factorisation would be needed
only for crossed factors with thousands of levels.
log det(H) = sum log(1 + sd_obs^2 w_i) + sum log A_j [+ sum log det(site blocks)]
+ log det(dense Schur block) - log det(prior precision of the AR(1) year effects).

Estimators and convergence
--------------------------
``GlmmFit.estimator`` names what was computed (``ESTIMATORS``): "ml-laplace" / "ml-agq"
(stage 2), "ml-exact" / "reml-exact" (Gaussian), or "joint-mode" (stage 1 only: the
fast path, not a maximum likelihood estimate of beta).  ``converged`` is judged from
numbers, never from an optimiser's message: the search's own numerical stopping rule
(Newton decrement, relative decrease of one step; for L-BFGS-B the projected gradient and
the last relative decrease, recomputed from its iterates), or else the largest scaled
gradient at the end (GRADIENT_TOL).  Every tuning value (tolerances, difference steps,
starting values, bounds) is a named module constant with the reason for its value beside it.

References
----------
Bates, D., Maechler, M., Bolker, B. & Walker, S. (2015) Fitting linear mixed-effects
  models using lme4. Journal of Statistical Software 67(1), 1-48.
Brooks, M. E. et al. (2017) glmmTMB balances speed and flexibility among packages for
  zero-inflated generalized linear mixed modeling. The R Journal 9(2), 378-400.
Pinheiro, J. C. & Bates, D. M. (1995) Approximations to the log-likelihood function in
  the nonlinear mixed-effects model. J. Comput. Graph. Statist. 4(1), 12-35.
Liu, Q. & Pierce, D. A. (1994) A note on Gauss-Hermite quadrature. Biometrika 81, 624-629.
Tierney, L. & Kadane, J. B. (1986) Accurate approximations for posterior moments and
  marginal densities. JASA 81, 82-86.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import lapack
from scipy.optimize import minimize

from monitor.errors import Diagnostic
from monitor.settings import MIN_YEAR_EFFECT_YEARS as YEAR_EFFECT_MIN_YEARS  # noqa: F401 (named here too)
from monitor.settings import year_effect_by_default

from .families import Family, Gaussian

LOG_SD_MIN = np.log(1e-5)   # lower bound of every log-SD (an SD of 1e-5 is "zero" on the link scale)
LOG_SD_MAX = np.log(50.0)   # upper bound: an SD of 50 on a log or logit scale is far beyond any real data
ATANH_RHO_MAX = 3.8         # |rho| <= tanh(3.8) = 0.999 for an AR(1) correlation (searched as atanh(rho))
# log NB2 size and log residual SD: wide enough never to bind on real data (a size of 1e7 is Poisson)
LOG_DISP_BOUNDS = {"negbin": (np.log(1e-3), np.log(1e7)), "gaussian": (np.log(1e-8), np.log(1e8))}

# --- tuning of the optimiser --------------------------------------------------------------------
# Each value below was chosen for a reason stated beside it; the R reference fits
# (tests/trend/test_trend_*reference*.py, 1e-4 on the fixed effects) are the check that they do
# their job, and tests/benchmarks/bench_year_effect.py the check of their cost.

# Starting values.  Random-effect SDs of ecological count data on the log scale lie mostly
# between 0.1 and 1; 0.5 starts every search within a factor of 5 of the answer.
START_SD = 0.5
START_RESIDUAL_FRACTION = 0.7   # Gaussian: residual SD starts at 0.7 of the GLM's (the rest goes to the SDs)
START_NB_SIZE_POISSONLIKE = 100.0     # NB2 size when the GLM shows no excess variance (near Poisson)
START_NB_SIZE_RANGE = (0.05, 1e5)     # the moment estimate clipped to sizes the data can tell apart

# PIRLS (the inner Newton iterations for the modes of the random effects).
PIRLS_MAX_ITER = 60          # Newton converges quadratically: 5-15 iterations from a cold start
# Newton decrement g' H^-1 g below which one more full step puts the mode within about
# decrement^2 of the truth (quadratic convergence): 1e-7 gives the log-likelihood to ~1e-14.
PIRLS_DECREMENT_TOL = 1e-7
PIRLS_MAX_HALVINGS = 30      # 2^-30 ~ 1e-9 of a Newton step: smaller steps change nothing
PIRLS_ACCEPT_RTOL = 1e-12    # a step is kept unless h falls by more than rounding (relative)

# Numerical derivatives over the outer parameters (log-SDs, atanh rho, log dispersion; beta).
# Central differences have error O(h^2) from the third derivative plus O(eps / h) from rounding
# of a log-likelihood accurate to ~1e-12 relative: a step of 1e-3 to 2e-3 on a log-SD balances
# the two for second derivatives (eps^(1/4) ~ 1e-4 times the scale of the curvature).
STAGE1_STEP = 1e-3           # stage 1 projected Newton (gradient and Hessian)
LBFGS_STEP = 1e-4            # stage 1 L-BFGS-B (gradient only: eps^(1/3) ~ 5e-6, kept larger for noise)
STAGE2_STEP_PHI = 2e-3       # stage 2, variance parameters
STAGE2_STEP_BETA_SE = 2e-2   # stage 2, beta: 2 % of its conditional standard error ...
STAGE2_STEP_BETA_MIN = 1e-7  # ... but never below this (a coefficient with a tiny SE)
VARIANCE_FLOOR = 1e-16       # floor under a conditional variance before its square root

# Stage 1 search.  Projected Newton (a difference Hessian: k(k+1)/2 extra evaluations a step)
# pays for itself up to about 6 parameters; beyond, L-BFGS-B (2k evaluations a step) is cheaper.
STAGE1_NEWTON_MAX_PARAMS = 6
# (tol on the Newton decrement, ftol on the relative decrease) of the Newton search: "quick"
# when stage 2 refines the answer or for the fast path, "precise" when stage 1 is the answer
# (the Gaussian model, exact ML / REML): the decrement is twice the distance to the optimum in
# log-likelihood, so 1e-13 relative is the answer to rounding.
STAGE1_NEWTON_TOL = {"quick": (1e-10, 1e-9), "precise": (1e-13, 1e-12)}
# (ftol, gtol) of L-BFGS-B, in the same two modes
STAGE1_LBFGS_TOL = {"quick": (1e-10, 1e-4), "precise": (1e-13, 1e-7)}
LBFGS_MAX_ITER = 300         # far beyond the 20-60 iterations these searches take
LBFGS_MAX_LINESEARCH = 40    # line-search steps; the default 20 gives up too early on flat ridges

# A log-SD within SNAP_LOG_WIDTH of its lower bound whose gradient is flat (|g| < FLAT_AT_BOUND)
# is moved onto the bound: exp(log(1e-5) + 5) = 1.5e-3, an SD too small to matter on the link scale.
SNAP_LOG_WIDTH = 5.0
FLAT_AT_BOUND = 1e-3         # log-likelihood change per unit of log-SD that counts as flat
AT_BOUND_LOG_WIDTH = 0.5     # within this of the bound an SD is reported as 0 (1.65e-5 on the link scale)
BOUND_EPS = 1e-9             # a parameter this close to a bound is on it

# Projected Newton (_newton_bounded).
NEWTON_MAX_ITER = 60
NEWTON_MAX_STEP = 3.0        # cap on a step in log-SD: a factor of e^3 = 20 in an SD at once
NEWTON_TOL = 1e-10           # default stopping decrement (relative to max(1, |f|))
NEWTON_FTOL = 1e-9           # default stopping relative decrease of f over one step
NEWTON_MAX_HALVINGS = 40     # 2^-40 of a step ~ 1e-12: below the noise of the evaluations
# Saddle-free Newton: eigenvalues of the difference Hessian below this fraction of the largest
# are raised to it, so that a flat or wrongly curved direction takes a bounded step.
EIGEN_FLOOR = 1e-6
EIGEN_FLOOR_ABS = 1e-8       # ... and the largest is taken as at least this
# When no step along the Newton direction decreases f, the search is at the optimum to within
# the noise of the evaluations if the decrement is below this (relative): 1e-6 in log-likelihood
# moves the estimates by ~1e-3 standard errors.
STALL_DECREMENT = 1e-6
TINY_MOVE = 1e-7             # a step this small (largest coordinate) ...
TINY_MOVE_DECREASE = 1e-2    # ... lowering f by less than this fraction of tol ends the search
BFGS_CURVATURE_MIN = 1e-12   # s'y below this: the BFGS update would not stay positive definite

# Stage 2 (all parameters).  Above NEWTON_MAX_DIM parameters it goes block-wise.
NEWTON_MAX_DIM = 14          # 14 parameters: a 105-evaluation Hessian, about the cost of 4 block rounds
STAGE2_TOL = 1e-12           # stopping decrement: the estimate to ~1e-6 standard errors
STAGE2_FTOL = 1e-14          # stopping relative decrease
STAGE2_MAX_STEP = 2.0        # stage 1 already put the variances near their optimum
STAGE2_REUSE_BELOW = 1e-2    # keep the Hessian once the decrement is below this (it changes by O(step))
STAGE2_MAX_ITER = 40
BLOCKWISE_MAX_ROUNDS = 25    # block-coordinate rounds for many fixed effects (a long year factor)
BLOCKWISE_MAX_HALVINGS = 30
BLOCKWISE_TOL = 1e-12        # stopping decrement, relative to max(BLOCKWISE_TOL_SCALE, |f|)
BLOCKWISE_TOL_SCALE = 1e3

# Starting GLM (glm_fit).
GLM_MAX_ITER = 100
GLM_RIDGE = 1e-10            # keeps X' W X invertible for a column with no information (all-zero counts)
GLM_MAX_HALVINGS = 40
GLM_FTOL = 1e-12             # relative change of the log-likelihood ...
GLM_XTOL = 1e-9              # ... and of beta that end the GLM iterations

# Regularisation of the dense Newton block when the fixed effects are not identified at a point
# (a relative 1e-8 on the diagonal: far below any information the data carry).
RIDGE_NOT_IDENTIFIED = 1e-8

# A fit counts as converged when its search met its own numerical stopping rule or, failing
# that, when no parameter's scaled gradient exceeds GRADIENT_TOL at the end: the change of the
# log-likelihood per unit of a log-SD (or atanh rho, log dispersion), or per standard error of
# a fixed effect.  Near a maximum a scaled gradient g puts the estimate about g standard errors
# from it, so 1e-3 is far below anything reported.  SDs on (or within AT_BOUND_LOG_WIDTH of)
# their lower bound are left out: their likelihood is flat there, and an SD creeping towards
# zero is an answer (reported as 0), not a failure.
GRADIENT_TOL = 1e-3
GRADIENT_STEP = 1e-4         # difference step of that check (scaled by each parameter's scale)

# A fixed-effect column counts as constant within years (a year-level effect, t reference) when it
# differs from its yearly means by at most this, relative to its largest value: rounding only.
WITHIN_YEAR_ATOL = 1e-10

TERM_STRUCTURES = ("iid", "ar1")


@dataclass
class Term:
    """A random effect other than the station intercept: one column per level, value z.

    ``structure`` "iid": the levels' effects are independent N(0, sd^2); "ar1": the
    levels are consecutive times (level k is time k) and the effects follow a stationary
    order-1 autoregression with marginal SD sd and correlation rho between neighbours,
    corr(w_k, w_l) = rho^|k - l| (precision matrix tridiagonal).  ``kind`` "year" marks
    the year effect, whose number of levels with data sets the t reference's degrees of
    freedom (see ``coefficient_df``).
    """

    name: str
    index: np.ndarray          # level of each observation, 0..n_levels-1
    n_levels: int
    z: np.ndarray | None = None  # None means 1 (an intercept)
    structure: str = "iid"
    kind: str = ""
    group_size: int | None = None  # site-by-year: levels are site * group_size + year (see year_terms)

    def __post_init__(self):
        if self.structure not in TERM_STRUCTURES:
            raise ValueError(f"random-effect structure must be one of {TERM_STRUCTURES} (got {self.structure!r})")


# The year effect is on by default when the series has at least YEAR_EFFECT_MIN_YEARS years with
# data (monitor/settings.py): with an intercept and a slope at the year level, 5 years leave 3 df
# for the year-to-year variance, the fewest with which its estimate means anything; with fewer
# years the trend call is 'unclear' by rule anyway (monitor.trend.call).


def default_year_effect(n_years_with_data: int) -> bool:
    """Whether a series gets the year random effect by default (YEAR_EFFECT_MIN_YEARS)."""
    return year_effect_by_default(n_years_with_data)


def year_terms(year_index: np.ndarray, n_years: int, structure: str = "iid",
               site: np.ndarray | None = None) -> list[Term]:
    """The year random effect (and optionally a site-by-year effect) as engine terms.

    Parameters
    ----------
    year_index : int array
        Year of each observation as 0..n_years-1, consecutive calendar years (year minus
        the first year), so that an AR(1) structure links neighbouring years and a year
        without data is a level without observations.
    n_years : int
        Calendar years spanned (last - first + 1).
    structure : {"iid", "ar1"}
        Independent year effects, or a stationary AR(1) over consecutive years.
    site : int array, optional
        Site of each observation: adds "site_year", an iid intercept for each site-year
        cell with data (nested in site and in year, crossed with station), by which sites
        fluctuate apart from the shared year effect.
    """
    year_index = np.asarray(year_index, dtype=np.int64)
    terms = [Term("year", year_index, int(n_years), structure=structure, kind="year")]
    if site is not None:
        # the full site x year grid, site-major (cells without data are levels without
        # observations), so that the engine can eliminate it site by site
        site = np.asarray(site, dtype=np.int64)
        n_sites = int(site.max()) + 1
        terms.append(Term("site_year", site * int(n_years) + year_index, n_sites * int(n_years), kind="site_year",
                          group_size=int(n_years)))
    return terms


@dataclass
class GlmmSpec:
    """Everything the engine needs, as arrays (built by monitor.trend.model)."""

    family: Family
    X: np.ndarray
    x_names: list[str]
    station: np.ndarray          # station code of each observation, 0..n_station-1
    n_station: int
    terms: list[Term] = field(default_factory=list)
    olre: bool = False           # observation-level random effect
    offset: np.ndarray | None = None
    station_effect: bool = True

    @property
    def n(self) -> int:
        return len(self.station)

    def sd_names(self) -> list[str]:
        names = ["station"] if self.station_effect else []
        names += [t.name for t in self.terms]
        if self.olre:
            names.append("observation")
        return names

    def rho_names(self) -> list[str]:
        """The terms with an AR(1) correlation parameter, in the order of the parameter vector."""
        return [t.name for t in self.terms if t.structure == "ar1"]


@dataclass
class GlmmFit:
    """What the engine returns (turned into a TrendResult by the model layer)."""

    beta: np.ndarray
    vcov: np.ndarray
    x_names: list[str]
    sd: dict[str, float]
    dispersion: float | None
    loglik: float                 # ML (Laplace / AGQ / exact) log-likelihood, constants included
    reml_criterion: float | None  # REML log-likelihood when fitted by REML
    df: int
    converged: bool
    diagnostics: list[Diagnostic]
    phi: np.ndarray               # internal log-SD (and log dispersion) vector at the optimum
    u_station: np.ndarray
    eta: np.ndarray
    n_evaluations: int
    vcov_method: str
    rho: dict[str, float] = field(default_factory=dict)   # AR(1) correlations, by term name
    coef_df: np.ndarray | None = None    # reference df of each fixed effect (inf: normal reference)
    df_method: str = "z"                 # how coef_df was chosen (see coefficient_df)
    estimator: str = "ml-laplace"        # see ESTIMATORS
    pearson_chi2: float | None = None    # sum of squared Pearson residuals (see pearson_statistic)
    resid_df: int = 0                    # n - number of parameters
    max_gradient: float = 0.0            # largest scaled gradient at the estimate (see _gradient_check)

    @property
    def is_ml(self) -> bool:
        """True when beta is a maximum likelihood (or REML) estimate, False for the joint-mode fast path."""
        return self.estimator != "joint-mode"

    def quantile(self, j: int, level: float = 0.95) -> float:
        """The two-sided reference quantile for fixed effect j: t with coef_df[j] df, or normal."""
        from scipy.stats import norm, t

        q = 0.5 + level / 2
        df = np.inf if self.coef_df is None else float(self.coef_df[j])
        return float(norm.ppf(q) if not np.isfinite(df) else t.ppf(q, df))


ESTIMATORS = {
    "ml-laplace": "maximum likelihood, Laplace approximation; standard errors from the Hessian",
    "ml-agq": "maximum likelihood, adaptive Gauss-Hermite quadrature; standard errors from the Hessian",
    "ml-exact": "maximum likelihood (Gaussian: exact); standard errors (X' V^-1 X)^-1",
    "reml-exact": "restricted maximum likelihood (Gaussian: exact); standard errors (X' V^-1 X)^-1",
    "joint-mode": "fixed effects at the joint penalised mode given the ML variances, conditional "
                  "standard errors (X' V^-1 X)^-1; NOT a maximum likelihood estimate (the fast path)",
}


def _xv(A, v):
    """A @ v without BLAS threading (which costs more than it saves on these thin arrays)."""
    return np.einsum("ij,j->i", A, v)


def _potrf(M):
    """Lower Cholesky factor by LAPACK directly (the small dense block; low call overhead)."""
    L, info = lapack.dpotrf(M, lower=1, clean=1, overwrite_a=0)
    return L, info


def _potrs(L, b):
    x, info = lapack.dpotrs(L, b, lower=1)
    return x


class _DenseDesign:
    """The columns of the dense block: random terms (one non-zero per row) then, optionally, X.

    All products are per-level sums (np.bincount), so nothing of size n x m is formed
    except X itself.
    """

    def __init__(self, terms_idx, terms_z, n_levels, scales, X, st, n_st, XT=None):
        self.idx = terms_idx
        self.z = [zs * s for zs, s in zip(terms_z, scales, strict=False)]
        self.nl = n_levels
        self.off = np.r_[0, np.cumsum(n_levels)].astype(int)
        self.m_re = int(self.off[-1])
        self.X = X
        self.XT = None if X is None else (np.ascontiguousarray(X.T) if XT is None else XT)
        self.p = 0 if X is None else X.shape[1]
        self.m = self.m_re + self.p
        self.st, self.n_st = st, n_st

    def matvec(self, v):
        out = np.zeros(len(self.st))
        for a in range(len(self.idx)):
            out += self.z[a] * v[self.off[a]:self.off[a + 1]][self.idx[a]]
        if self.p:
            for k in range(self.p):
                out += v[self.m_re + k] * self.XT[k]
        return out

    def rmatvec(self, r):
        out = np.empty(self.m)
        for a in range(len(self.idx)):
            out[self.off[a]:self.off[a + 1]] = np.bincount(self.idx[a], weights=self.z[a] * r, minlength=self.nl[a])
        if self.p:
            out[self.m_re:] = np.array([_dot(xk, r) for xk in self.XT])
        return out

    def gram(self, wt):
        """F' diag(wt) F as a dense m x m array."""
        M = np.zeros((self.m, self.m))
        na = len(self.idx)
        for a in range(na):
            sa = slice(self.off[a], self.off[a + 1])
            wa = wt * self.z[a]
            for b in range(a + 1):
                sb = slice(self.off[b], self.off[b + 1])
                blk = np.bincount(self.idx[a] * self.nl[b] + self.idx[b], weights=wa * self.z[b],
                                  minlength=self.nl[a] * self.nl[b]).reshape(self.nl[a], self.nl[b])
                M[sa, sb] = blk
                M[sb, sa] = blk.T
            if self.p:
                blk = _bincount_cols(self.idx[a], self.nl[a], wa, self.XT)
                M[sa, self.m_re:] = blk
                M[self.m_re:, sa] = blk.T
        if self.p:
            M[self.m_re:, self.m_re:] = _gram_rows(self.XT, wt)
        return M

    def station_cross(self, wt):
        """S' diag(wt) F: station-by-column sums, dense n_station x m."""
        return self.cross(self.st, self.n_st, wt)

    def cross(self, index, n_levels, wt):
        """Level-by-column sums of wt * F for a grouping ``index`` with n_levels levels."""
        C = np.empty((n_levels, self.m))
        for a in range(len(self.idx)):
            C[:, self.off[a]:self.off[a + 1]] = np.bincount(
                index * self.nl[a] + self.idx[a], weights=wt * self.z[a],
                minlength=n_levels * self.nl[a]).reshape(n_levels, self.nl[a])
        if self.p:
            C[:, self.m_re:] = _bincount_cols(index, n_levels, wt, self.XT)
        return C


def _dot(a, b) -> float:
    """Inner product without BLAS (its threads cost more than they save on one vector)."""
    return float(np.einsum("i,i->", a, b))


def _bincount_cols(index, n_levels, w, XT):
    """out[g, k] = sum_{i: index_i = g} w_i X[i, k], one bincount per column of X."""
    return np.column_stack([np.bincount(index, weights=w * xk, minlength=n_levels) for xk in XT])


def _gram_rows(XT, w):
    """X' diag(w) X from the rows of X' (p small), without BLAS."""
    p = XT.shape[0]
    M = np.empty((p, p))
    for j in range(p):
        wx = w * XT[j]
        for k in range(j + 1):
            M[j, k] = M[k, j] = _dot(wx, XT[k])
    return M


def _ar1_precision_mv(v, rho):
    """Q v for the precision Q of a stationary AR(1) with unit variance and correlation rho.

    Q = (1 - rho^2)^-1 * tridiag(-rho; 1, 1 + rho^2, ..., 1 + rho^2, 1; -rho).
    """
    if len(v) == 1:
        return v.copy()
    c = 1.0 / (1.0 - rho * rho)
    out = (1.0 + rho * rho) * v
    out[0] = v[0]
    out[-1] = v[-1]
    out[1:] -= rho * v[:-1]
    out[:-1] -= rho * v[1:]
    return c * out


class _Factor:
    """Block-eliminated factorisation of the Newton matrix (see module notes)."""

    __slots__ = ("d", "wt", "A", "C", "L", "m", "m_re", "logdet_u", "logdet_beta", "s_o", "s_st", "w",
                 "D", "s_c", "E", "T", "Scv")


class LaplaceEngine:
    """Evaluates Laplace / AGQ / REML log-likelihoods for a GlmmSpec, keeping warm starts."""

    def __init__(self, spec: GlmmSpec, reml: bool = False, n_agq: int = 1):
        self.spec = spec
        self.fam = spec.family
        self.reml = reml
        self.n_agq = n_agq
        n = spec.n
        self.offset = np.zeros(n) if spec.offset is None else np.asarray(spec.offset, float)
        self.st = np.asarray(spec.station, dtype=np.int64)
        self.n_st = int(spec.n_station)
        self.X = np.asarray(spec.X, dtype=float)
        self.XT = np.ascontiguousarray(self.X.T)
        self.p = self.X.shape[1]
        # a site-by-year term is eliminated site by site after the stations (see _cell_setup);
        # the other random terms go to the dense block: level index and value of each observation
        self.cell = self._cell_setup(spec)
        self._dense = [a for a in range(len(spec.terms)) if a != self.cell]
        self._dense_pos = {a: k for k, a in enumerate(self._dense)}
        terms = [spec.terms[a] for a in self._dense]
        self.t_idx = [np.asarray(t.index, dtype=np.int64) for t in terms]
        self.t_z = [np.ones(n) if t.z is None else np.asarray(t.z, float) for t in terms]
        self.t_nl = [int(t.n_levels) for t in terms]
        self.m_re = int(sum(self.t_nl))
        self._off = np.r_[0, np.cumsum(self.t_nl)].astype(int)
        self.u_c = np.zeros(self.n_cell) if self.cell is not None else None
        self.n_sd = len(spec.sd_names())
        self.ar1 = [a for a, t in enumerate(spec.terms) if t.structure == "ar1"]
        self.n_rho = len(self.ar1)
        self.rho = np.zeros(len(spec.terms))   # current AR(1) correlation of each term (0: iid)
        self.has_disp = self.fam.has_dispersion
        self.n_phi = self.n_sd + self.n_rho + (1 if self.has_disp else 0)
        # warm-start state
        self.u_st = np.zeros(self.n_st)
        self.u_re = np.zeros(self.m_re)
        self.u_o = np.zeros(n) if spec.olre else None
        self.beta = np.zeros(self.p)
        self.n_eval = 0
        self.pirls_failures = 0
        self.last_factor: _Factor | None = None
        self.last_eta: np.ndarray | None = None

    def _cell_setup(self, spec: GlmmSpec):
        """Find a site-by-year term that can be eliminated site by site.

        Its levels must be laid out site-major on a full site x year grid (``year_terms``
        does so: level = site * K + year, K years) and every station must lie in one site.
        Then the Newton matrix's cell block, after the stations are eliminated, is
        block-diagonal with one K x K block per site, and costs O(n_sites K^3) instead of
        a dense (n_sites K)^3.  Returns the term's position, or None (the term then stays
        in the dense block, which is exact but slow for many cells).
        """
        self.n_cell = 0
        for a, t in enumerate(spec.terms):
            if t.kind != "site_year" or t.structure != "iid" or t.z is not None or t.group_size is None:
                continue
            K = int(t.group_size)
            cell = np.asarray(t.index, dtype=np.int64)
            grp = cell // K
            st_grp = np.full(self.n_st, -1, dtype=np.int64)
            st_grp[self.st] = grp
            if not np.array_equal(st_grp[self.st], grp):
                return None  # a station in two sites: not nested
            st_grp[st_grp < 0] = 0
            self.n_cell, self.K, self.n_grp = int(t.n_levels), K, int(t.n_levels) // K
            self.cell_idx, self.cell_pos, self.st_grp = cell, cell % K, st_grp
            # station-to-site indicator (sums over a site's stations by BLAS, the fastest way here)
            self.st_P = np.zeros((self.n_st, self.n_grp))
            self.st_P[np.arange(self.n_st), st_grp] = 1.0
            return a
        return None

    # ------------------------------------------------------------------ parameters
    def unpack(self, phi: np.ndarray) -> tuple[float, np.ndarray, float]:
        """phi -> (sd_station, sd per term, sd_obs); also sets the family dispersion."""
        phi = np.asarray(phi, float)
        k = 0
        s_st = 0.0
        if self.spec.station_effect:
            s_st = float(np.exp(phi[0]))
            k = 1
        nt = len(self.spec.terms)
        s_terms = np.exp(phi[k:k + nt])
        k += nt
        s_o = 0.0
        if self.spec.olre:
            s_o = float(np.exp(phi[k]))
            k += 1
        for a in self.ar1:
            self.rho[a] = float(np.tanh(phi[k]))
            k += 1
        if self.has_disp:
            self.fam.dispersion = float(np.exp(phi[k]))
        return s_st, s_terms, s_o

    def bounds(self) -> list[tuple[float, float]]:
        b = [(LOG_SD_MIN, LOG_SD_MAX)] * self.n_sd + [(-ATANH_RHO_MAX, ATANH_RHO_MAX)] * self.n_rho
        if self.has_disp:
            b.append(LOG_DISP_BOUNDS[self.fam.name])
        return b

    # ------------------------------------------------------------------ prior of the dense-block effects
    def _prior_mv(self, v_re):
        """P v: the prior precision of the spherical dense-block effects times v (identity for iid)."""
        out = v_re.copy()
        for a in self.ar1:
            k = self._dense_pos[a]
            o0, o1 = self._off[k], self._off[k + 1]
            out[o0:o1] = _ar1_precision_mv(v_re[o0:o1], self.rho[a])
        return out

    def _prior_add(self, M):
        """Add the prior precision to the random-effect part of the dense Newton matrix; return -log det P."""
        r = np.arange(self.m_re)
        M[r, r] += 1.0
        neg_logdet = 0.0
        for a in self.ar1:
            o0, o1 = self._off[self._dense_pos[a]], self._off[self._dense_pos[a] + 1]
            rho, k = self.rho[a], o1 - o0
            c = 1.0 / (1.0 - rho * rho)
            d = np.full(k, (1.0 + rho * rho) * c)
            d[0] = d[-1] = c
            if k == 1:
                d[0] = 1.0
            i = np.arange(o0, o1)
            M[i, i] += d - 1.0
            M[i[1:], i[:-1]] -= rho * c
            M[i[:-1], i[1:]] -= rho * c
            # det of the AR(1) correlation matrix: (1 - rho^2)^(k - 1)
            neg_logdet += (k - 1) * np.log1p(-rho * rho)
        return neg_logdet

    # ------------------------------------------------------------------ linear algebra
    def _design(self, s_terms, full: bool) -> _DenseDesign:
        D = _DenseDesign(self.t_idx, self.t_z, self.t_nl, [s_terms[a] for a in self._dense],
                         self.X if full else None, self.st, self.n_st, self.XT)
        D.s_c = float(s_terms[self.cell]) if self.cell is not None else 0.0
        return D

    def _factor(self, w, s_st, s_o, D: _DenseDesign) -> _Factor:
        f = _Factor()
        m = D.m
        f.m, f.m_re, f.s_o, f.s_st, f.w, f.D = m, self.m_re, s_o, s_st, w, D
        f.d = 1.0 + s_o * s_o * w
        f.wt = w / f.d
        f.A = 1.0 + s_st * s_st * np.bincount(self.st, weights=f.wt, minlength=self.n_st)
        logdet = float(np.sum(np.log(f.d)) + np.sum(np.log(f.A)))
        f.s_c = D.s_c
        M = D.gram(f.wt) if m else None
        C = D.station_cross(f.wt) * s_st if m else None
        if self.cell is not None:
            # cells (site x year): E = station-by-cell block (each station meets the K cells of
            # its own site), T = cell block after the stations are eliminated (K x K per site),
            # Scv = cell-by-dense block after the stations are eliminated
            G, K, s_c = self.n_grp, self.K, f.s_c
            cw = np.bincount(self.cell_idx, weights=f.wt, minlength=self.n_cell)
            f.E = np.bincount(self.st * K + self.cell_pos, weights=f.wt,
                              minlength=self.n_st * K).reshape(self.n_st, K) * (s_st * s_c)
            W = f.E / np.sqrt(f.A)[:, None]
            outer = (W[:, :, None] * W[:, None, :]).reshape(self.n_st, K * K)
            T = -(self.st_P.T @ outer).reshape(G, K, K)
            T[:, np.arange(K), np.arange(K)] += (1.0 + s_c * s_c * cw).reshape(G, K)
            f.T = T
            logdet += float(np.sum(np.linalg.slogdet(T)[1]))
            if m:
                Gc = D.cross(self.cell_idx, self.n_cell, f.wt) * s_c
                EA = (f.E / f.A[:, None])
                f.Scv = Gc.reshape(G, K, m) - (
                    self.st_P.T @ (EA[:, :, None] * C[:, None, :]).reshape(self.n_st, K * m)).reshape(G, K, m)
        if m:
            f.C = C
            if s_st > 0:
                # dense product by BLAS (single-threaded in CI): 5-10x faster than einsum here
                M -= (C / f.A[:, None]).T @ C
            if self.cell is not None:
                Z = np.linalg.solve(f.T, f.Scv)
                M -= f.Scv.reshape(-1, m).T @ Z.reshape(-1, m)
            logdet += self._prior_add(M)
            f.L, info = _potrf(M)
            if info != 0:
                # fixed effects not identified at this point: regularise slightly
                M[np.diag_indices(m)] += RIDGE_NOT_IDENTIFIED * (1.0 + np.abs(np.diag(M)))
                f.L, info = _potrf(M)
                if info != 0:
                    raise np.linalg.LinAlgError("Newton matrix not positive definite")
            dg = np.log(np.diag(f.L))
            f.logdet_u = logdet + 2.0 * float(np.sum(dg[:self.m_re]))
            f.logdet_beta = 2.0 * float(np.sum(dg[self.m_re:]))
        else:
            f.C = None
            f.L = None
            f.logdet_u = logdet
            f.logdet_beta = 0.0
        return f

    def _solve(self, f: _Factor, r_o, r_st, r_v, r_c=None):
        r_st = r_st.copy()
        r_v = r_v.copy()
        cells = self.cell is not None
        if cells:
            r_c = r_c.copy()
        if f.s_o > 0:
            q = f.s_o * f.w * r_o / f.d
            r_st -= f.s_st * np.bincount(self.st, weights=q, minlength=self.n_st)
            if f.m:
                r_v -= f.D.rmatvec(q)
            if cells:
                r_c -= f.s_c * np.bincount(self.cell_idx, weights=q, minlength=self.n_cell)
        x_c = None
        if cells:
            # stations out of the cell rows, then cells out of the dense rows (site by site)
            G, K = self.n_grp, self.K
            rA = r_st / f.A
            r_c -= (self.st_P.T @ (f.E * rA[:, None])).ravel()
            r_cg = r_c.reshape(G, K)
        if f.m:
            if f.s_st > 0:
                r_v -= np.einsum("ij,i->j", f.C, r_st / f.A)
            if cells:
                r_v -= np.einsum("gkm,gk->m", f.Scv, np.linalg.solve(f.T, r_cg[:, :, None])[:, :, 0])
            y = _potrs(f.L, r_v)
            if cells:
                x_c = np.linalg.solve(f.T, (r_cg - np.einsum("gkm,m->gk", f.Scv, y))[:, :, None])[:, :, 0]
            x_st = r_st - _xv(f.C, y)
        else:
            y = r_v
            if cells:
                x_c = np.linalg.solve(f.T, r_cg[:, :, None])[:, :, 0]
            x_st = r_st.copy()
        if cells:
            x_st -= np.einsum("jk,jk->j", f.E, x_c[self.st_grp])
            x_c = x_c.ravel()
        x_st /= f.A
        x_o = None
        if f.s_o > 0:
            a = f.s_st * x_st[self.st]
            if f.m:
                a = a + f.D.matvec(y)
            if cells:
                a = a + f.s_c * x_c[self.cell_idx]
            x_o = (r_o - f.s_o * f.w * a) / f.d
        return x_o, x_st, y, x_c

    # ------------------------------------------------------------------ PIRLS
    def pirls(self, phi, beta=None, max_iter=PIRLS_MAX_ITER):
        """Newton iterations for the conditional modes (and beta when ``beta`` is None).

        Steps: set up the problem at these variance parameters (_PirlsProblem), start from the
        better of the warm start and zero (_pirls_start), take Newton steps with step halving
        (_pirls_line_search) until the Newton decrement falls below PIRLS_DECREMENT_TOL, then
        one last full step, and keep the modes as the next call's warm start (_pirls_keep).
        Returns (h, factor, eta, converged).
        """
        prob = _PirlsProblem(self, phi, beta)
        modes = self._pirls_start(prob)
        eta = prob.eta(modes)
        h = prob.h(eta, modes)
        converged = False
        f = None                       # the factor at eta, while it is up to date
        for _ in range(max_iter):
            d1, w = self.fam.derivs(eta)
            f = self._factor(w, prob.s_st, prob.s_o, prob.D)
            grad = prob.gradient(d1, modes)
            x_o, x_st, x_v, x_c = self._solve(f, grad[2], grad[0], grad[1], grad[3])
            step = (x_st, x_v, x_o, x_c)      # ordered as the modes
            if _modes_dot(grad, step) < PIRLS_DECREMENT_TOL:
                # close enough for Newton's quadratic convergence: take this last full step and
                # factor at the new point, so that the log-determinant (first order in any error
                # of u) is evaluated at the mode to machine precision
                modes = _modes_axpy(modes, 1.0, step)
                eta = prob.eta(modes)
                h = prob.h(eta, modes)
                f = None
                converged = True
                break
            moved = _pirls_line_search(prob, modes, step, h)
            if moved is None:
                break                  # no step keeps h: stay (f is the factor here)
            modes, eta, h = moved
            f = None
        if f is None:
            d1, w = self.fam.derivs(eta)
            f = self._factor(w, prob.s_st, prob.s_o, prob.D)
        if not converged:
            self.pirls_failures += 1
        self._pirls_keep(prob, modes, f, eta)
        return h, f, eta, converged

    def _pirls_start(self, prob: _PirlsProblem) -> tuple:
        """The warm start, or zero random effects when those give a higher h (a warm start made
        for other variance values can be far off).  Modes: (u_station, v, u_obs, u_cell)."""
        u_st = self.u_st.copy() if prob.s_st > 0 else np.zeros(self.n_st)
        v = np.concatenate([self.u_re, self.beta]) if prob.full else self.u_re.copy()
        u_o = self.u_o.copy() if prob.s_o > 0 else None
        u_c = self.u_c.copy() if prob.cells else None
        warm = (u_st, v, u_o, u_c)
        z_v = v.copy()
        z_v[:self.m_re] = 0
        zero = (np.zeros_like(u_st), z_v, None if u_o is None else np.zeros_like(u_o),
                None if u_c is None else np.zeros_like(u_c))
        h_warm = prob.h(prob.eta(warm), warm)
        h_zero = prob.h(prob.eta(zero), zero)
        return zero if (not np.isfinite(h_warm) or h_zero > h_warm) else warm

    def _pirls_keep(self, prob: _PirlsProblem, modes: tuple, f: _Factor, eta: np.ndarray) -> None:
        """Keep the modes as the next call's warm start, and the factor and eta at them."""
        u_st, v, u_o, u_c = modes
        if prob.s_st > 0:
            self.u_st = u_st
        if prob.cells:
            self.u_c = u_c
        if prob.full:
            self.u_re, self.beta = v[:self.m_re].copy(), v[self.m_re:].copy()
        else:
            self.u_re = v.copy()
        if u_o is not None:
            self.u_o = u_o
        self.last_factor = f
        self.last_eta = eta

    # ------------------------------------------------------------------ objectives
    def loglik_profiled(self, phi) -> float:
        """Stage 1: Laplace log-likelihood with beta at the joint PIRLS mode (REML adds its term)."""
        self.n_eval += 1
        h, f, _, _ = self.pirls(phi)
        ll = h - 0.5 * f.logdet_u
        if self.reml:
            ll += 0.5 * self.p * np.log(2 * np.pi) - 0.5 * f.logdet_beta
        return ll

    def loglik_beta(self, phi, beta) -> float:
        """Stage 2: Laplace (or AGQ) log-likelihood at given beta and variance parameters."""
        self.n_eval += 1
        h, f, eta, _ = self.pirls(phi, beta=np.asarray(beta, float))
        if self.n_agq <= 1:
            return h - 0.5 * f.logdet_u
        return self._agq(phi, f, eta)

    def _agq(self, phi, f: _Factor, eta) -> float:
        s_st, _, _ = self.unpack(phi)
        x, wq = np.polynomial.hermite_e.hermegauss(self.n_agq)
        scale = 1.0 / np.sqrt(f.A)
        u_hat = self.u_st
        eta0 = eta - s_st * u_hat[self.st]
        terms = np.empty((self.n_st, self.n_agq))
        for k in range(self.n_agq):
            u_k = u_hat + x[k] * scale
            ll = np.bincount(self.st, weights=self.fam.loglik(eta0 + s_st * u_k[self.st]), minlength=self.n_st)
            terms[:, k] = ll - 0.5 * u_k * u_k - 0.5 * np.log(2 * np.pi) + 0.5 * x[k] ** 2 + np.log(wq[k])
        mx = terms.max(axis=1)
        per = mx + np.log(np.exp(terms - mx[:, None]).sum(axis=1)) + np.log(scale)
        return float(per.sum())


class _PirlsProblem:
    """PIRLS at one value of the variance parameters (and of beta, or beta free).

    h(u) = sum log f(y | eta(u)) - u' P u / 2 over the modes (u_station, v, u_obs, u_cell):
    v holds the dense-block random effects and, when beta is free, beta; P is the prior
    precision (identity, AR(1) blocks for the year effect).
    """

    def __init__(self, eng: LaplaceEngine, phi, beta):
        self.eng = eng
        self.s_st, s_terms, self.s_o = eng.unpack(phi)
        self.full = beta is None
        self.D = eng._design(s_terms, self.full)
        self.s_c = self.D.s_c
        self.cells = eng.cell is not None
        base = eng.offset.copy()
        if not self.full:
            for k in range(eng.p):
                base += beta[k] * eng.XT[k]
        self.base = base

    def eta(self, modes) -> np.ndarray:
        u_st, v, u_o, u_c = modes
        eng = self.eng
        e = self.base + self.s_st * u_st[eng.st]
        if v.size:
            e = e + self.D.matvec(v)
        if u_o is not None:
            e = e + self.s_o * u_o
        if u_c is not None:
            e = e + self.s_c * u_c[eng.cell_idx]
        return e

    def h(self, eta, modes) -> float:
        u_st, v, u_o, u_c = modes
        m_re = self.eng.m_re
        pen = _dot(u_st, u_st) + _dot(v[:m_re], self.eng._prior_mv(v[:m_re]))
        if u_o is not None:
            pen += _dot(u_o, u_o)
        if u_c is not None:
            pen += _dot(u_c, u_c)
        return float(np.sum(self.eng.fam.loglik(eta)) - 0.5 * pen)

    def gradient(self, d1, modes) -> tuple:
        """dh/d(modes) given d1 = d log f / d eta, in the order of the modes."""
        u_st, v, u_o, u_c = modes
        eng = self.eng
        g_st = self.s_st * np.bincount(eng.st, weights=d1, minlength=eng.n_st) - u_st
        g_v = self.D.rmatvec(d1) if v.size else np.zeros(0)
        g_v[:eng.m_re] -= eng._prior_mv(v[:eng.m_re])
        g_o = self.s_o * d1 - u_o if u_o is not None else None
        g_c = (self.s_c * np.bincount(eng.cell_idx, weights=d1, minlength=eng.n_cell) - u_c) if self.cells else None
        return g_st, g_v, g_o, g_c


def _modes_dot(a: tuple, b: tuple) -> float:
    """Sum of the inner products of two mode tuples (None parts skipped)."""
    return sum(_dot(x, y) for x, y in zip(a, b, strict=True) if x is not None)


def _modes_axpy(modes: tuple, t: float, step: tuple) -> tuple:
    """modes + t * step, part by part."""
    return tuple(None if u is None else u + t * x for u, x in zip(modes, step, strict=True))


def _pirls_line_search(prob: _PirlsProblem, modes: tuple, step: tuple, h: float):
    """Halve the Newton step until h does not decrease (beyond rounding); None when no step does."""
    t = 1.0
    for _ in range(PIRLS_MAX_HALVINGS):
        cand = _modes_axpy(modes, t, step)
        eta = prob.eta(cand)
        hc = prob.h(eta, cand)
        if np.isfinite(hc) and hc >= h - PIRLS_ACCEPT_RTOL * max(1.0, abs(h)):
            return cand, eta, hc
        t *= 0.5
    return None


# ---------------------------------------------------------------------- helpers
def num_hessian(fun, x, h, f0=None):
    """Central-difference gradient and Hessian of a scalar function.

    Off the diagonal, H_ij = [f(x+a) + f(x-a) - f(x+e_i) - f(x-e_i) - f(x+e_j) - f(x-e_j) + 2 f(x)]
    / (2 h_i h_j) with a = e_i + e_j (steps h_i, h_j): second-order accurate like the 4-point
    formula, but it reuses the axis evaluations, so a k-parameter Hessian costs
    1 + 2k + k(k-1) evaluations instead of 1 + 2k + 2k(k-1) (57 instead of 99 for k = 7).
    Returns (f(x), gradient, Hessian).
    """
    k = len(x)
    H = np.zeros((k, k))
    g = np.zeros(k)
    if f0 is None:
        f0 = fun(x)
    fp = np.empty(k)
    fm = np.empty(k)
    for i in range(k):
        ei = np.zeros(k)
        ei[i] = h[i]
        fp[i], fm[i] = fun(x + ei), fun(x - ei)
        g[i] = (fp[i] - fm[i]) / (2 * h[i])
        H[i, i] = (fp[i] - 2 * f0 + fm[i]) / h[i] ** 2
    for i in range(k):
        for j in range(i):
            a = np.zeros(k)
            a[i], a[j] = h[i], h[j]
            H[i, j] = H[j, i] = (fun(x + a) + fun(x - a) - fp[i] - fm[i] - fp[j] - fm[j] + 2 * f0) / (
                2 * h[i] * h[j])
    return f0, g, H


def _bounded_minimize(fun, x0, bounds, h, maxiter=LBFGS_MAX_ITER, ftol=STAGE1_LBFGS_TOL["precise"][0],
                      gtol=STAGE1_LBFGS_TOL["precise"][1]):
    """L-BFGS-B on ``fun`` with central-difference gradients (one-sided at a bound).

    The verdict is ours, from the numbers, not scipy's: converged when the largest projected
    gradient at the end is at most ``gtol`` or the last iteration lowered ``fun`` by at most
    ``ftol`` relative (L-BFGS-B's own two criteria, recomputed from the iterates).
    """
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    seen: dict[bytes, float] = {}

    def fg(x):
        x = np.clip(x, lo, hi)
        f0 = fun(x)
        seen[x.tobytes()] = f0
        g = np.zeros_like(x)
        for i in range(len(x)):
            xp, xm = x.copy(), x.copy()
            up = min(h[i], hi[i] - x[i])
            dn = min(h[i], x[i] - lo[i])
            if up <= 0 and dn <= 0:
                continue
            xp[i] += up
            xm[i] -= dn
            fp = fun(xp) if up > 0 else f0
            fm = fun(xm) if dn > 0 else f0
            g[i] = (fp - fm) / (up + dn)
        return f0, g

    iterates: list[float] = []

    def record(xk):
        f = seen.get(np.clip(xk, lo, hi).tobytes())
        if f is not None:
            iterates.append(f)

    x0 = np.clip(np.asarray(x0, float), lo, hi)
    res = minimize(fg, x0, jac=True, method="L-BFGS-B", bounds=bounds, callback=record,
                   options={"maxiter": maxiter, "ftol": ftol, "gtol": gtol, "maxls": LBFGS_MAX_LINESEARCH})
    x = np.clip(np.asarray(res.x, float), lo, hi)
    g = np.asarray(res.jac, float)
    projected = np.where((x <= lo + BOUND_EPS) & (g > 0), 0.0, np.where((x >= hi - BOUND_EPS) & (g < 0), 0.0, g))
    pg = float(np.max(np.abs(projected))) if projected.size else 0.0
    if x0.tobytes() in seen:
        iterates.insert(0, seen[x0.tobytes()])
    change = (iterates[-2] - iterates[-1]) / max(abs(iterates[-2]), abs(iterates[-1]), 1.0) \
        if len(iterates) >= 2 else np.inf
    ok = pg <= gtol or change <= ftol
    msg = "converged" if ok else f"stopped with projected gradient {pg:.2g} and last relative change {change:.2g}"
    return _Result(x, float(res.fun), ok, msg, int(res.nit))


class _Result:
    def __init__(self, x, fun, success, message, nit):
        self.x, self.fun, self.success, self.message, self.nit = x, fun, success, message, nit


def _num_gradient(fun, x, h):
    """Central-difference gradient of ``fun`` at ``x`` with steps ``h``."""
    g = np.zeros(len(x))
    for i in range(len(x)):
        e = np.zeros(len(x))
        e[i] = h[i]
        g[i] = (fun(x + e) - fun(x - e)) / (2 * h[i])
    return g


def _newton_bounded(fun, x0, lo, hi, h, tol=NEWTON_TOL, max_iter=NEWTON_MAX_ITER, max_step=NEWTON_MAX_STEP,
                    ftol=NEWTON_FTOL, quasi=False, reuse_below=0.0, snap_width=0.0):
    """Projected Newton's method with a central-difference Hessian, for a few bounded parameters.

    Parameters on a bound whose gradient points outwards (or is flat there: a variance
    that has gone to zero) are held there (active set); where the Hessian is not
    positive definite the step uses its absolute eigenvalues (saddle-free Newton);
    steps are capped at ``max_step`` and halved until the function decreases.  With
    ``quasi`` the difference Hessian is computed once and then updated by BFGS from
    central-difference gradients (the fast path).  With ``reuse_below`` > 0 the
    Hessian is kept (only the gradient refreshed) once the Newton decrement falls
    below it: near the optimum it changes by O(step).  Parameters within ``snap_width``
    of their lower bound with a flat gradient (FLAT_AT_BOUND) are moved onto it.

    Convergence is judged from numbers: the Newton decrement below ``tol``, the decrease of
    one step below ``ftol`` (both relative to max(1, |f|)), or, when no step along the Newton
    direction decreases f, a decrement below STALL_DECREMENT.  ``message`` only says which,
    for people.  Returns a result with x, fun, success, message, nit, hess (last Hessian),
    hess_at (where it was computed) and active (parameters held on a bound).
    """
    lo, hi = np.asarray(lo, float), np.asarray(hi, float)
    x = np.clip(np.asarray(x0, float), lo, hi)
    f0 = fun(x)
    msg, ok = "iteration limit", False
    H = g = hess_at = None
    active = np.zeros(len(x), bool)
    decrement = np.inf
    for _it in range(max_iter):
        scale = max(1.0, abs(f0))
        fresh = H is None or not (quasi or decrement < reuse_below)
        if fresh:
            f0, g, H = num_hessian(fun, x, h, f0=f0)
            hess_at = x.copy()
        elif g is None:
            g = _num_gradient(fun, x, h)
        # a variance parameter drifting down a flat likelihood towards zero: put it on its
        # bound (an SD below about 1.5e-3 on the link scale is no random effect at all: SNAP_LOG_WIDTH)
        snap = (x < lo + snap_width) & (np.abs(g) < FLAT_AT_BOUND) & (x > lo)
        if np.any(snap):
            x = x.copy()
            x[snap] = lo[snap]
            f0 = fun(x)
        at_lo = x <= lo + BOUND_EPS
        at_hi = x >= hi - BOUND_EPS
        active = (at_lo & (g > -FLAT_AT_BOUND)) | (at_hi & (g < FLAT_AT_BOUND))
        free = ~active
        if not np.any(free):
            ok, msg = True, "all parameters on bounds"
            break
        gf, Hf = g[free], H[np.ix_(free, free)]
        step_f = _saddle_free_step(gf, Hf)
        decrement = float(-gf @ step_f)
        if decrement < tol * scale:
            ok, msg = True, "converged"
            break
        big = np.max(np.abs(step_f))
        if big > max_step:
            step_f *= max_step / big
        step = np.zeros_like(x)
        step[free] = step_f
        t, improved = 1.0, False
        for _h in range(NEWTON_MAX_HALVINGS):
            cand = np.clip(x + t * step, lo, hi)
            fc = fun(cand)
            if np.isfinite(fc) and fc < f0:
                improved = True
                break
            t *= 0.5
        if not improved:
            if not fresh:
                H = None  # refresh the Hessian by differences and try again
                decrement = np.inf
                continue
            # no decrease at all: at the optimum to within the noise of the evaluations
            ok = decrement < STALL_DECREMENT * scale
            msg = "converged" if ok else "no further decrease along the Newton direction"
            break
        moved = np.max(np.abs(cand - x))
        x_old, g_old = x, g
        x, f_prev, f0 = cand, f0, fc
        g = None
        if f_prev - f0 < ftol * scale or (f_prev - f0 < TINY_MOVE_DECREASE * tol * scale and moved < TINY_MOVE):
            ok, msg = True, "converged"
            break
        if quasi:
            g = _num_gradient(fun, x, h)
            s_, y_ = x - x_old, g - g_old
            sy = float(s_ @ y_)
            if sy > BFGS_CURVATURE_MIN:
                Bs = H @ s_
                H = H - np.outer(Bs, Bs) / float(s_ @ Bs) + np.outer(y_, y_) / sy
            else:
                H = None
    res = _Result(x, f0, ok, msg, _it + 1)
    res.hess = H
    res.hess_at = hess_at
    res.active = active
    return res


def _saddle_free_step(g, H):
    """-|H|^-1 g with the absolute eigenvalues of the symmetrised H, floored at EIGEN_FLOOR of the largest."""
    ev, vec = np.linalg.eigh((H + H.T) / 2)
    lam = np.maximum(np.abs(ev), EIGEN_FLOOR * max(EIGEN_FLOOR_ABS, np.abs(ev).max()))
    return -vec @ ((vec.T @ g) / lam)


def glm_fit(family: Family, X: np.ndarray, offset: np.ndarray | None = None, max_iter: int = GLM_MAX_ITER):
    """Plain GLM by Newton's method (observed information): the starting values.  Returns beta."""
    n, p = X.shape
    off = np.zeros(n) if offset is None else offset
    eta0 = family.glm_start()
    beta = np.linalg.lstsq(X, eta0 - off, rcond=None)[0]
    ll = np.sum(family.loglik(off + X @ beta))
    for _ in range(max_iter):
        eta = off + X @ beta
        d, w = family.derivs(eta)
        g = np.einsum("ij,i->j", X, d)
        H = np.einsum("ij,ik->jk", X, w[:, None] * X) + GLM_RIDGE * np.eye(p)
        step = np.linalg.solve(H, g)
        t = 1.0
        for _h in range(GLM_MAX_HALVINGS):
            nb = beta + t * step
            nll = np.sum(family.loglik(off + X @ nb))
            if np.isfinite(nll) and nll >= ll - GLM_FTOL * abs(ll):
                break
            t *= 0.5
        beta, ll_old, ll = nb, ll, nll
        if abs(ll - ll_old) < GLM_FTOL * max(1, abs(ll)) and np.max(np.abs(t * step)) < GLM_XTOL:
            break
    return beta


# ---------------------------------------------------------------------- fitting
def fit_glmm(spec: GlmmSpec, reml: bool = False, n_agq: int = 1, hessian: bool = True,
             stage2: bool = True, start: np.ndarray | None = None,
             start_beta: np.ndarray | None = None) -> GlmmFit:
    """Fit a GLMM by maximum likelihood (Laplace / AGQ) or, for the Gaussian family, ML / REML.

    Parameters
    ----------
    spec : GlmmSpec
        The model as arrays.
    reml : bool
        Restricted ML (Gaussian family only).
    n_agq : int
        Quadrature nodes per station (1 = Laplace).  More than 1 needs the station
        intercept to be the only random effect.
    hessian : bool
        Standard errors from the numerical Hessian over (beta, log-SDs) (True), or from
        the conditional information at the variance estimates (False: the fast path).
    stage2 : bool
        Maximise over beta in the outer search (exact Laplace / AGQ MLE).  When False
        beta is the joint PIRLS mode at the variance estimates (faster, slightly different).
    start, start_beta : arrays, optional
        Warm starts for the internal log-SD vector and beta.

    Returns
    -------
    GlmmFit

    Notes
    -----
    See the module docstring for the model, the approximation and the algorithm.  The steps:
    starting values (_starting_values), stage 1 over the variance parameters (_stage1),
    stage 2 over all parameters (_stage2) where it applies, the convergence verdict from the
    numbers (_stage1_verdict, _stage2_verdict), the fixed effects and their covariance at
    the estimate (_at_estimate), and the result (_assemble).
    """
    gaussian = isinstance(spec.family, Gaussian)
    if reml and not gaussian:
        raise ValueError("REML applies to the Gaussian (logit-normal) family only")
    if n_agq > 1 and (spec.terms or spec.olre or not spec.station_effect):
        raise ValueError("adaptive Gauss-Hermite quadrature needs a single grouping factor (station)")
    eng = LaplaceEngine(spec, reml=reml, n_agq=n_agq)
    diags: list[Diagnostic] = []
    phi0 = _starting_values(eng, start, start_beta)
    # stage 1 only has to be precise when it is the answer (fast path: enough for the power
    # analysis; Gaussian family: exact ML / REML); otherwise stage 2 refines it
    do_stage2 = (not gaussian) and (stage2 or n_agq > 1)
    quick = not (stage2 or hessian) or do_stage2
    res1 = _stage1(eng, phi0, quick)
    phi = np.asarray(res1.x)
    ll = eng.loglik_profiled(phi)
    beta = eng.beta.copy()
    H_info = None
    if do_stage2:
        vcov_cond = _conditional_vcov(eng.last_factor, eng)
        phi, beta, ll, H_info, ok2, msg = _stage2(eng, phi, beta, vcov_cond, hessian)
        converged, max_grad = _stage2_verdict(eng, phi, beta, ok2, msg, diags)
    else:
        converged, max_grad = _stage1_verdict(eng, phi, res1, diags)
        if not res1.success:
            ll = eng.loglik_profiled(phi)
    at_bound = [i for i in range(eng.n_sd) if phi[i] <= LOG_SD_MIN + AT_BOUND_LOG_WIDTH]
    names = spec.sd_names()
    for i in at_bound:
        diags.append(Diagnostic("variance_at_bound",
                                f"The {names[i]} standard deviation is estimated at (or near) zero; "
                                "that random effect adds nothing to these data.", "info"))
    beta, eta, u_station, vcov, vcov_method = _at_estimate(eng, phi, beta, do_stage2, hessian, H_info, diags)
    reml_ll = eng.loglik_profiled(phi) if reml else None
    if eng.pirls_failures:
        diags.append(Diagnostic("pirls_slow", "The inner Newton iterations for the random effects did not "
                                f"reach full precision {eng.pirls_failures} time(s).", "info"))
    return _assemble(eng, phi, beta, eta, u_station, vcov, vcov_method, at_bound,
                     ll if not reml else reml_ll, reml_ll, converged, max_grad, diags, do_stage2)


def _starting_values(eng: LaplaceEngine, start, start_beta) -> np.ndarray:
    """beta from a plain GLM (or ``start_beta``), kept as the engine's warm start; returns phi0.

    Every SD starts at START_SD (Gaussian: half the GLM's residual SD, the residual SD at
    START_RESIDUAL_FRACTION of it), AR(1) correlations at 0, the NB2 size at the moment
    estimate of the GLM's excess variance.
    """
    spec, fam = eng.spec, eng.fam
    if start_beta is not None:
        beta0 = np.asarray(start_beta, float)
    else:
        if fam.has_dispersion and fam.dispersion is None:
            fam.dispersion = 1.0
        beta0 = glm_fit(fam, spec.X, eng.offset)
    eng.beta = beta0.copy()
    if start is not None:
        return np.asarray(start, float).copy()
    eta_glm = eng.offset + spec.X @ beta0
    if isinstance(fam, Gaussian):
        sig = float(np.std(fam.y - eta_glm)) or 1.0
        return np.r_[np.full(eng.n_sd, np.log(START_SD * sig)), np.zeros(eng.n_rho),
                     np.log(START_RESIDUAL_FRACTION * sig)]
    phi0 = np.r_[np.full(eng.n_sd, np.log(START_SD)), np.zeros(eng.n_rho)]
    if fam.has_dispersion:  # NB2: moment estimate of the size from the GLM
        mu = np.exp(eta_glm)
        excess = np.mean((fam.y - mu) ** 2 - mu)
        th = np.mean(mu ** 2) / excess if excess > 0 else START_NB_SIZE_POISSONLIKE
        phi0 = np.r_[phi0, np.log(np.clip(th, *START_NB_SIZE_RANGE))]
    return phi0


def _stage1(eng: LaplaceEngine, phi0, quick: bool):
    """Maximise the profiled Laplace (or REML) log-likelihood over the variance parameters.

    Projected Newton for up to STAGE1_NEWTON_MAX_PARAMS parameters, L-BFGS-B beyond; ``quick``
    (a stage 2 follows, or the fast path) stops at the looser tolerances.
    """
    bounds = eng.bounds()
    lo, hi = [b[0] for b in bounds], [b[1] for b in bounds]
    obj = lambda x: -eng.loglik_profiled(x)  # noqa: E731
    if eng.n_phi <= STAGE1_NEWTON_MAX_PARAMS:
        snap = np.r_[np.full(eng.n_sd, _snap_width(eng)), np.zeros(eng.n_phi - eng.n_sd)]
        tol, ftol = STAGE1_NEWTON_TOL["quick" if quick else "precise"]
        return _newton_bounded(obj, phi0, lo, hi, np.full(eng.n_phi, STAGE1_STEP), snap_width=snap, tol=tol,
                               ftol=ftol, quasi=quick)
    ftol, gtol = STAGE1_LBFGS_TOL["quick" if quick else "precise"]
    return _bounded_minimize(obj, phi0, bounds, np.full(eng.n_phi, LBFGS_STEP), ftol=ftol, gtol=gtol)


def _snap_width(eng: LaplaceEngine) -> float:
    """SNAP_LOG_WIDTH, narrowed for a Gaussian model whose data vary little: its SDs are on the scale
    of its data (the log of a height may vary by 1e-2, and a real year SD of 1e-3 is then no zero), so
    "near zero" is judged against the spread of the data about the starting fit."""
    if not isinstance(eng.fam, Gaussian):
        return SNAP_LOG_WIDTH
    spread = float(np.std(eng.fam.y - eng.offset - eng.X @ eng.beta))
    return min(SNAP_LOG_WIDTH, SNAP_LOG_WIDTH + float(np.log(spread))) if spread > 0 else SNAP_LOG_WIDTH


def _bounds_arrays(eng: LaplaceEngine, with_beta: bool) -> tuple[np.ndarray, np.ndarray]:
    lo = np.array([b[0] for b in eng.bounds()])
    hi = np.array([b[1] for b in eng.bounds()])
    if with_beta:
        lo, hi = np.r_[lo, np.full(eng.p, -np.inf)], np.r_[hi, np.full(eng.p, np.inf)]
    return lo, hi


def _stage2_verdict(eng: LaplaceEngine, phi, beta, ok: bool, msg: str, diags: list) -> tuple[bool, float]:
    """Converged when the search met its own numerical stopping rule; otherwise judged by the
    largest scaled gradient at the point it stopped (GRADIENT_TOL).  Returns (converged, max_grad)."""
    if ok:
        return True, 0.0
    spec = eng.spec
    se = np.sqrt(np.maximum(np.diag(_conditional_vcov_at(eng, phi, beta)), VARIANCE_FLOOR))
    fun = lambda xx: -eng.loglik_beta(xx[:eng.n_phi], xx[eng.n_phi:])  # noqa: E731
    lo, hi = _bounds_arrays(eng, True)
    max_grad, worst = _gradient_check(fun, np.r_[phi, beta], np.r_[np.ones(eng.n_phi), se], lo, hi, eng.n_sd)
    if max_grad <= GRADIENT_TOL:
        return True, max_grad
    par = (spec.sd_names() + spec.rho_names() + ["dispersion"])[worst] if worst < eng.n_phi \
        else spec.x_names[worst - eng.n_phi]
    diags.append(Diagnostic("not_converged", "The joint search over fixed effects and variances "
                            f"stopped ({msg}) where the log-likelihood still changes by {max_grad:.2g} "
                            f"per standard error of '{par}'."))
    return False, max_grad


def _stage1_verdict(eng: LaplaceEngine, phi, res, diags: list) -> tuple[bool, float]:
    """As _stage2_verdict, for the search over the variance parameters alone."""
    if res.success:
        return True, 0.0
    spec = eng.spec
    lo, hi = _bounds_arrays(eng, False)
    obj = lambda x: -eng.loglik_profiled(x)  # noqa: E731
    max_grad, worst = _gradient_check(obj, phi, np.ones(eng.n_phi), lo, hi, eng.n_sd)
    if max_grad <= GRADIENT_TOL:
        return True, max_grad
    par = (spec.sd_names() + spec.rho_names() + ["dispersion"])[worst]
    diags.append(Diagnostic("not_converged", "The search over the variance parameters stopped where the "
                            f"log-likelihood still changes by {max_grad:.2g} per unit of log '{par}'."))
    return False, max_grad


def _at_estimate(eng: LaplaceEngine, phi, beta, do_stage2: bool, hessian: bool, H_info, diags: list):
    """The modes, linear predictor and fixed-effect covariance at the estimate.

    Returns (beta, eta, u_station, vcov, vcov_method): the Hessian's inverse where stage 2
    gave one, else the conditional information (X' V^-1 X)^-1 at the estimate.
    """
    if not do_stage2:
        eng.pirls(phi)
        return (eng.beta.copy(), eng.last_eta.copy(), eng.u_st.copy(),
                _conditional_vcov(eng.last_factor, eng), "conditional")
    eng.pirls(phi, beta=beta)
    eta = eng.last_eta.copy()
    u_station = eng.u_st.copy()
    vcov = _conditional_vcov_at(eng, phi, beta)
    if not hessian:
        return beta, eta, u_station, vcov, "conditional"
    if H_info is not None:
        return beta, eta, u_station, H_info, "hessian"
    if len(beta) + eng.n_phi > NEWTON_MAX_DIM:
        diags.append(Diagnostic("conditional_se",
                                f"With {len(beta)} fixed effects the standard errors use the conditional "
                                "information at the estimates (X' V^-1 X)^-1 rather than the full Hessian.",
                                "info"))
    else:
        diags.append(Diagnostic("hessian_not_positive",
                                "The likelihood's curvature matrix is not positive definite (or was not "
                                "computed); standard errors use the conditional information instead."))
    return beta, eta, u_station, vcov, "conditional"


def _assemble(eng: LaplaceEngine, phi, beta, eta, u_station, vcov, vcov_method, at_bound, loglik, reml_ll,
              converged, max_grad, diags, do_stage2) -> GlmmFit:
    """The GlmmFit: SDs (an SD held on its lower bound is reported as 0, as lme4 reports a singular
    fit), AR(1) correlations, reference df, estimator label and the Pearson statistic."""
    spec, fam = eng.spec, eng.fam
    _, _, s_o = eng.unpack(phi)
    names = spec.sd_names()
    sd = {nm: (0.0 if i in at_bound else float(np.exp(v)))
          for i, (nm, v) in enumerate(zip(names, phi[:eng.n_sd], strict=True))}
    rho = {spec.terms[a].name: float(eng.rho[a]) for a in eng.ar1}
    n_par = eng.p + eng.n_phi
    eta_fam = eta if eng.u_o is None or s_o == 0 else eta - s_o * eng.u_o
    coef_df, df_method = coefficient_df(spec)
    if isinstance(fam, Gaussian):
        estimator = "reml-exact" if eng.reml else "ml-exact"
    elif do_stage2:
        estimator = "ml-agq" if eng.n_agq > 1 else "ml-laplace"
    else:
        estimator = "joint-mode"
    return GlmmFit(beta=beta, vcov=vcov, x_names=list(spec.x_names), sd=sd,
                   dispersion=(float(fam.dispersion) if fam.has_dispersion else None),
                   loglik=float(loglik), reml_criterion=reml_ll, df=n_par,
                   converged=converged, diagnostics=diags, phi=phi, u_station=u_station, eta=eta,
                   n_evaluations=eng.n_eval, vcov_method=vcov_method, rho=rho, coef_df=coef_df,
                   df_method=df_method, estimator=estimator,
                   pearson_chi2=float(np.sum(fam.pearson_sq(eta_fam))), resid_df=int(spec.n - n_par),
                   max_gradient=float(max_grad))


def _gradient_check(fun, x, scale, lo, hi, n_sd, h=GRADIENT_STEP):
    """Largest |d fun / d x_i| * scale_i over the free parameters (projected at bounds).

    Returns (value, index of the worst parameter).
    """
    x = np.asarray(x, float)
    f0 = fun(x)
    worst, gmax = 0, 0.0
    for i in range(len(x)):
        if i < n_sd and x[i] <= LOG_SD_MIN + AT_BOUND_LOG_WIDTH:
            continue
        hi_ = h * scale[i]
        up = min(hi_, hi[i] - x[i])
        dn = min(hi_, x[i] - lo[i])
        if up <= 0 and dn <= 0:
            continue
        xp, xm = x.copy(), x.copy()
        xp[i] += up
        xm[i] -= dn
        fp = fun(xp) if up > 0 else f0
        fm = fun(xm) if dn > 0 else f0
        g = (fp - fm) / (up + dn)
        if (dn <= 0 and g > 0) or (up <= 0 and g < 0):
            continue  # on a bound, pointing outwards: that is the constrained optimum
        if abs(g) * scale[i] > gmax:
            gmax, worst = abs(g) * scale[i], i
    fun(x)  # leave the engine's warm-start state at x
    return gmax, worst


def coefficient_df(spec: GlmmSpec) -> tuple[np.ndarray, str]:
    r"""Reference degrees of freedom for each fixed effect, and the name of the rule.

    Without a year effect every fixed effect has a normal reference (df = inf, "z").
    With a year effect (the term of kind "year") the fixed effects that are constant
    within each year (the intercept, the slope of year, any year-level covariate) are
    estimated, in effect, from the yearly values: their reference is t with

        df = n_years - rank(year-level fixed effects),

    n_years the number of year levels with data: the "containment" df (SAS PROC MIXED's
    DDFM=CONTAIN, from memory), which is the between-year df of a split-plot analysis
    and the df Piepho & Ogutu (2002, JABES 7:350-360) use for trends across years.  For a linear trend
    with an intercept this is n_years - 2, the df of the regression of yearly means.
    Fixed effects that vary within years keep the normal reference.  The rule depends on
    the model, not on the estimates: a year SD estimated at zero keeps the t reference
    (the conservative choice; the data cannot show the year variation to be absent).
    """
    X = np.asarray(spec.X, float)
    p = X.shape[1]
    year = next((t for t in spec.terms if t.kind == "year"), None)
    if year is None:
        return np.full(p, np.inf), "z"
    idx = np.asarray(year.index, dtype=np.int64)
    cnt = np.bincount(idx, minlength=year.n_levels).astype(float)
    has = cnt > 0
    G = int(has.sum())
    const = np.zeros(p, bool)
    means = np.zeros((G, p))
    for k in range(p):
        m = np.bincount(idx, weights=X[:, k], minlength=year.n_levels)[has] / cnt[has]
        full = np.zeros(year.n_levels)
        full[has] = m
        const[k] = np.allclose(X[:, k], full[idx], rtol=0, atol=WITHIN_YEAR_ATOL * (1 + np.max(np.abs(X[:, k]))))
        means[:, k] = m
    r = int(np.linalg.matrix_rank(means[:, const])) if const.any() else 0
    df = max(G - r, 1)
    out = np.full(p, np.inf)
    out[const] = df
    return out, f"t, between-year (containment) df = {G} years - {r} year-level fixed effects = {df}"


def _stage2(eng: LaplaceEngine, phi, beta, vcov_cond, want_hessian):
    """Maximise the Laplace / AGQ log-likelihood over (log-SDs, log dispersion, beta).

    Projected Newton's method with a central-difference Hessian (whose last value gives
    the standard errors) when there are few parameters; block-wise steps otherwise
    (_stage2_blockwise).  Variance parameters on their lower bound are held there.
    Returns (phi, beta, loglik, vcov_from_hessian or None, ok, message).
    """
    k = eng.n_phi
    x = np.r_[phi, beta]
    lo = np.r_[[b[0] for b in eng.bounds()], np.full(eng.p, -np.inf)]
    hi = np.r_[[b[1] for b in eng.bounds()], np.full(eng.p, np.inf)]
    free = np.array([i for i in range(k) if phi[i] > LOG_SD_MIN + AT_BOUND_LOG_WIDTH or i >= eng.n_sd]
                    + list(range(k, k + eng.p)))
    se = np.sqrt(np.maximum(np.diag(vcov_cond), VARIANCE_FLOOR))
    step_h = np.r_[np.full(k, STAGE2_STEP_PHI), np.maximum(STAGE2_STEP_BETA_SE * se, STAGE2_STEP_BETA_MIN)][free]

    def fun(xs):
        xx = x.copy()
        xx[free] = np.clip(xs, lo[free], hi[free])
        return -eng.loglik_beta(xx[:k], xx[k:])

    xs = x[free].copy()
    if len(free) > NEWTON_MAX_DIM:
        return _stage2_blockwise(eng, x, free, lo, hi, step_h)
    snap = np.where(free < eng.n_sd, SNAP_LOG_WIDTH, 0.0)
    res = _newton_bounded(fun, xs, lo[free], hi[free], step_h, tol=STAGE2_TOL, ftol=STAGE2_FTOL,
                          max_step=STAGE2_MAX_STEP, reuse_below=STAGE2_REUSE_BELOW, max_iter=STAGE2_MAX_ITER,
                          snap_width=snap)
    xs, f0 = res.x, res.fun
    x[free] = xs
    vb = None
    H = res.hess
    if want_hessian and H is not None and not np.array_equal(res.hess_at, xs):
        # the search reuses its Hessian near the optimum (or updates it by BFGS): the
        # standard errors need it at the estimate itself
        _, _, H = num_hessian(fun, xs, step_h, f0=f0)
    if want_hessian and H is not None:
        # the variance parameters held on a bound are fixed; the rest are profiled out
        keep = ~np.asarray(res.active)
        keep[-eng.p:] = True
        Hk = H[np.ix_(keep, keep)]
        try:
            Hinv = np.linalg.inv(Hk)
            vb = Hinv[-eng.p:, -eng.p:]
            vb = (vb + vb.T) / 2
            if not (np.all(np.isfinite(vb)) and np.all(np.linalg.eigvalsh(vb) > 0)
                    and np.all(np.linalg.eigvalsh((Hk + Hk.T) / 2) > 0)):
                vb = None
        except np.linalg.LinAlgError:
            vb = None
    return x[:k], x[k:], -f0, vb, bool(res.success), res.message


def _stage2_blockwise(eng: LaplaceEngine, x, free, lo, hi, step_h, max_rounds=BLOCKWISE_MAX_ROUNDS):
    """Stage 2 with many fixed effects (e.g. a year factor): alternate Newton-type steps.

    beta: gradient by central differences, curvature from the conditional information
    X' V^-1 X at the current point (exact for the Gaussian family, close for the others);
    variance parameters: one Newton step with a difference Hessian.  This block
    coordinate search reaches the joint maximum with about 2p + k^2 evaluations per
    round instead of a difference Hessian over all p + k parameters.
    """
    k = eng.n_phi
    fphi = np.array([i for i in free if i < k], dtype=int)
    hb = step_h[len(fphi):]
    hphi = step_h[:len(fphi)]
    beta_idx = np.arange(k, k + eng.p)

    def f_all(xx):
        return -eng.loglik_beta(xx[:k], xx[k:])

    f0 = f_all(x)
    ok, msg = False, "round limit"
    for _ in range(max_rounds):
        # beta block
        def fb(b, x=x):
            xx = x.copy()
            xx[beta_idx] = b
            return f_all(xx)
        gb = _num_gradient(fb, x[beta_idx], hb)
        V = _conditional_vcov_at(eng, x[:k], x[k:])
        step = -V @ gb
        dec_b = float(-gb @ step)
        t = 1.0
        for _h in range(BLOCKWISE_MAX_HALVINGS):
            cand = x.copy()
            cand[beta_idx] = x[beta_idx] + t * step
            fc = f_all(cand)
            if np.isfinite(fc) and fc <= f0:
                x, f0 = cand, fc
                break
            t *= 0.5
        # variance block
        dec_p = 0.0
        if len(fphi):
            def fp(ph, x=x):
                xx = x.copy()
                xx[fphi] = np.clip(ph, lo[fphi], hi[fphi])
                return f_all(xx)
            f0, gp, Hp = num_hessian(fp, x[fphi], hphi, f0=f0)
            sp_ = _saddle_free_step(gp, Hp)
            dec_p = float(-gp @ sp_)
            t = 1.0
            for _h in range(BLOCKWISE_MAX_HALVINGS):
                cand = x.copy()
                cand[fphi] = np.clip(x[fphi] + t * sp_, lo[fphi], hi[fphi])
                fc = f_all(cand)
                if np.isfinite(fc) and fc <= f0:
                    x, f0 = cand, fc
                    break
                t *= 0.5
        if dec_b + dec_p < BLOCKWISE_TOL * max(BLOCKWISE_TOL_SCALE, abs(f0)):
            ok, msg = True, "converged"
            break
    return x[:k], x[k:], -f0, None, ok, msg


def _conditional_vcov_at(eng: LaplaceEngine, phi, beta) -> np.ndarray:
    """Conditional vcov of beta at (phi, beta): joint Newton matrix at the u-mode for this beta."""
    eng.pirls(phi, beta=beta)
    s_st, s_terms, s_o = eng.unpack(phi)
    d1, w = eng.fam.derivs(eng.last_eta)
    f = eng._factor(w, s_st, s_o, eng._design(s_terms, True))
    return _conditional_vcov(f, eng)


def _conditional_vcov(f: _Factor, eng: LaplaceEngine) -> np.ndarray:
    """(X' V^-1 X)^-1: the inverse of beta's Schur complement in the joint Newton matrix."""
    L = np.ascontiguousarray(f.L[eng.m_re:, eng.m_re:])
    Li = np.linalg.inv(L)
    return Li.T @ Li
