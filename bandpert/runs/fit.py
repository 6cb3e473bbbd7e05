"""Fit parameters of a material file to target quantities by weighted least squares.

The residual of target i is r_i = (model_i − value_i)/tolerance_i, minimised over the named
parameters (dotted keys of the file, as in a sweep) by :func:`scipy.optimize.least_squares`
(trust-region reflective). The Jacobian comes from first-order perturbation theory
(Hellmann–Feynman, :meth:`~bandpert.physics.fit_targets.TargetModel.energy_derivatives`: energies,
and masses through their stencils); it is taken at the parameters of a residual evaluation, whose
eigenpairs it reuses (:meth:`Fit.evaluate` keeps the last few, keyed by the parameter vector).

At the solution, with J the Jacobian of r and J = U S Vᵀ: the rank is the number of singular
values above :data:`RANK_RTOL` × the largest; the covariance of the parameters is
V S⁻² Vᵀ over those (the tolerances taken as standard deviations), giving the uncertainties
and correlations; a parameter with a weight above 0.3 on a dropped singular vector is reported
as not determined by the targets (W. H. Press et al., Numerical Recipes, 3rd ed. 2007, §15.4.2,
SVD solution of least squares; from memory).
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.optimize

from ..errors import InputError
from ..input.material import Material, parse_material
from ..physics.fit_checks import moved_minima
from ..physics.fit_targets import Evaluation, FitSpec, TargetModel
from ..planewave.cutoff import converged_cutoff
from ..planewave.solver import single_blas_thread
from .sweep_spec import get_value, set_value

#: Relative singular value below which a parameter direction counts as undetermined.
RANK_RTOL = 1e-8

#: Relative step of the parameter differences (∂H/∂p and the mass targets).
RELATIVE_STEP = 1e-5

#: Most residual evaluations of one fit.
MAX_EVALUATIONS = 400

#: Evaluations kept (keyed by the parameter vector) for a Jacobian at the same parameters.
KEPT_EVALUATIONS = 4

Progress = Callable[[int, float], None]


@dataclass
class FitState:
    """The best point seen so far (kept when a fit is interrupted)."""

    parameters: np.ndarray | None = None
    cost: float = np.inf
    evaluations: int = 0


@dataclass(frozen=True)
class FitResult:
    """The outcome of a fit.

    Attributes
    ----------
    keys : tuple of str
        Dotted keys of the parameters.
    start, values : numpy.ndarray
        Parameters before and after (the file's units).
    uncertainties : numpy.ndarray
        One standard deviation each (NaN for an undetermined parameter).
    correlations : numpy.ndarray
        (n_p, n_p) correlation matrix.
    rank : int
        Rank of the Jacobian at the solution.
    undetermined : tuple of str
        Keys the targets do not determine.
    target_values, model_values : numpy.ndarray
        Per target.
    residuals : numpy.ndarray
        (model − value)/tolerance.
    cost : float
        ½ Σ r².
    evaluations : int
    document : dict
        The material document with the fitted values and a source naming the targets.
    warnings : tuple of str
        What the targets cannot see (:func:`~bandpert.physics.fit_checks.moved_minima`: a
        followed conduction minimum that is no longer its band's lowest).
    """

    keys: tuple[str, ...]
    start: np.ndarray
    values: np.ndarray
    uncertainties: np.ndarray
    correlations: np.ndarray
    rank: int
    undetermined: tuple[str, ...]
    target_values: np.ndarray
    model_values: np.ndarray
    residuals: np.ndarray
    cost: float
    evaluations: int
    document: dict = field(repr=False)
    warnings: tuple[str, ...] = ()


class Fit:
    """Residuals and Jacobian of a fit of ``spec`` to the material document ``document``."""

    def __init__(self, document: dict[str, Any], source: str, spec: FitSpec,
                 reuse: bool = True):
        self.document = copy.deepcopy(document)
        self.source = source
        self.spec = spec
        start = []
        for i, key in enumerate(spec.parameters):
            try:
                v = get_value(self.document, key, source)
            except InputError as exc:  # the key comes from the targets file: name it
                raise InputError(f"cannot be fitted in {source}: {exc.problem}",
                                 spec.source or None, f"parameters[{i}]") from None
            if isinstance(v, bool) or not isinstance(v, int | float):
                raise InputError(f"holds {type(v).__name__}, not a number; expected a numeric "
                                 "key to fit", source, key)
            start.append(float(v))
        self.start = np.array(start)
        material = self.material(self.start)
        cutoff = spec.cutoff_eV or material.cutoff_eV or converged_cutoff(
            material.local_spinless(), 8)
        try:
            with single_blas_thread():  # the minimum's line: many small eigenproblems
                self.targets = TargetModel(material, spec.targets, cutoff, reuse=reuse)
        except InputError as exc:  # a problem of the targets (or their cutoff)
            raise InputError(exc.problem, exc.source or spec.source or None, exc.key) from None
        self.target_values = np.array([t.value for t in spec.targets])
        self.tolerances = np.array([t.tolerance for t in spec.targets])
        self.state = FitState()
        self._evaluations: dict[bytes, Evaluation] = {}

    def document_at(self, p: np.ndarray) -> dict[str, Any]:
        doc = copy.deepcopy(self.document)
        for key, value in zip(self.spec.parameters, p, strict=True):
            set_value(doc, key, float(value), self.source)
        return doc

    def material(self, p: np.ndarray) -> Material:
        """The material at parameters ``p``; a trial step that leaves a key's accepted range is
        the fit's doing, not the file's, and is named as such (in the targets file's terms)."""
        try:
            return parse_material(self.document_at(p), self.source)
        except InputError as exc:
            if exc.key not in self.spec.parameters or np.array_equal(p, self.start):
                raise
            i = self.spec.parameters.index(exc.key)
            raise InputError(f"a trial step of the fit moved {exc.key} out of the range its key "
                             f"accepts ({exc.problem}); expected targets these parameters reach "
                             "inside the accepted ranges, a closer start, or this parameter held "
                             "fixed", self.spec.source or None, f"parameters[{i}]") from None

    def steps(self, p: np.ndarray) -> np.ndarray:
        return RELATIVE_STEP * np.maximum(np.abs(p), 1e-3)

    def evaluate(self, p: np.ndarray) -> Evaluation:
        """The targets at p; the last :data:`KEPT_EVALUATIONS` are kept for the Jacobian."""
        p = np.asarray(p, dtype=float)
        key = p.tobytes()
        if key in self._evaluations:
            return self._evaluations[key]
        evaluation = self.targets.evaluate(self.material(p))
        if self.targets.reuse:
            self._evaluations[key] = evaluation
            while len(self._evaluations) > KEPT_EVALUATIONS:
                del self._evaluations[next(iter(self._evaluations))]
        return evaluation

    def residuals(self, p: np.ndarray) -> np.ndarray:
        r = (self.evaluate(p).values - self.target_values) / self.tolerances
        self.state.evaluations += 1
        cost = 0.5 * float(r @ r)
        if cost < self.state.cost:
            self.state.cost, self.state.parameters = cost, np.array(p, float)
        return r

    def jacobian(self, p: np.ndarray, finite_differences: bool = False) -> np.ndarray:
        """∂r/∂p: Hellmann–Feynman rows for energies, central differences for masses.

        With ``finite_differences`` every row comes from central differences of the targets
        (the check of the Hellmann–Feynman rows).
        """
        h = self.steps(p)
        pairs = []
        for j, step in enumerate(h):
            up, down = p.copy(), p.copy()
            up[j] += step
            down[j] -= step
            pairs.append((self.material(up), self.material(down), float(step)))
        jac = np.full((len(self.target_values), len(p)), np.nan)
        if not finite_differences:
            evaluation = self.evaluate(p)
            jac = self.targets.energy_derivatives(evaluation.material, pairs, evaluation)
        need = np.isnan(jac).any(axis=1)
        if need.any():
            for j, (up, down, step) in enumerate(pairs):
                diff = (self.targets.values(up, need)
                        - self.targets.values(down, need)) / (2 * step)
                jac[need, j] = diff[need]
        return jac / self.tolerances[:, None]


def run_fit(document: dict[str, Any], source: str, spec: FitSpec,
            progress: Progress | None = None, fit: Fit | None = None) -> FitResult:
    """Fit the parameters of ``spec`` (module docstring).

    Parameters
    ----------
    document : dict
        The parsed material file.
    source : str
        Its name (messages, the new file's source).
    spec : FitSpec
        Parameters and targets (:func:`~bandpert.physics.fit_targets.parse_targets`).
    progress : callable, optional
        ``progress(evaluations, cost)`` after each residual evaluation.
    fit : Fit, optional
        A prepared :class:`Fit` (its ``state`` holds the best point if the caller interrupts).

    Returns
    -------
    FitResult

    Raises
    ------
    InputError
        When the fit does not converge within :data:`MAX_EVALUATIONS` evaluations, or a
        parameter leaves the range its key accepts.
    """
    fit = fit or Fit(document, source, spec)
    with single_blas_thread():  # many small eigenproblems: BLAS threads only contend
        return _solve(fit, spec, document, progress)


def _solve(fit: Fit, spec: FitSpec, document: dict[str, Any],
           progress: Progress | None) -> FitResult:
    """The least-squares run and the statistics of :func:`run_fit`."""

    def residuals(p: np.ndarray) -> np.ndarray:
        r = fit.residuals(p)
        if progress:
            progress(fit.state.evaluations, fit.state.cost)
        return r

    with np.errstate(all="ignore"):
        result = scipy.optimize.least_squares(
            residuals, fit.start, jac=fit.jacobian, method="trf", x_scale="jac",
            xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=MAX_EVALUATIONS)
    if result.status <= 0:
        raise InputError(f"the fit did not converge in {result.nfev} evaluations (cost "
                         f"{result.cost:.4g}); expected targets the parameters can reach, or "
                         "a closer starting point", fit.source, "parameters")
    p = result.x
    jac = fit.jacobian(p)
    _, s_some, vt = np.linalg.svd(jac, full_matrices=True)  # vt: every direction of p
    s = np.zeros(len(p))
    s[:len(s_some)] = s_some
    keep = s > RANK_RTOL * s.max() if s.max() > 0 else np.zeros(s.shape, bool)
    rank = int(keep.sum())
    cov = (vt[keep].T / s[keep] ** 2) @ vt[keep]
    sigma = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    undetermined = tuple(k for j, k in enumerate(spec.parameters)
                         if np.any(np.abs(vt[~keep][:, j]) > 0.3)) if rank < len(p) else ()
    sigma = np.array([np.nan if k in undetermined else x
                      for k, x in zip(spec.parameters, sigma, strict=True)])
    with np.errstate(all="ignore"):
        corr = cov / np.outer(sigma, sigma)
    evaluation = fit.evaluate(p)
    model_values = evaluation.values
    doc = fit.document_at(p)
    doc["source"] = _fitted_source(str(document.get("source", "")), spec)
    warnings = moved_minima(fit.targets, evaluation.material)
    if warnings:  # the written file says it too
        doc["note"] = " ".join([str(doc.get("note", "")), "Fit warning:", *warnings]).strip()
    return FitResult(keys=spec.parameters, start=fit.start, values=p, uncertainties=sigma,
                     correlations=corr, rank=rank, undetermined=undetermined,
                     target_values=fit.target_values, model_values=model_values,
                     residuals=(model_values - fit.target_values) / fit.tolerances,
                     cost=float(result.cost), evaluations=fit.state.evaluations, document=doc,
                     warnings=warnings)


def _fitted_source(source: str, spec: FitSpec) -> str:
    """The new file's source: the old one, the fitted keys, every target and its source."""
    targets = "; ".join(f"{t.name} = {t.value:g} ± {t.tolerance:g} {t.unit} ({t.source})"
                        for t in spec.targets)
    return (f"{source}; {', '.join(spec.parameters)} fitted by bandpert fit to: {targets}")
