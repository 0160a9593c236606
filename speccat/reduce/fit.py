"""Least-squares fits of Gaussian or Voigt components (channel units) with calibrated errors.

MINPACK Levenberg-Marquardt (``scipy.optimize.leastsq``, More 1978) with an analytic Jacobian
and no bounds: widths are fitted as logarithms so they stay positive. Parameter errors are the
square roots of the diagonal of (J^T J)^-1 scaled by the reduced chi^2 of the residual
(Press et al., Numerical Recipes 3rd ed., sec. 15.4-15.5). Voigt profiles use the Faddeeva
function, V = Re w(z) / (sigma sqrt(2 pi)), z = (x + i gamma)/(sigma sqrt 2), and
w'(z) = -2 z w(z) + 2i/sqrt(pi) (Abramowitz & Stegun 7.1.20); the Voigt FWHM is the
Olivero & Longbothum (1977, JQSRT 17, 233) approximation, good to 0.02 %.
"""

from __future__ import annotations

import contextvars
import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.optimize
import scipy.special
from scipy.linalg.lapack import dpotrf, dpotri

try:  # MINPACK's lmder itself, as scipy.optimize.leastsq calls it (see ``_lmder``)
    from scipy.optimize._minpack import _lmder as _scipy_lmder
except ImportError:  # pragma: no cover - a SciPy without it: leastsq is used
    _scipy_lmder = None

FWHM_PER_SIGMA = float(2.0 * np.sqrt(2.0 * np.log(2.0)))
SQRT2PI = float(np.sqrt(2.0 * np.pi))

#: Fitting work done in the current ``measure`` call, in points x parameters (+5000 overhead)
#: per evaluation;
#: ``measure`` sets it to [0] and the detection rounds stop adding work past WORK_BUDGET, so a
#: pathological spectrum (noise-free, heavy-tailed, ...) cannot take minutes.
WORK: contextvars.ContextVar[list[float] | None] = contextvars.ContextVar(
    "speccat_reduce_work", default=None
)
WORK_BUDGET = 1.0e8


def over_budget() -> bool:
    """True when the current ``measure`` call has spent its fitting budget."""
    work = WORK.get()
    return work is not None and work[0] > WORK_BUDGET


@dataclass(frozen=True)
class Component:
    """Derived values of one fitted component, channel units, with 1-sigma errors."""

    peak: float
    peak_err: float
    center: float
    center_err: float
    fwhm: float
    fwhm_err: float
    area: float
    area_err: float
    sigma: float
    lorentz_fwhm: float | None = None
    lorentz_fwhm_err: float | None = None


@dataclass(frozen=True)
class GroupFit:
    """A joint fit: parameters (k x npar), scaled covariance, residual sum of squares, dof."""

    params: np.ndarray
    cov: np.ndarray
    rss: float
    dof: int
    profile: str
    success: bool


