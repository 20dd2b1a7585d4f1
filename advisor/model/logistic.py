"""Standardised L2 logistic regression whose coefficients may be bounded in sign (numpy only).

    fit = fit_logistic(X, y, c=10.0, signs=[-1, -1, 0])   # -1: w <= 0, +1: w >= 0, 0: free
    fit.mean, fit.scale, fit.coef, fit.intercept, fit.at_bound
    p = fit.predict(X)

The terms are standardised as a standard scaler does (training mean, population standard
deviation; a constant column keeps scale 1), then the penalised log-likelihood

    minimise  ½ Σ_k w_k²  +  C Σ_i log(1 + exp(-s_i (b + Σ_k w_k z_ik))),   s_i = ±1 for usable/not

is minimised subject to ``signs[k] * w_k >= 0``.  The intercept ``b`` is not penalised.  This is
the objective of scikit-learn's ``LogisticRegression(penalty="l2", C=c)``, so with every term
free the two agree to solver precision (a test checks it).

The bounds are handled by a primal active-set method with Newton steps (the problem is small,
smooth and strictly convex in ``w``): start with every bounded coefficient held at zero,
minimise over the free ones by damped Newton steps that stop at the first bound they meet
(that coefficient joins the held set), and release a held coefficient whose gradient shows the
objective would fall by moving it into its allowed side; repeat until no coefficient moves.  The
result satisfies the Karush-Kuhn-Tucker conditions to ``GRAD_TOL``.

References
----------
Nocedal, J. & Wright, S. J., *Numerical Optimization*, 2nd ed., Springer 2006, ch. 16.5
(active-set methods) and ch. 3 (Newton's method with line search).
Hosmer, D. W., Lemeshow, S. & Sturdivant, R. X., *Applied Logistic Regression*, 3rd ed., Wiley
2013, ch. 1-2 (the logistic model and its likelihood).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

GRAD_TOL = 1e-9
MAX_NEWTON = 200
MAX_ACTIVE_CHANGES = 200


@dataclass(frozen=True)
class LogisticFit:
    """A fitted model: scaler, coefficients (on the standardised terms) and which were held at their bound."""

    mean: np.ndarray
    scale: np.ndarray
    coef: np.ndarray
    intercept: float
    at_bound: np.ndarray  # bool per term: held at zero by its sign bound
    signs: np.ndarray

    def logit(self, X: np.ndarray) -> np.ndarray:
        return self.intercept + ((np.asarray(X, dtype=float) - self.mean) / self.scale) @ self.coef

    def predict(self, X: np.ndarray) -> np.ndarray:
        """Probability of a usable result per row."""
        with np.errstate(over="ignore"):
            return 1.0 / (1.0 + np.exp(-self.logit(X)))

    @property
    def per_unit(self) -> np.ndarray:
        """Coefficients in log-odds per unit of each term."""
        return self.coef / self.scale


def standardise(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(mean, population sd) of every column; a constant column gets scale 1."""
    mean = X.mean(axis=0)
    scale = X.std(axis=0)
    return mean, np.where(scale > 0, scale, 1.0)


def _objective(theta: np.ndarray, Z1: np.ndarray, y: np.ndarray, c: float) -> float:
    z = Z1 @ theta
    w = theta[:-1]
    # log(1 + exp(-z)) for usable rows, log(1 + exp(z)) for the others
    return 0.5 * float(w @ w) + c * float(np.sum(np.logaddexp(0.0, np.where(y > 0, -z, z))))


def _gradient_hessian(theta: np.ndarray, Z1: np.ndarray, y: np.ndarray, c: float) -> tuple[np.ndarray, np.ndarray]:
    z = Z1 @ theta
    with np.errstate(over="ignore"):
        p = 1.0 / (1.0 + np.exp(-z))
    penalty = np.append(np.ones(len(theta) - 1), 0.0)  # the intercept is not penalised
    grad = penalty * theta + c * (Z1.T @ (p - y))
    hess = np.diag(penalty) + c * (Z1.T @ (Z1 * (p * (1.0 - p))[:, None]))
    return grad, hess


