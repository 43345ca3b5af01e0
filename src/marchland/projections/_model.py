"""Maximum-likelihood fit of the endemic-epidemic negative binomial model.

mu_it = e_i nu_it + lambda y_i,t-1 + phi sum_j w_ji(d) y_j,t-1, Y_it ~ NegBin(mu_it, psi_g(i)),
log nu_it = beta' x_it (intercept, optional sin/cos of the week of the year, unit covariates).
Held, Hoehle & Paul (2005); Paul & Held (2011); Meyer & Held (2014) for the power-law weights.
The size psi is one for all units ("shared") or one per group of units ("country"): the
unit-specific overdispersion of Paul & Held (2011), with units grouped as Meyer, Held & Hoehle
(2017, Journal of Statistical Software 77(11), section 3) allow (both from memory). A group with
too few non-zero counts in the fitting window to pin its own size down shares one size with the
other such groups.

Written here because no Python library fits this model; the likelihood with an analytic
gradient goes to ``scipy.optimize.minimize`` and the standard errors come from the Hessian
(numerical derivative of the analytic gradient, statsmodels' ``approx_fprime``). The plain
negative binomial regression it reduces to (no autoregressive, no neighbourhood part) is
checked against statsmodels in tests/reference/test_forecast_reference.py.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd
from scipy import optimize, special, stats
from statsmodels.tools.numdiff import approx_fprime

from ._weights import CellSums, OrderMatrix

# Bounds on the log-scale parameters keep the optimiser away from overflow; a fit that ends on
# one is flagged in the parameter table ("at_bound").
LOG_BOUNDS = {
    "log_lambda": (-12.0, 3.0),
    "log_phi": (-12.0, 3.0),
    "log_d": (np.log(0.05), np.log(20.0)),
    "log_psi": (-6.0, 12.0),
}
# A parameter ending within 1 % of a bound is flagged: the bounded search stops short of the
# bound itself (the demo's distance decay ended at 19.98 against 20).
AT_BOUND_LOG = 0.01
LAG_FILL_WEEKS = 4  # a missing lagged count is carried forward at most this many weeks
DISPERSIONS = ("country", "shared")  # one NB size per country, or one for all units
# A group needs this many non-zero counts in the window for a size of its own; below, its units
# share a size with the other small groups (a size fitted to nearly all zeros runs to the
# bound of extreme overdispersion). Twenty is a rule of thumb (common practice).
MIN_NONZERO_PER_SIZE = 20


@dataclass(frozen=True)
class ModelSpec:
    """Which parts the model has."""

    autoregressive: bool = True
    neighbourhood: bool = True
    seasonal: bool = False
    max_order: int = 5
    dispersion: str = "shared"


@dataclass(frozen=True)
class Fit:
    """A fitted model: log-scale parameter vector, its covariance and what is needed to run it."""

    names: tuple[str, ...]
    theta: np.ndarray
    cov: np.ndarray
    loglik: float
    n_obs: int
    spec: ModelSpec
    covariate_names: tuple[str, ...]
    at_bound: tuple[str, ...] = field(default=())
    size_index: np.ndarray | None = None  # (n,) position in theta of each unit's log size

    def sizes(self) -> np.ndarray:
        """Negative binomial size ``psi`` of each unit (``Problem.fit`` sets the index)."""
        if self.size_index is None:
            raise ValueError("this fit has no size index: build it with Problem.fit")
        return np.exp(self.theta[self.size_index])

    def value(self, name: str, default: float = 0.0) -> float:
        """Natural-scale value of a parameter (``exp`` of a ``log_`` one)."""
        if name not in self.names:
            return default
        v = float(self.theta[self.names.index(name)])
        return float(np.exp(v)) if name.startswith("log_") else v

    @property
    def beta(self) -> np.ndarray:
        """Endemic coefficients (intercept, seasonal, covariates)."""
        return self.theta[: len(self.names) - sum(n.startswith("log_") for n in self.names)]

    def table(self, conf: float = 0.95) -> pd.DataFrame:
        """Estimate and Wald interval per parameter, on the natural scale."""
        z = stats.norm.ppf(0.5 + conf / 2)
        se = np.sqrt(np.clip(np.diag(self.cov), 0, None))
        rows = []
        for k, name in enumerate(self.names):
            t, s = self.theta[k], se[k]
            log = name.startswith("log_")
            f = np.exp if log else (lambda x: x)
            rows.append(
                {
                    "parameter": name[4:] if log else name,
                    "estimate": float(f(t)),
                    "lower": float(f(t - z * s)),
                    "upper": float(f(t + z * s)),
                    "se": float(s),
                    "scale": "log" if log else "linear",
                    "at_bound": name in self.at_bound,
                }
            )
        return pd.DataFrame(rows).set_index("parameter")


def fill_lags(y: np.ndarray, limit: int = LAG_FILL_WEEKS) -> np.ndarray:
    """Carry each unit's last known count forward at most ``limit`` weeks (lagged values only)."""
    return pd.DataFrame(y.T).ffill(limit=limit).to_numpy().T


