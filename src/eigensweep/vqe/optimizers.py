"""Classical optimizers for variational energies, behind one ``minimize`` entry point.

Methods (``method=``):

``lbfgs``
    SciPy L-BFGS-B with the analytic (adjoint) gradient. ``tol`` is the projected-gradient
    tolerance ``gtol``; ``ftol`` the relative-reduction tolerance; ``maxcor`` the memory.
``bfgs``
    SciPy BFGS; ``tol`` is ``gtol`` (gradient max-norm).
``cobyla``
    SciPy COBYLA (derivative-free); ``tol`` is the final trust radius, ``rhobeg`` the first
    one; ``maxiter`` bounds the number of evaluations.
``nelder_mead``
    SciPy Nelder-Mead from an axis simplex of edge ``initial_step``; ``tol`` is used for both
    ``xatol`` and ``fatol``.
``spsa``
    Simultaneous-perturbation stochastic approximation, Spall, IEEE Trans. Autom. Control 37,
    332 (1992), with the standard gains ``a_k = a/(k + 1 + A)^alpha``,
    ``c_k = c/(k + 1)^gamma`` (``alpha = 0.602``, ``gamma = 0.101``, ``A = 0.1 maxiter``;
    Spall, IEEE Trans. Aerosp. Electron. Syst. 34, 817 (1998)). If ``a`` is not given it is
    calibrated so that the first step moves each parameter by about ``first_step`` on
    average, from ``gain_estimates`` gradient estimates at ``x0``. The returned point is
    the mean of the last ``iterate_average`` iterates (iterate averaging of Polyak & Juditsky,
    SIAM J. Control Optim. 30, 838 (1992), and Ruppert (1988); 1 = last iterate).
    SPSA has no convergence test: ``converged`` is always False (the gain schedule ran to its
    end; the optimize result's ``stop_reason`` says ``max_iterations``). Two safeguards of
    Spall (1998, sec. III): ``resamplings`` gradient estimates are averaged per iteration,
    and with ``blocking`` a step is rejected when the energy at the new point exceeds the
    energy of the current point by more than ``blocking_tolerance`` (default twice the
    spread of the calibration energies at the start, i.e. about two standard errors; 0 with
    exact energies); blocking costs one more evaluation per iteration.
``rbf_surrogate``
    Stochastic radial-basis-function surrogate search (Gutmann, J. Global Optim. 19, 201
    (2001); Regis & Shoemaker, INFORMS J. Comput. 19, 497 (2007)): a cubic RBF with linear
    tail is fitted to all evaluations (optionally smoothed by ``smoothing`` for noisy values);
    the initial design is a Latin hypercube of ``n_initial`` points (``x0`` included) in the
    box ``x0 +- radius``; each step scores ``n_candidates`` Gaussian perturbations (std
    ``sigma``, per-coordinate perturbation probability ``min(1, 20/d)``) of the best point by
    ``w * surrogate + (1 - w) * (1 - distance)`` (both scaled to [0, 1], weights cycling
    through ``weights``), evaluates the best-scored candidate, doubles ``sigma`` after
    ``widen_after`` consecutive improvements and halves it after ``narrow_after``
    consecutive failures (an improvement is a value below the best so far; with
    ``smoothing > 0`` "best" is the lowest *fitted* value at the evaluated points, which is
    less biased by noise than the lowest raw value). Stops (``converged``) when
    ``sigma < tol`` or after ``maxiter`` evaluations. With ``smoothing > 0`` the returned
    point is the evaluated point of lowest fitted value.

``adam``
    Gradient descent with Adam moments (Kingma & Ba, ICLR 2015, arXiv:1412.6980):
    ``m = beta1 m + (1 - beta1) g``, ``v = beta2 v + (1 - beta2) g^2``, step
    ``lr m_hat / (sqrt(v_hat) + eps)`` with bias-corrected ``m_hat``, ``v_hat``. The gradient is
    the adjoint one with exact energies and the parameter-shift one with shots
    (:mod:`eigensweep.vqe.parameter_shift`, ``gradient_shots`` per shifted circuit). Stops
    (``converged``) when the gradient max-norm falls below ``tol`` (exact energies only; with
    shots the estimate never is that small reliably, so the run ends at ``maxiter``).
``shot_adaptive_descent``
    Gradient descent with individual coupled adaptive number of shots, iCANS1 of Kübler,
    Arrasmith, Cincio, Coles, Quantum 4, 263 (2020), Algorithm 1: step ``lr g`` with
    ``lr = 1/L`` by default (``L`` = ``lipschitz``, default the Hamiltonian's non-identity
    1-norm, the bound used there for Pauli rotations, times the square of the largest
    frequency sum of one parameter, :func:`~eigensweep.vqe.parameter_shift.curvature_factor`:
    4 for an excitation angle); after each step the shots of component ``i`` become
    ``s_i = ceil(2 L lr xi_i / ((2 - L lr) (chi_i^2 + b mu^k)))`` with ``chi``, ``xi`` the bias-corrected
    exponential averages (factor ``mu``) of the gradient and of its single-shot variance,
    clipped to ``[min_shots, s_j]`` where ``j`` maximises the expected gain per shot
    ``gamma_i = ((lr - L lr^2/2) chi_i^2 - L lr^2 xi_i/(2 s_i)) / s_i``. Shots are per shifted
    circuit of the component (the estimator spreads them over its measurement groups). With
    exact energies it is plain gradient descent with step ``lr``.
``max_shots`` (every method)
    Shot budget of the whole optimize job (energies, gradients, calibration, restarts and the
    final fresh estimate, which is set aside first). An estimate that would pass it is not
    made (:class:`~eigensweep.vqe.estimators.ShotBudgetExhausted`) and the method returns at
    once: the current iterate for SPSA, Adam and shot-adaptive descent, the best point so far
    for the SciPy and surrogate methods; ``message`` says so and ``stop_reason`` is
    ``shot_budget``. Ignored with exact energies.

Every method is deterministic for a given ``seed``. Unknown option keys raise
:class:`~eigensweep.errors.ConfigError`.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.optimize

from ..errors import ConfigError
from .estimators import ShotBudgetExhausted
from .methods import GRADIENT_METHODS, OPTIMIZER_DEFAULTS, validate_options
from .parameter_shift import GradientEstimate

__all__ = [
    "GRADIENT_METHODS",
    "OPTIMIZER_DEFAULTS",
    "STOCHASTIC_GRADIENT_METHODS",
    "GradientFn",
    "OptimizerResult",
    "minimize",
    "validate_options",
]


@dataclass
class OptimizerResult:
    """Outcome of :func:`minimize`.

    ``trace`` has one dict per objective evaluation or gradient step: ``energy`` (nan for a
    gradient step that measured no energy), ``grad_norm`` (nan when no gradient was
    computed), ``evaluation`` (0-based index), ``shots`` (of that record) and whatever the
    ``monitor`` of :func:`minimize` adds. ``budget_exhausted`` is true when ``max_shots`` stopped it.
    """

    x: np.ndarray
    fun: float
    n_evaluations: int
    n_gradient_evaluations: int
    n_iterations: int
    converged: bool
    message: str
    trace: list[dict] = field(default_factory=list)
    budget_exhausted: bool = False


#: Methods that need a gradient (adjoint with exact energies, parameter shift with shots).
STOCHASTIC_GRADIENT_METHODS = ("adam", "shot_adaptive_descent")

GradientFn = Callable[[np.ndarray, "np.ndarray | int | None"], tuple[float, GradientEstimate]]
"""``(x, shots per parameter or None = default) -> (energy or nan, gradient estimate)``."""


class _Recorder:
    """Wraps the objective; records every evaluation."""

    def __init__(
        self,
        fun: Callable,
        grad: Callable | bool | None,
        shots: int | Callable[[], int],
        monitor: Callable[[np.ndarray], dict] | None = None,
    ) -> None:
        self.fun = fun
        self.grad = grad
        self.shots = shots
        self.monitor = monitor
        self.trace: list[dict] = []
        self.n_grad = 0
        self.best_x: np.ndarray | None = None
        self.best_f = math.inf
        self.iterate: np.ndarray | None = None  # current point of iterative methods

    def _record(
        self, x: np.ndarray, f: float, g: np.ndarray | None, shots: int | None = None
    ) -> None:
        if not (math.isfinite(f) or (math.isnan(f) and shots is not None)):
            raise FloatingPointError(f"objective returned {f}")
        if shots is None:
            shots = int(self.shots() if callable(self.shots) else self.shots)
        rec = {
            "energy": float(f),
            "grad_norm": float(np.linalg.norm(g)) if g is not None else math.nan,
            "evaluation": len(self.trace),
            "shots": int(shots),
        }
        if self.monitor is not None:
            rec.update(self.monitor(x))
        self.trace.append(rec)
        if f < self.best_f:
            self.best_f = float(f)
            self.best_x = np.array(x, dtype=float, copy=True)

    def value(self, x: np.ndarray) -> float:
        x = np.asarray(x, dtype=float)
        if self.grad is True:
            f, _ = self.fun(x)
        else:
            f = self.fun(x)
        f = float(f)
        self._record(x, f, None)
        return f

    def value_and_grad(self, x: np.ndarray) -> tuple[float, np.ndarray]:
        x = np.asarray(x, dtype=float)
        if self.grad is True:
            f, g = self.fun(x)
        else:
            f = self.fun(x)
            g = self.grad(x)  # type: ignore[misc]
        f = float(f)
        g = np.asarray(g, dtype=float)
        self.n_grad += 1
        self._record(x, f, g)
        return f, g

    def gradient_step(
        self, gradient: GradientFn, x: np.ndarray, shots: np.ndarray | int | None = None
    ) -> GradientEstimate:
        """One gradient estimate at ``x``, recorded as one trace entry."""
        x = np.asarray(x, dtype=float)
        f, est = gradient(x, shots)
        self.n_grad += 1
        self._record(x, float(f), est.gradient, shots=est.shots)
        return est

    @property
    def n_eval(self) -> int:
        return len(self.trace)


def minimize(
    fun: Callable[[np.ndarray], Any],
    x0: np.ndarray,
    *,
    method: str,
    options: dict[str, Any] | None = None,
    seed: int = 0,
    grad: Callable[[np.ndarray], np.ndarray] | bool | None = None,
    shots: int | Callable[[], int] = 0,
    gradient: GradientFn | None = None,
    monitor: Callable[[np.ndarray], dict] | None = None,
    lipschitz: float | None = None,
    phase: Callable[[str], None] | None = None,
) -> OptimizerResult:
    """Minimise ``fun`` from ``x0`` with ``method`` (module docstring).

    Args:
        fun: objective ``x -> float``, or ``x -> (float, gradient)`` when ``grad is True``.
        x0: starting point.
        method: one of :data:`OPTIMIZER_DEFAULTS`.
        options: method options (defaults filled; unknown keys raise ``ConfigError``).
        seed: seed of the method's random numbers (SPSA, RBF surrogate).
        grad: gradient callable, ``True`` if ``fun`` returns ``(value, gradient)``, or
            ``None`` (gradient methods then use SciPy finite differences).
        shots: shots per evaluation recorded in the trace (0 for exact objectives), or a
            callable returning the shots of the evaluation just made.
        gradient: :data:`GradientFn` for ``adam`` and ``shot_adaptive_descent``.
        monitor: ``x -> dict`` of extra trace fields at each recorded point.
        lipschitz: gradient Lipschitz bound for ``shot_adaptive_descent`` when its option
            ``lipschitz`` is null.
        phase: told ``"calibration"`` while SPSA calibrates its gains and ``"energy"`` after
            (for shot accounting by purpose).
    """
    opts = validate_options(method, options)
    opts.pop("max_shots", None)  # enforced by the estimator's ledger
    x0 = np.array(x0, dtype=float, copy=True).reshape(-1)
    rec = _Recorder(fun, grad, shots, monitor)
    rec.phase = phase if phase is not None else (lambda _name: None)
    if x0.size == 0:
        f = rec.value(x0)
        return OptimizerResult(x0, f, 1, 0, 0, True, "no parameters", rec.trace)
    if method in STOCHASTIC_GRADIENT_METHODS and gradient is None:
        if grad is None:
            raise ValueError(f"optimizer {method!r} needs a gradient function")
        gradient = _exact_gradient_fn(fun, grad)
    try:
        if method in ("lbfgs", "bfgs"):
            res = _scipy_gradient(rec, x0, method, opts)
        elif method == "cobyla":
            res = _scipy_cobyla(rec, x0, opts)
        elif method == "nelder_mead":
            res = _scipy_nelder_mead(rec, x0, opts)
        elif method == "spsa":
            res = _spsa(rec, x0, opts, seed)
        elif method == "adam":
            res = _adam(rec, x0, opts, gradient)
        elif method == "shot_adaptive_descent":
            res = _shot_adaptive(rec, x0, opts, gradient, lipschitz)
        else:
            res = _rbf_surrogate(rec, x0, opts, seed)
    except ShotBudgetExhausted as exc:
        if rec.iterate is not None:
            x = rec.iterate.copy()
        elif rec.best_x is not None:
            x = rec.best_x.copy()
        else:
            x = x0.copy()
        n_it = sum(1 for t in rec.trace if t.get("step"))
        res = OptimizerResult(
            x, rec.best_f, 0, 0, n_it, False, f"stopped: {exc}", budget_exhausted=True
        )
    res.trace = rec.trace
    res.n_evaluations = rec.n_eval
    res.n_gradient_evaluations = rec.n_grad
    return res


# ---------------------------------------------------------------------------- SciPy wrappers
def _scipy_gradient(rec: _Recorder, x0: np.ndarray, method: str, opts: dict) -> OptimizerResult:
    jac = rec.value_and_grad if rec.grad is not None else None
    obj = rec.value_and_grad if jac is not None else rec.value
    if method == "lbfgs":
        sopts = {
            "maxiter": opts["maxiter"],
            "gtol": opts["tol"],
            "ftol": opts["ftol"],
            "maxcor": opts["maxcor"],
            "maxfun": 20 * opts["maxiter"],
        }
        r = scipy.optimize.minimize(obj, x0, jac=jac is not None, method="L-BFGS-B", options=sopts)
    else:
        sopts = {"maxiter": opts["maxiter"], "gtol": opts["tol"]}
        r = scipy.optimize.minimize(obj, x0, jac=jac is not None, method="BFGS", options=sopts)
    x = np.asarray(r.x, dtype=float)
    fun = float(r.fun)
    converged = bool(r.success)
    message = str(r.message)
    if not converged and method == "bfgs" and "precision loss" in message.lower():
        # BFGS stops on line-search precision loss at a converged point of a smooth
        # objective; accept it when the gradient is already at the level of round-off
        g = np.asarray(r.jac, dtype=float)
        if np.max(np.abs(g)) < max(opts["tol"], 1e-5):
            converged = True
    return OptimizerResult(x, fun, 0, 0, int(r.nit), converged, message)


def _scipy_cobyla(rec: _Recorder, x0: np.ndarray, opts: dict) -> OptimizerResult:
    r = scipy.optimize.minimize(
        rec.value,
        x0,
        method="COBYLA",
        tol=opts["tol"],
        options={"maxiter": opts["maxiter"], "rhobeg": opts["rhobeg"]},
    )
    nit = int(getattr(r, "nit", 0) or getattr(r, "nfev", 0))
    return OptimizerResult(
        np.asarray(r.x, dtype=float), float(r.fun), 0, 0, nit, bool(r.success), str(r.message)
    )


def _scipy_nelder_mead(rec: _Recorder, x0: np.ndarray, opts: dict) -> OptimizerResult:
    d = x0.size
    simplex = np.vstack([x0, x0 + opts["initial_step"] * np.eye(d)])
    r = scipy.optimize.minimize(
        rec.value,
        x0,
        method="Nelder-Mead",
        options={
            "maxiter": opts["maxiter"],
            "maxfev": 2 * opts["maxiter"],
            "xatol": opts["tol"],
            "fatol": opts["tol"],
            "initial_simplex": simplex,
        },
    )
    return OptimizerResult(
        np.asarray(r.x, dtype=float),
        float(r.fun),
        0,
        0,
        int(r.nit),
        bool(r.success),
        str(r.message),
    )


# ---------------------------------------------------------------------------- SPSA
def _spsa(rec: _Recorder, x0: np.ndarray, opts: dict, seed: int) -> OptimizerResult:
    rng = np.random.default_rng(seed)
    d = x0.size
    maxiter = opts["maxiter"]
    alpha, gamma, c = opts["alpha"], opts["gamma"], opts["c"]
    big_a = opts["A"] if opts["A"] is not None else 0.1 * maxiter
    resamplings = opts["resamplings"]
    x = x0.copy()
    rec.iterate = x.copy()

    def grad_estimate(xk: np.ndarray, ck: float) -> tuple[np.ndarray, list[float]]:
        delta = rng.choice(np.array([-1.0, 1.0]), size=d)
        fp = rec.value(xk + ck * delta)
        fm = rec.value(xk - ck * delta)
        return (fp - fm) / (2.0 * ck) * delta, [fp, fm]

    a = opts["a"]
    spread: list[float] = []
    if a is None or (opts["blocking"] and opts["blocking_tolerance"] is None):
        rec.phase("calibration")
        mags = []
        for _ in range(opts["gain_estimates"]):
            g, fs = grad_estimate(x, c)
            mags.append(np.mean(np.abs(g)))
            spread += fs
        if a is None:
            mag = float(np.mean(mags))
            a = opts["first_step"] * (big_a + 1.0) ** alpha / mag if mag > 0 else opts["first_step"]
        rec.phase("energy")
    tolerance = opts["blocking_tolerance"]
    if opts["blocking"] and tolerance is None:
        tolerance = 2.0 * float(np.std(spread, ddof=1)) if len(spread) > 1 else 0.0
    f_current = rec.value(x) if opts["blocking"] else math.nan
    history: list[np.ndarray] = []
    keep = opts["iterate_average"]
    n_blocked = 0
    for k in range(maxiter):
        ak = a / (k + 1.0 + big_a) ** alpha
        ck = c / (k + 1.0) ** gamma
        g = np.mean([grad_estimate(x, ck)[0] for _ in range(resamplings)], axis=0)
        x_new = x - ak * g
        if opts["blocking"]:
            f_new = rec.value(x_new)
            if f_new > f_current + tolerance:
                n_blocked += 1
            else:
                x, f_current = x_new, f_new
        else:
            x = x_new
        history.append(x.copy())
        if len(history) > keep:
            history.pop(0)
        rec.iterate = np.mean(history, axis=0)
        rec.trace[-1]["step"] = k + 1
    x_final = np.mean(history, axis=0)
    f_final = rec.value(x_final)
    blocked = f", {n_blocked} steps blocked" if opts["blocking"] else ""
    return OptimizerResult(
        x_final,
        f_final,
        0,
        0,
        maxiter,
        False,  # SPSA has no convergence test of its own
        f"SPSA gain schedule completed ({maxiter} iterations, a={a:.4g}{blocked}); "
        "no convergence test",
    )


# ---------------------------------------------------------------------------- gradient descent
def _exact_gradient_fn(fun: Callable, grad: Callable | bool) -> GradientFn:
    """A :data:`GradientFn` from an exact ``(value, gradient)`` objective."""

    def gradient(x: np.ndarray, _shots: np.ndarray | int | None) -> tuple[float, GradientEstimate]:
        if grad is True:
            f, g = fun(x)
        else:
            f, g = fun(x), grad(x)
        g = np.asarray(g, dtype=float)
        return float(f), GradientEstimate(g, np.zeros_like(g), 0, 0)

    return gradient


def _gradient_shots(opts: dict) -> int | None:
    return opts.get("gradient_shots")


def _adam(rec: _Recorder, x0: np.ndarray, opts: dict, gradient: GradientFn) -> OptimizerResult:
    lr, b1, b2, eps = opts["lr"], opts["beta1"], opts["beta2"], opts["eps"]
    x = x0.copy()
    rec.iterate = x.copy()
    m = np.zeros_like(x)
    v = np.zeros_like(x)
    shots = _gradient_shots(opts)
    for k in range(1, opts["maxiter"] + 1):
        est = rec.gradient_step(gradient, x, shots)
        g = est.gradient
        if est.shots == 0 and float(np.max(np.abs(g))) < opts["tol"]:
            return OptimizerResult(
                x,
                rec.trace[-1]["energy"],
                0,
                0,
                k - 1,
                True,
                f"gradient max-norm below tol={opts['tol']:g}",
            )
        m = b1 * m + (1.0 - b1) * g
        v = b2 * v + (1.0 - b2) * g * g
        m_hat = m / (1.0 - b1**k)
        v_hat = v / (1.0 - b2**k)
        x = x - lr * m_hat / (np.sqrt(v_hat) + eps)
        rec.iterate = x.copy()
        rec.trace[-1]["step"] = k
    return OptimizerResult(
        x,
        rec.trace[-1]["energy"],
        0,
        0,
        opts["maxiter"],
        False,
        f"iteration limit of {opts['maxiter']} reached",
    )


def _shot_adaptive(
    rec: _Recorder, x0: np.ndarray, opts: dict, gradient: GradientFn, lipschitz: float | None
) -> OptimizerResult:
    big_l = opts["lipschitz"] if opts["lipschitz"] is not None else lipschitz
    if big_l is None or not big_l > 0:
        big_l = 1.0
    lr = opts["lr"] if opts["lr"] is not None else 1.0 / big_l
    if not lr * big_l < 2.0:
        raise ConfigError(
            f"optimizer.lr: lr x lipschitz must be below 2 for shot_adaptive_descent, got "
            f"{lr * big_l:g}; lower lr or leave it null"
        )
    mu, b, s_min = opts["mu"], opts["b"], opts["min_shots"]
    d = x0.size
    x = x0.copy()
    rec.iterate = x.copy()
    s = np.full(d, s_min, dtype=np.int64)
    chi = np.zeros(d)
    xi = np.zeros(d)
    for k in range(opts["maxiter"]):
        est = rec.gradient_step(gradient, x, s)
        g = est.gradient
        if est.shots == 0 and float(np.max(np.abs(g))) < opts["tol"]:
            return OptimizerResult(
                x,
                rec.trace[-1]["energy"],
                0,
                0,
                k,
                True,
                f"gradient max-norm below tol={opts['tol']:g}",
            )
        single_shot_var = est.variance * s  # variance of one shot per shifted circuit
        xi = mu * xi + (1.0 - mu) * single_shot_var
        chi = mu * chi + (1.0 - mu) * g
        xi_h = xi / (1.0 - mu ** (k + 1))
        chi_h = chi / (1.0 - mu ** (k + 1))
        x = x - lr * g
        rec.iterate = x.copy()
        rec.trace[-1]["step"] = k + 1
        if est.shots == 0:
            continue
        s_new = np.ceil(2.0 * big_l * lr * xi_h / ((2.0 - big_l * lr) * (chi_h**2 + b * mu**k)))
        s_new = np.clip(
            np.nan_to_num(s_new, nan=s_min, posinf=opts["max_component_shots"]),
            s_min,
            opts["max_component_shots"],
        )
        gain = (
            (lr - big_l * lr**2 / 2.0) * chi_h**2 - big_l * lr**2 * xi_h / (2.0 * s_new)
        ) / s_new
        s_cap = s_new[int(np.argmax(gain))]
        s = np.clip(s_new, s_min, max(s_cap, s_min)).astype(np.int64)
    return OptimizerResult(
        x,
        rec.trace[-1]["energy"],
        0,
        0,
        opts["maxiter"],
        False,
        f"iteration limit of {opts['maxiter']} reached (lr={lr:.4g}, L={big_l:.4g})",
    )


# ---------------------------------------------------------------------------- RBF surrogate
def _latin_hypercube(rng: np.random.Generator, n: int, d: int) -> np.ndarray:
    """``n`` points in ``[0, 1]^d``, one per stratum in every coordinate."""
    u = (rng.random((n, d)) + np.arange(n)[:, None]) / n
    for j in range(d):
        u[:, j] = u[rng.permutation(n), j]
    return u


class _CubicRBF:
    """Cubic RBF ``s(x) = sum_i l_i |x - x_i|^3 + b.x + a`` (optionally smoothed)."""

    def __init__(self, pts: np.ndarray, vals: np.ndarray, smoothing: float) -> None:
        n, d = pts.shape
        self.center = pts.mean(axis=0)
        self.pts = pts - self.center
        r = np.linalg.norm(self.pts[:, None, :] - self.pts[None, :, :], axis=-1)
        phi = r**3 + smoothing * np.eye(n)
        p = np.hstack([self.pts, np.ones((n, 1))])
        mat = np.zeros((n + d + 1, n + d + 1))
        mat[:n, :n] = phi
        mat[:n, n:] = p
        mat[n:, :n] = p.T
        rhs = np.concatenate([vals, np.zeros(d + 1)])
        try:
            sol = np.linalg.solve(mat, rhs)
            if not np.all(np.isfinite(sol)):
                raise np.linalg.LinAlgError
        except np.linalg.LinAlgError:
            sol = np.linalg.lstsq(mat, rhs, rcond=None)[0]
        self.lam = sol[:n]
        self.tail = sol[n:]

    def __call__(self, x: np.ndarray) -> np.ndarray:
        xc = np.atleast_2d(x) - self.center
        r = np.linalg.norm(xc[:, None, :] - self.pts[None, :, :], axis=-1)
        return r**3 @ self.lam + xc @ self.tail[:-1] + self.tail[-1]


def _rbf_surrogate(rec: _Recorder, x0: np.ndarray, opts: dict, seed: int) -> OptimizerResult:
    rng = np.random.default_rng(seed)
    d = x0.size
    radius = opts["radius"]
    budget = opts["maxiter"]
    n_init = opts["n_initial"] if opts["n_initial"] is not None else 2 * (d + 1)
    n_init = max(min(n_init, budget), 1)
    n_cand = opts["n_candidates"] if opts["n_candidates"] is not None else min(100 * d, 2000)
    fail_tol = opts["narrow_after"] if opts["narrow_after"] is not None else max(5, d)
    succ_tol = opts["widen_after"]
    weights = opts["weights"]
    smoothing = opts["smoothing"]
    sigma_max = 2.0 * radius
    sigma = opts["sigma"] * 2.0 * radius

    design = x0 - radius + 2.0 * radius * _latin_hypercube(rng, n_init, d)
    design[0] = x0
    pts = [p.copy() for p in design]
    vals = [rec.value(p) for p in design]
    n_success = n_fail = 0
    it = 0
    converged = False
    message = f"evaluation budget of {budget} used"
    p_perturb = min(1.0, 20.0 / d)
    while len(vals) < budget:
        if sigma < opts["tol"]:
            converged = True
            message = f"step size sigma fell below tol={opts['tol']:g}"
            break
        xs = np.array(pts)
        fs = np.array(vals)
        if len(vals) < d + 2:
            # too few points for the linear tail: sample around the best point
            best = xs[np.argmin(fs)]
            f_best = float(np.min(fs))
            cand = best + sigma * rng.standard_normal(d)
        else:
            model = _CubicRBF(xs, fs, smoothing)
            ref = model(xs) if smoothing > 0 else fs
            best = xs[np.argmin(ref)]
            f_best = float(np.min(ref))
            mask = rng.random((n_cand, d)) < p_perturb
            empty = ~mask.any(axis=1)
            mask[empty, rng.integers(0, d, size=int(empty.sum()))] = True
            cands = best + mask * sigma * rng.standard_normal((n_cand, d))
            sval = model(cands)
            dist = np.min(np.linalg.norm(cands[:, None, :] - xs[None, :, :], axis=-1), axis=1)
            w = weights[it % len(weights)]
            vs = _unit_scale(sval)
            vd = 1.0 - _unit_scale(dist)
            score = w * vs + (1.0 - w) * vd
            score[dist < 1e-10 * max(1.0, radius)] = np.inf
            cand = cands[int(np.argmin(score))]
        f_new = rec.value(cand)
        pts.append(cand.copy())
        vals.append(f_new)
        it += 1
        if f_new < f_best - 1e-12 * max(1.0, abs(f_best)):
            n_success += 1
            n_fail = 0
        else:
            n_fail += 1
            n_success = 0
        if n_success >= succ_tol:
            sigma = min(2.0 * sigma, sigma_max)
            n_success = 0
        if n_fail >= fail_tol:
            sigma /= 2.0
            n_fail = 0
    xs = np.array(pts)
    fs = np.array(vals)
    if smoothing > 0 and len(vals) >= d + 2:
        k = int(np.argmin(_CubicRBF(xs, fs, smoothing)(xs)))
    else:
        k = int(np.argmin(fs))
    return OptimizerResult(xs[k].copy(), float(fs[k]), 0, 0, it, converged, message)


def _unit_scale(v: np.ndarray) -> np.ndarray:
    lo, hi = float(np.min(v)), float(np.max(v))
    if hi - lo <= 0:
        return np.ones_like(v)
    return (v - lo) / (hi - lo)