def _newton_on_free(theta, free, signs_full, Z1, y, c):
    """Damped Newton steps on the ``free`` coordinates; returns (theta, index that hit its bound or None)."""
    for _ in range(MAX_NEWTON):
        grad, hess = _gradient_hessian(theta, Z1, y, c)
        g = grad[free]
        if np.max(np.abs(g)) <= GRAD_TOL:
            return theta, None
        h = hess[np.ix_(free, free)]
        try:
            step_free = -np.linalg.solve(h, g)
        except np.linalg.LinAlgError:
            step_free = -np.linalg.lstsq(h, g, rcond=None)[0]
        step = np.zeros_like(theta)
        step[free] = step_free
        # the largest step that keeps every bounded coefficient on its allowed side
        alpha_max, blocking = 1.0, None
        moving_out = (signs_full * step < 0) & (signs_full != 0)
        for k in np.flatnonzero(moving_out):
            a = -theta[k] / step[k]  # where theta[k] + a step[k] = 0
            if a < alpha_max:
                alpha_max, blocking = max(a, 0.0), k
        if blocking is not None and alpha_max <= 0.0:  # already on that bound and heading out
            theta[blocking] = 0.0
            return theta, blocking
        f0 = _objective(theta, Z1, y, c)
        slope = float(grad @ step)
        alpha = alpha_max
        while alpha > 1e-12 and _objective(theta + alpha * step, Z1, y, c) > f0 + 1e-4 * alpha * slope:
            alpha *= 0.5
        if alpha <= 1e-12:  # no descent left at this precision
            return theta, None
        theta = theta + alpha * step
        if blocking is not None and alpha == alpha_max:
            theta[blocking] = 0.0
            return theta, blocking
        if np.max(np.abs(alpha * step)) <= 1e-15 * (1.0 + np.max(np.abs(theta))):
            return theta, None
    return theta, None


def fit_logistic(X: np.ndarray, y: np.ndarray, c: float = 10.0, signs=None) -> LogisticFit:
    """Fit the standardised L2 logistic model with ``signs[k] * coef[k] >= 0`` (0: free).

    Parameters
    ----------
    X : (n, d) array
        Term values [units of each term].
    y : (n,) array of 0/1
        1 where the attempt gave a usable result.
    c : float
        Inverse regularisation strength (as scikit-learn's ``C``).
    signs : sequence of -1/0/+1, optional
        Declared direction of each term (default: all free).
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, d = X.shape
    signs_arr = np.zeros(d, dtype=int) if signs is None else np.asarray(signs, dtype=int)
    mean, scale = standardise(X)
    Z1 = np.column_stack([(X - mean) / scale, np.ones(n)])
    signs_full = np.append(signs_arr, 0)
    base = np.clip(y.mean(), 1e-6, 1 - 1e-6)
    theta = np.zeros(d + 1)
    theta[-1] = np.log(base / (1 - base))
    held = set(np.flatnonzero(signs_arr != 0).tolist())  # bounded coefficients start at zero
    for _ in range(MAX_ACTIVE_CHANGES):
        free = np.array([k for k in range(d + 1) if k not in held], dtype=int)
        theta, blocking = _newton_on_free(theta, free, signs_full, Z1, y, c)
        if blocking is not None:
            held.add(int(blocking))
            continue
        grad, hess = _gradient_hessian(theta, Z1, y, c)
        # a held coefficient is released when moving it into its allowed side lowers the objective
        release = [k for k in held if signs_full[k] * grad[k] < -GRAD_TOL]
        if not release:
            break
        k = min(release, key=lambda j: signs_full[j] * grad[j])
        held.discard(k)
        # first move it alone into its allowed side: a line-searched Newton step along that coordinate
        step = np.zeros_like(theta)
        step[k] = -grad[k] / hess[k, k]
        f0, alpha = _objective(theta, Z1, y, c), 1.0
        while alpha > 1e-12 and _objective(theta + alpha * step, Z1, y, c) > f0 + 1e-4 * alpha * grad[k] * step[k]:
            alpha *= 0.5
        theta = theta + alpha * step
    at_bound = np.array([k in held for k in range(d)], dtype=bool)
    coef = theta[:-1].copy()
    coef[at_bound] = 0.0
    return LogisticFit(mean, scale, coef, float(theta[-1]), at_bound, signs_arr)