def endemic_design(angles: np.ndarray, z: np.ndarray, seasonal: bool) -> np.ndarray:
    """Endemic design array (n, T, p): intercept, sin, cos, unit covariates."""
    n, t = z.shape[0], len(angles)
    parts = [np.ones((n, t, 1))]
    if seasonal:
        parts.append(np.broadcast_to(np.sin(angles)[None, :, None], (n, t, 1)))
        parts.append(np.broadcast_to(np.cos(angles)[None, :, None], (n, t, 1)))
    if z.shape[1]:
        parts.append(np.broadcast_to(z[:, None, :], (n, t, z.shape[1])))
    return np.concatenate(parts, axis=2)


def nb_logpmf(y: np.ndarray, mu: np.ndarray, psi) -> np.ndarray:
    """Negative binomial log-probability with mean ``mu`` and size ``psi`` (NB2, broadcast).

    The log-gamma terms depend on ``y`` and ``psi`` only: they are taken at those two's
    broadcast shape (one per observation when ``mu`` holds many paths per observation).
    """
    coeff = special.gammaln(y + psi) - special.gammaln(psi) - special.gammaln(y + 1)
    return coeff + psi * np.log(psi / (psi + mu)) + special.xlogy(y, mu / (psi + mu))


@dataclass(frozen=True)
class Problem:
    """The observed rows of a fitting window, ready for the likelihood."""

    y: np.ndarray  # (m,)
    ylag: np.ndarray  # (m,) own lagged count
    x: np.ndarray  # (m, p) endemic design
    e: np.ndarray  # (m,) population offset
    rows: tuple[np.ndarray, np.ndarray]  # unit and week position of each row
    lag_matrix: np.ndarray  # (n, T) lagged counts, unknown -> 0, for neighbour sums
    orders: OrderMatrix
    spec: ModelSpec
    names: tuple[str, ...]
    unit_size: np.ndarray  # (n,) size group of each unit (0 .. n_sizes - 1)
    n_sizes: int

    @classmethod
    def build(cls, panel, e, z, angles, orders, spec, covariate_names=(), groups=None):
        """``panel`` (n, T+1): column 0 only serves as the first lag.

        ``groups`` labels each unit's size group (used when ``spec.dispersion`` is not
        "shared"); ``None`` puts all units in one.
        """
        lag = fill_lags(panel)[:, :-1]
        y = panel[:, 1:]
        ok = np.isfinite(y) & np.isfinite(lag)
        ui, ti = np.nonzero(ok)
        x = endemic_design(angles, z, spec.seasonal)[ui, ti]
        names = ["intercept"]
        if spec.seasonal:
            names += ["sin", "cos"]
        names += list(covariate_names)
        if spec.autoregressive:
            names.append("log_lambda")
        if spec.neighbourhood and not orders.empty:
            names += ["log_phi", "log_d"]
        shared = spec.dispersion == "shared" or groups is None
        labels = np.zeros(len(e), dtype=int) if shared else np.asarray(groups)
        unit_size, size_names = size_groups(labels, y[ui, ti], ui)
        names += ["log_psi"] if len(size_names) == 1 else [f"log_psi_{g}" for g in size_names]
        return cls(
            y=y[ui, ti],
            ylag=lag[ui, ti],
            x=x,
            e=e[ui],
            rows=(ui, ti),
            lag_matrix=np.nan_to_num(lag, nan=0.0),
            orders=orders,
            spec=spec,
            names=tuple(names),
            unit_size=unit_size,
            n_sizes=len(size_names),
        )

    @cached_property
    def neighbour_sums(self) -> CellSums:
        """Neighbour sums of the lagged counts at the rows, for any decay (built once)."""
        return self.orders.cell_sums(self.lag_matrix, *self.rows)

    @property
    def has_ne(self) -> bool:
        """Whether the neighbourhood part is fitted."""
        return "log_phi" in self.names

    def mean(self, theta: np.ndarray, *, parts: bool = False):
        """Mean per row and the pieces the gradient needs."""
        p = self.x.shape[1]
        # einsum, not BLAS: a matrix-vector product this thin (a column or a few) costs more in
        # OpenBLAS's thread hand-over than in arithmetic, and its threads spin on shared cores.
        en = self.e * np.exp(np.einsum("mp,p->m", self.x, theta[:p]))
        mu = en.copy()
        k = p
        lam = phi = d = 0.0
        nsum = dnsum = None
        if self.spec.autoregressive:
            lam = np.exp(theta[k])
            mu += lam * self.ylag
            k += 1
        if self.has_ne:
            phi, d = np.exp(theta[k]), np.exp(theta[k + 1])
            nsum, dnsum = self.neighbour_sums(d)
            mu += phi * nsum
        if not parts:
            return mu
        return mu, en, lam, phi, d, nsum, dnsum

    @cached_property
    def row_size(self) -> np.ndarray:
        """Size group of each row."""
        return self.unit_size[self.rows[0]]

    def sizes(self, theta: np.ndarray) -> np.ndarray:
        """Negative binomial size of each row."""
        return np.exp(theta[len(theta) - self.n_sizes :])[self.row_size]

    @cached_property
    def _counted(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Rows with a non-zero count, their counts and ``log y!`` (fixed for the problem).

        A zero count adds ``psi log(psi / (psi + mu))`` to the log-likelihood and nothing
        else (its log-gamma and digamma terms cancel exactly), so those functions are
        evaluated on the non-zero rows only (7 % of them in the 10,000-unit world).
        """
        nz = np.flatnonzero(self.y != 0)
        y = self.y[nz]
        return nz, y, special.gammaln(y + 1)

    def _terms(self, theta: np.ndarray, mu: np.ndarray):
        """Log-likelihood per row (as ``nb_logpmf``) and what its gradient reuses."""
        log_psi = theta[len(theta) - self.n_sizes :]
        size = np.exp(log_psi)
        psi = size[self.row_size]
        nz, y, log_fact = self._counted
        grp = self.row_size[nz]
        psi_nz, mu_nz = psi[nz], mu[nz]
        log_share = np.log(psi / (psi + mu))
        ll = psi * log_share
        coeff = special.gammaln(y + psi_nz) - special.gammaln(size)[grp] - log_fact
        ll[nz] = coeff + ll[nz] + special.xlogy(y, mu_nz / (psi_nz + mu_nz))
        return ll, psi, log_share

    def loglik(self, theta: np.ndarray) -> float:
        """Total log-likelihood."""
        return float(self._terms(theta, self.mean(theta))[0].sum())

    def nll_grad(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Negative log-likelihood and its analytic gradient."""
        mu, en, lam, phi, d, nsum, dnsum = self.mean(theta, parts=True)
        ll, psi, log_share = self._terms(theta, mu)
        y = self.y
        ratio = (y + psi) / (psi + mu)
        g = y / mu - ratio  # d loglik / d mu
        grad = [np.einsum("mp,m->p", self.x, g * en)]
        if self.spec.autoregressive:
            grad.append([np.sum(g * lam * self.ylag)])
        if self.has_ne:
            grad.append([np.sum(g * phi * nsum), np.sum(g * phi * dnsum * d)])
        # digamma(y + psi) - digamma(psi) is 0 for a zero count.
        nz, y_nz, _ = self._counted
        size = np.exp(theta[len(theta) - self.n_sizes :])
        dig = np.zeros(len(y))
        dig[nz] = special.digamma(y_nz + psi[nz]) - special.digamma(size)[self.row_size[nz]]
        dpsi = dig + log_share + 1 - ratio
        grad.append(np.bincount(self.row_size, weights=psi * dpsi, minlength=self.n_sizes))
        grad = np.concatenate([np.asarray(v, dtype=float).ravel() for v in grad])
        return -float(ll.sum()), -grad

    def start(self) -> np.ndarray:
        """Give starting values: a third of the mean rate endemic, the rest to other parts."""
        rate = max(self.y.sum(), 0.5) / self.e.sum()
        theta = np.zeros(len(self.names))
        theta[0] = np.log(rate / 3)
        for name, v in (("log_lambda", 0.4), ("log_phi", 0.1), ("log_d", 1.5)):
            if name in self.names:
                theta[self.names.index(name)] = np.log(v)
        theta[len(theta) - self.n_sizes :] = 0.0  # every size starts at 1
        return theta

    def _hessian(self, theta: np.ndarray) -> np.ndarray:
        hess = approx_fprime(theta, lambda t: self.nll_grad(t)[1], centered=True)
        return (hess + hess.T) / 2

    def fit(self, covariate_names=()) -> Fit:
        """Maximise the likelihood; covariance from the numerical Hessian of the gradient."""
        m = len(self.y)
        bounds = [
            LOG_BOUNDS["log_psi" if nm.startswith("log_psi") else nm]
            if nm.startswith("log_")
            else (None, None)
            for nm in self.names
        ]

        def f(theta):
            v, g = self.nll_grad(theta)
            return v / m, g / m

        # TNC (bounded truncated Newton) is several times faster here than L-BFGS-B; a few
        # Newton steps on the numerical Hessian then polish the optimum to full precision.
        res = optimize.minimize(
            f, self.start(), jac=True, method="TNC", bounds=bounds, options={"maxfun": 2000}
        )
        theta = res.x
        hess = self._hessian(theta)
        for _ in range(3):
            value, grad = self.nll_grad(theta)
            try:
                step = np.linalg.solve(hess, grad)
            except np.linalg.LinAlgError:
                break
            trial = theta - step
            inside = all(
                (lo is None or t > lo) and (hi is None or t < hi)
                for t, (lo, hi) in zip(trial, bounds, strict=True)
            )
            if not inside or not self.nll_grad(trial)[0] <= value:
                break
            theta = trial
            if np.max(np.abs(step)) < 1e-10:
                break
        hess = self._hessian(theta)
        try:
            cov = np.linalg.inv(hess)
        except np.linalg.LinAlgError:
            cov = np.linalg.pinv(hess)
        at_bound = tuple(
            nm
            for nm, t, (lo, hi) in zip(self.names, theta, bounds, strict=True)
            if (lo is not None and t <= lo + AT_BOUND_LOG)
            or (hi is not None and t >= hi - AT_BOUND_LOG)
        )
        return Fit(
            names=self.names,
            theta=theta,
            cov=cov,
            loglik=-self.nll_grad(theta)[0],
            n_obs=m,
            spec=self.spec,
            covariate_names=tuple(covariate_names),
            at_bound=at_bound,
            size_index=len(self.names) - self.n_sizes + self.unit_size,
        )


def size_groups(labels: np.ndarray, y: np.ndarray, unit: np.ndarray):
    """Size group per unit and the groups' names; small groups pooled (``MIN_NONZERO_PER_SIZE``).

    ``y`` are the observed counts and ``unit`` the unit of each. Groups with too few non-zero
    counts share one size, named by their labels joined with "+"; if even together they have
    too few, they join the group with the most non-zero counts. If no group has enough (or
    there is only one group), all units share one size.
    """
    codes, uniques = pd.factorize(pd.Series(labels), sort=True)
    nonzero = np.bincount(codes[unit], weights=(y > 0), minlength=len(uniques))
    big = nonzero >= MIN_NONZERO_PER_SIZE
    if big.sum() == 0 or len(uniques) == 1:
        return np.zeros(len(codes), dtype=int), ("all",)
    members = [[str(u)] for u, b in zip(uniques, big, strict=True) if b]
    remap = np.cumsum(big) - 1
    if (~big).any():
        if nonzero[~big].sum() >= MIN_NONZERO_PER_SIZE:
            remap[~big] = len(members)
            members.append([])
        else:  # a size fitted to (nearly) all zeros runs to its bound: join the busiest group
            remap[~big] = remap[np.argmax(nonzero)]
        for k in np.flatnonzero(~big):
            members[remap[k]].append(str(uniques[k]))
    return remap[codes], tuple("+".join(m) for m in members)