def _gauss_parts(x: np.ndarray, p: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    amp, cen, s = p[:, 0:1], p[:, 1:2], np.exp(np.minimum(np.maximum(p[:, 2:3], -12.0), 30.0))
    t = (x[None, :] - cen) / s
    g = np.exp(-0.5 * t * t)
    return g, amp * g, t


def _voigt_parts(x: np.ndarray, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    cen, sig, gam = (
        p[:, 1:2],
        np.exp(np.minimum(np.maximum(p[:, 2:3], -12), 30)),
        np.exp(np.minimum(np.maximum(p[:, 3:4], -30), 30)),
    )
    z = ((x[None, :] - cen) + 1j * gam) / (sig * np.sqrt(2.0))
    w = scipy.special.wofz(z)
    return z, w


def model(x: np.ndarray, params: np.ndarray, profile: str) -> np.ndarray:
    """Sum of components at channel positions ``x`` (params rows: [A, c, ln s(, ln gamma)])."""
    if params.size == 0:
        return np.zeros_like(x, dtype=float)
    if profile == "gaussian":
        if params.shape[0] == 1:  # the common case without 2-d arrays: the same values
            amp, cen, ln_s = params[0].tolist()
            t = (x - cen) / np.exp(min(max(ln_s, -12.0), 30.0))
            return np.asarray(amp * np.exp(-0.5 * t * t))
        return np.asarray(_gauss_parts(x, params)[1].sum(axis=0))
    _, w = _voigt_parts(x, params)
    sig = np.exp(np.minimum(np.maximum(params[:, 2:3], -12), 30))
    return np.asarray((params[:, 0:1] * w.real / (sig * SQRT2PI)).sum(axis=0))


def jacobian(x: np.ndarray, params: np.ndarray, profile: str) -> np.ndarray:
    """d model / d params, shape (len(x), params.size), rows of params flattened in order."""
    k = params.shape[0]
    if profile == "gaussian":
        g, ag, t = _gauss_parts(x, params)
        s = np.exp(np.minimum(np.maximum(params[:, 2:3], -12.0), 30.0))
        cols = np.stack((g, ag * t / s, ag * t * t), axis=1)  # (k, 3, m)
        return cols.reshape(3 * k, -1).T
    z, w = _voigt_parts(x, params)
    area = params[:, 0:1]
    sig, gam = (
        np.exp(np.minimum(np.maximum(params[:, 2:3], -12), 30)),
        np.exp(np.minimum(np.maximum(params[:, 3:4], -30), 30)),
    )
    norm = 1.0 / (sig * SQRT2PI)
    dw = -2.0 * z * w + 2j / np.sqrt(np.pi)
    v = w.real * norm
    d_cen = -area * dw.real * norm / (sig * np.sqrt(2.0))
    d_lsig = area * (-v + (dw * (-z)).real * norm)  # d/d ln sigma = sigma d/d sigma
    d_lgam = -area * dw.imag * norm * gam / (sig * np.sqrt(2.0))
    cols = np.stack((v, d_cen, d_lsig, d_lgam), axis=1)
    return cols.reshape(4 * k, -1).T


def _gauss_funcs(
    xs: np.ndarray, y: np.ndarray, k: int
) -> tuple[Callable[[np.ndarray], np.ndarray], Callable[[np.ndarray], np.ndarray]]:
    """Residual and column Jacobian (3k x m) of k Gaussians, sharing one exp per step."""
    memo: dict[str, object] = {}

    def parts(flat: np.ndarray) -> tuple[np.ndarray, ...]:
        key = flat.tobytes()
        if memo.get("key") != key:
            if k == 1:  # scalar parameters: fewer numpy calls on the hot path
                amp, cen, u = flat.tolist()
                s1 = math.exp(min(max(u, -12.0), 30.0))
                t = (xs - cen) * (1.0 / s1)
                g = np.exp(-0.5 * t * t)
                memo["key"], memo["parts"] = key, (g[None], amp * g[None], t[None], s1)
            else:
                p = flat.reshape(k, 3)
                s = np.exp(np.minimum(np.maximum(p[:, 2:3], -12.0), 30.0))
                t = (xs - p[:, 1:2]) / s
                g = np.exp(-0.5 * t * t)
                memo["key"], memo["parts"] = key, (g, p[:, 0:1] * g, t, s)
        return memo["parts"]  # type: ignore[return-value]

    def resid(flat: np.ndarray) -> np.ndarray:
        _, ag, _, _ = parts(flat)
        return np.asarray(ag.sum(axis=0) - y)

    def jac(flat: np.ndarray) -> np.ndarray:
        g, ag, t, s = parts(flat)
        out = np.empty((k, 3, xs.size))
        out[:, 0] = g
        agt = ag * t
        out[:, 1] = agt / s
        out[:, 2] = agt * t
        return out.reshape(3 * k, xs.size)

    return resid, jac


def _plain(flat: np.ndarray, sign: np.ndarray) -> np.ndarray:
    """Log-amplitude parameters (flattened rows) to plain ones: A = sign exp(a)."""
    p = flat.reshape(sign.size, -1).copy()
    p[:, 0] = sign * np.exp(np.minimum(p[:, 0], 700.0))
    return p.ravel()


def _log_funcs(
    xs: np.ndarray, y: np.ndarray, sign: np.ndarray, npar: int, profile: str, calls: list[int]
) -> tuple[Callable[[np.ndarray], np.ndarray], Callable[[np.ndarray], np.ndarray]]:
    """Residual and column Jacobian of k components in [ln |A|, c, ...] (signs fixed)."""
    k = sign.size
    if profile == "gaussian":
        plain_resid, jac = _gauss_funcs(xs, y, k)
    else:

        def plain_resid(flat: np.ndarray) -> np.ndarray:
            return model(xs, flat.reshape(k, npar), profile) - y

        def jac(flat: np.ndarray) -> np.ndarray:
            return jacobian(xs, flat.reshape(k, npar), profile).T

    def resid(flat: np.ndarray) -> np.ndarray:
        calls[0] += 1
        return plain_resid(_plain(flat, sign))

    def log_jac(flat: np.ndarray) -> np.ndarray:
        lin = _plain(flat, sign)
        out = jac(lin).copy()
        out[0::npar] *= lin[0::npar, None]  # d/da = A d/dA
        return out

    return resid, log_jac


class _OneGaussian:
    """Residual and column Jacobian of one Gaussian in [ln |A|, c, ln s] (sign fixed): the
    hot path of the reduction, a handful of numpy calls per evaluation. The last evaluation
    is kept, so the Jacobian at a point just evaluated (and a repeated point) costs no exp.
    The arrays are filled in place and handed out as they are (MINPACK copies what it is
    handed): the Jacobian's first row is the model itself."""

    def __init__(self, xs: np.ndarray, y: np.ndarray, sign: float, calls: list[int]) -> None:
        self.xs, self.y, self.sign, self.calls = xs, y, sign, calls
        self.key: tuple[float, ...] = ()
        self.jm = np.empty((3, xs.size))
        self.f, self.d_cen, self.d_ln_s = self.jm  # d/d ln|A| = A g is the model
        self.t, self.r = np.empty(xs.size), np.empty(xs.size)
        self.s1 = 1.0

    def _at(self, flat: np.ndarray) -> None:
        key = tuple(flat.tolist())
        if key == self.key:
            return
        a, cen, u = key
        self.s1 = math.exp(min(max(u, -12.0), 30.0))
        t, f = self.t, self.f
        np.subtract(self.xs, cen, out=t)
        t *= 1.0 / self.s1
        np.multiply(t, t, out=f)
        f *= -0.5  # (exact: a power of two)
        np.exp(f, out=f)
        f *= self.sign * math.exp(min(a, 700.0))
        np.subtract(f, self.y, out=self.r)
        self.key = key
        self.calls[0] += 1

    def resid(self, flat: np.ndarray) -> np.ndarray:
        self._at(flat)
        return self.r

    def jac(self, flat: np.ndarray) -> np.ndarray:
        self._at(flat)
        np.multiply(self.f, self.t, out=self.d_ln_s)
        np.multiply(self.d_ln_s, 1.0 / self.s1, out=self.d_cen)
        self.d_ln_s *= self.t
        return self.jm


def fit_components(
    x: np.ndarray, y: np.ndarray, p0: np.ndarray, profile: str, maxfev: int = 200
) -> GroupFit:
    """Least-squares fit of ``p0.shape[0]`` components to (x, y); x in channels.

    Each component keeps the sign of its start amplitude: the fit runs on A = sign exp(a), so
    components of one blend cannot grow into huge opposite-sign pairs that cancel each other
    (a component that is not there shrinks towards zero and is pruned by the caller). The
    covariance is then evaluated in the plain parameters [A, c, ...] at the solution.
    """
    k, npar = p0.shape
    if profile == "gaussian" and k == 1 and x.size:
        return _fit_one_gaussian(x, y, p0[0].tolist(), maxfev)
    x0 = 0.5 * float(x[0] + x[-1]) if x.size else 0.0
    start = p0.copy()
    start[:, 1] -= x0
    sign = np.where(p0[:, 0] >= 0.0, 1.0, -1.0)
    tiny = 1e-12 * max(float(np.max(np.abs(y))) if y.size else 0.0, 1e-300)
    start[:, 0] = np.log(np.maximum(np.abs(p0[:, 0]), tiny))
    xs = x - x0
    calls = [0]
    funcs: tuple[Callable[[np.ndarray], np.ndarray], Callable[[np.ndarray], np.ndarray]]
    if profile == "gaussian" and k == 1:
        one = _OneGaussian(xs, y, float(sign[0]), calls)
        funcs = (one.resid, one.jac)
    else:
        funcs = _log_funcs(xs, y, sign, npar, profile, calls)
    resid, log_jac = funcs
    # a run-away fit overflows; ier and _inverse say so, no warning wanted
    with np.errstate(all="ignore"):
        sol_log, ier = _lmder(
            resid, log_jac, start.ravel(), _budget(maxfev, x.size, p0.size, profile)
        )
        r = resid(sol_log)
        sol = _plain(sol_log, sign)
        jm = log_jac(sol_log)
        jm[0::npar] /= np.where(sol[0::npar] != 0, sol[0::npar], 1.0)[:, None]  # d/dA
        rss = float(np.dot(r, r))
        dof = max(x.size - sol.size, 1)
        cov = _inverse(jm @ jm.T) * (rss / dof)
    work = WORK.get()
    if work is not None:
        per_call = x.size * p0.size * (1.0 if profile == "gaussian" else 5.0) + 5000.0
        work[0] += calls[0] * per_call  # + a constant for the Python overhead of each call
    params = sol.reshape(k, npar).copy()
    params[:, 1] += x0
    ok = bool(ier in (1, 2, 3, 4) and np.isfinite(params).all() and np.isfinite(cov).all())
    return GroupFit(params, cov, rss, dof, profile, ok)


def _fit_one_gaussian(x: np.ndarray, y: np.ndarray, p0: list[float], maxfev: int) -> GroupFit:
    """``fit_components`` for one Gaussian, the common case, in floats where it can be: the
    same start, solver, covariance and result."""
    amp0, cen0, ln_s0 = p0
    x0 = 0.5 * float(x[0] + x[-1])
    sign = 1.0 if amp0 >= 0.0 else -1.0
    tiny = 1e-12 * max(float(np.abs(y).max()), 1e-300)
    start = np.array([math.log(max(abs(amp0), tiny)), cen0 - x0, ln_s0])
    calls = [0]
    one = _OneGaussian(x - x0, y, sign, calls)
    with np.errstate(all="ignore"):  # a run-away fit overflows; ier and _inverse say so
        sol_log, ier = _lmder(one.resid, one.jac, start, _budget(maxfev, x.size, 3, "gaussian"))
        r = one.resid(sol_log)
        ln_a, cen, ln_s = sol_log.tolist()
        amp = sign * math.exp(min(ln_a, 700.0))
        jm = one.jac(sol_log).copy()  # (``one`` keeps its own)
        jm[0] /= amp if amp != 0 else 1.0  # d/dA = (d/d ln|A|) / A
        rss = float(np.dot(r, r))
        dof = max(x.size - 3, 1)
        cov = _inverse(jm @ jm.T) * (rss / dof)
    work = WORK.get()
    if work is not None:
        work[0] += calls[0] * (x.size * 3.0 + 5000.0)
    params = np.array([[amp, cen + x0, ln_s]])
    ok = bool(
        ier in (1, 2, 3, 4)
        and all(math.isfinite(v) for v in (amp, cen + x0, ln_s))
        and np.isfinite(cov).all()
    )
    return GroupFit(params, cov, rss, dof, "gaussian", ok)


def _lmder(
    resid: Callable[[np.ndarray], np.ndarray],
    jac: Callable[[np.ndarray], np.ndarray],
    start: np.ndarray,
    maxfev: int,
) -> tuple[np.ndarray, int]:
    """MINPACK lmder (More 1978) with ftol = xtol = 1e-9, column Jacobian: (solution, ier).

    Called directly, it is what ``scipy.optimize.leastsq`` runs, without leastsq's input checks
    (one more residual and Jacobian evaluation per fit) and messages; about a sixth of a
    one-line fit. Falls back to leastsq when this SciPy's private entry point is missing or
    takes other arguments."""
    global _scipy_lmder
    if _scipy_lmder is not None:
        try:
            sol, ier = _scipy_lmder(
                resid, jac, start, (), 0, 1, 1e-9, 1e-9, 0.0, maxfev, 100.0, None
            )
            return sol, int(ier)
        except TypeError:
            _scipy_lmder = None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        sol, ier = scipy.optimize.leastsq(
            resid, start, Dfun=jac, col_deriv=True, ftol=1e-9, xtol=1e-9, maxfev=maxfev
        )
    return sol, int(ier)


def _budget(maxfev: int, m: int, npar: int, profile: str) -> int:
    """Evaluation cap: ``maxfev`` (x2 for Voigt) but at most ~4e6/(points x parameters), at
    least 40, so that a huge joint fit on pathological data cannot take minutes."""
    base = maxfev if profile == "gaussian" else 2 * maxfev
    cost = 4.0e6 / max(m * npar, 1) / (1.0 if profile == "gaussian" else 5.0)
    return int(max(40, min(base, cost)))


def _inverse(matrix: np.ndarray) -> np.ndarray:
    """Inverse of the normal matrix; pseudo-inverse when it is singular or ill-conditioned;
    all-infinite (no usable errors, so the caller rejects the fit) when the matrix itself is
    not finite or no decomposition converges (a run-away amplitude overflows the Jacobian)."""
    if not math.isfinite(float(np.abs(matrix).sum())):
        return np.full_like(matrix, np.inf)
    factor, info = dpotrf(matrix, lower=0, clean=1)  # positive definite: the common case
    if info == 0:
        upper, info = dpotri(factor, lower=0)  # the inverse's upper triangle, zeros below
        if info == 0:
            out = upper + upper.T
            out.flat[:: out.shape[0] + 1] *= 0.5
            if math.isfinite(float(out.sum())):
                return np.asarray(out)
    try:
        return np.asarray(np.linalg.pinv(matrix, rcond=1e-12))
    except np.linalg.LinAlgError:
        return np.full_like(matrix, np.inf)


def voigt_fwhm(fwhm_g: np.ndarray | float, fwhm_l: np.ndarray | float) -> np.ndarray:
    """Olivero & Longbothum (1977) eq. (1-2) form: 0.5346 fL + sqrt(0.2166 fL^2 + fG^2)."""
    fl = np.asarray(fwhm_l, dtype=float)
    return np.asarray(0.5346 * fl + np.sqrt(0.2166 * fl * fl + np.asarray(fwhm_g) ** 2))


def _derived(p: np.ndarray, profile: str) -> np.ndarray:
    """[peak, centre, fwhm, area, lorentz fwhm] of one component's parameters."""
    if profile == "gaussian":
        s = np.exp(p[2])
        return np.array([p[0], p[1], FWHM_PER_SIGMA * s, SQRT2PI * p[0] * s, 0.0])
    sig = float(np.exp(min(max(p[2], -12.0), 30.0)))
    gam = float(np.exp(min(max(p[3], -30.0), 30.0)))
    peak = p[0] * scipy.special.wofz(1j * gam / (sig * np.sqrt(2.0))).real / (sig * SQRT2PI)
    fwhm = float(voigt_fwhm(FWHM_PER_SIGMA * sig, 2.0 * gam))
    return np.array([peak, p[1], fwhm, p[0], 2.0 * gam])


def _gaussian_component(p: np.ndarray, cov: np.ndarray) -> Component:
    """Peak A, centre c, FWHM = 2.3548 s, area = sqrt(2 pi) A s, with propagated errors."""
    amp, cen, s = float(p[0]), float(p[1]), float(np.exp(p[2]))
    area = SQRT2PI * amp * s
    grad_area = np.array([SQRT2PI * s, 0.0, area])
    var_area = float(grad_area @ cov @ grad_area)
    return Component(
        peak=amp,
        peak_err=math.sqrt(max(float(cov[0, 0]), 0.0)),
        center=cen,
        center_err=math.sqrt(max(float(cov[1, 1]), 0.0)),
        fwhm=FWHM_PER_SIGMA * s,
        fwhm_err=FWHM_PER_SIGMA * s * math.sqrt(max(float(cov[2, 2]), 0.0)),
        area=area,
        area_err=math.sqrt(max(var_area, 0.0)),
        sigma=s,
    )


def components(fit: GroupFit) -> list[Component]:
    """Derived values with errors propagated through the covariance (central differences)."""
    k, npar = fit.params.shape
    out = []
    for i in range(k):
        p = fit.params[i]
        cov = fit.cov[i * npar : (i + 1) * npar, i * npar : (i + 1) * npar]
        if fit.profile == "gaussian":
            out.append(_gaussian_component(p, cov))
            continue
        val = _derived(p, fit.profile)
        grad = np.empty((val.size, npar))
        for j in range(npar):
            h = 1e-6 * max(abs(p[j]), 1e-3)
            step = np.zeros(npar)
            step[j] = h
            grad[:, j] = (_derived(p + step, fit.profile) - _derived(p - step, fit.profile)) / (
                2 * h
            )
        var = np.einsum("ij,jk,ik->i", grad, cov, grad)
        err = np.sqrt(np.maximum(var, 0.0))
        voigt = fit.profile == "voigt"
        out.append(
            Component(
                peak=float(val[0]),
                peak_err=float(err[0]),
                center=float(val[1]),
                center_err=float(err[1]),
                fwhm=float(val[2]),
                fwhm_err=float(err[2]),
                area=float(val[3]),
                area_err=float(err[3]),
                sigma=float(np.exp(p[2])),
                lorentz_fwhm=float(val[4]) if voigt else None,
                lorentz_fwhm_err=float(err[4]) if voigt else None,
            )
        )
    return out
