"""Build engine specs for the year-effect reference fits (tests/fixtures/trend/reference_year_fits.R)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.trend.families import Binomial, Gaussian, NegativeBinomial, Poisson
from monitor.trend.glmm import GlmmSpec, Term, year_terms

FAMILY = {"poisson": Poisson, "negbin": NegativeBinomial, "binomial": Binomial, "gaussian": Gaussian}


def spec_from_frame(d: pd.DataFrame, family: str, y: str, x: list[str], station: str, *, site: str | None = None,
                    year: str | None = None, trials: str | None = None, olre: bool = False,
                    year_structure: str = "iid", site_by_year: bool = False) -> GlmmSpec:
    """The engine's model for columns of d: station (nested in site), site, year, x (fixed, with intercept)."""
    yv = d[y].to_numpy(float)
    fam = FAMILY[family](yv, None if trials is None else d[trials].to_numpy(float))
    X = np.column_stack([np.ones(len(d))] + [d[c].to_numpy(float) for c in x])
    key = d[station].astype(str) if site is None else d[site].astype(str) + "/" + d[station].astype(str)
    st = pd.factorize(key)[0]
    terms = []
    si = None
    if site is not None:
        si = pd.factorize(d[site])[0]
        terms.append(Term("site", si, int(si.max()) + 1))
    if year is not None:
        yr = pd.factorize(d[year], sort=True)[0]
        terms += year_terms(yr, int(yr.max()) + 1, structure=year_structure,
                            site=si if site_by_year else None)
    return GlmmSpec(family=fam, X=X, x_names=["(Intercept)", *x], station=st, n_station=int(st.max()) + 1,
                    terms=terms, olre=olre)
