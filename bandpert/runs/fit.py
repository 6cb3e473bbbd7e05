"""Fit parameters of a material file to target quantities by weighted least squares.

The residual of target i is r_i = (model_i − value_i)/tolerance_i, minimised over the named
parameters (dotted keys of the file, as in a sweep) by :func:`scipy.optimize.least_squares`
(trust-region reflective, which keeps every iterate strictly inside its bounds) within the range
each key accepts (:func:`bandpert.input.key_ranges.key_range`, the range the readers check; an
open end, such as a radius > 0, kept a margin inside). The Jacobian comes from first-order
perturbation theory (Hellmann–Feynman,
:meth:`~bandpert.physics.fit_targets.TargetModel.energy_derivatives`: energies, and masses
through their stencils); it is taken at the parameters of a residual evaluation, whose
eigenpairs it reuses (:meth:`Fit.evaluate` keeps the last few, keyed by the parameter vector).
Its differences in a parameter (∂H/∂p, and the targets without a Hellmann–Feynman row) are
central, [f(p + δ) − f(p − δ)]/2δ, except within δ of a bound, where they are one-sided of the
same order, [−3f(p) + 4f(p + δ) − f(p + 2δ)]/2δ (or its mirror), so no step leaves the range
(:meth:`Fit.differences`). Where a parameter splits a degenerate level at first order (a
spin–orbit strength at 0) the sorted bands have a kink and their Hellmann–Feynman row is the
one-sided derivative least squares can use: for p increasing inside the range and at a lower
bound, for p decreasing at an upper bound (:class:`~bandpert.physics.fit_states.ParameterSlopes`).

A parameter that ends within :data:`AT_BOUND_RTOL` of the range's width of a bound is set on
the bound and reported as at its bound: the targets pull it beyond what its key accepts. Its
uncertainty means nothing (reported as none); the statistics of the others are those with it
held there. At the solution, with J the Jacobian of r over the parameters not at a bound and
J = U S Vᵀ: the rank is the number of singular values above :data:`RANK_RTOL` × the largest;
the covariance of the parameters is V S⁻² Vᵀ over those (the tolerances taken as standard
deviations), giving the uncertainties and correlations; a parameter with a weight above 0.3 on a
dropped singular vector is reported as not determined by the targets (W. H. Press et al.,
Numerical Recipes, 3rd ed. 2007, §15.4.2, SVD solution of least squares; from memory).
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.optimize

from ..errors import InputError
from ..input.key_ranges import KeyRange, key_range
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

#: Distance from a bound, as a fraction of the range's width (of max(1, |bound|) for a
#: half-open range), within which a fitted parameter counts as at its bound.
AT_BOUND_RTOL = 1e-6

#: One difference column: the material at the upper and the lower point and half their
#: distance in the parameter (the column is [f(upper) − f(lower)]/(2 × that)).
Pair = tuple[Material, Material, float]

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
        followed conduction minimum that is no longer its band's lowest), and the parameters
        that ended at a bound of their range.
    ranges : tuple of KeyRange
        The accepted range of each parameter's key.
    at_bound : tuple of str
        Per parameter: "lower" or "upper" when it ended at that bound of its range, else "".
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
    ranges: tuple[KeyRange, ...] = ()
    at_bound: tuple[str, ...] = ()

    @property
    def keys_at_bound(self) -> tuple[str, ...]:
        """The keys of the parameters that ended at a bound."""
        return tuple(k for k, side in zip(self.keys, self.at_bound, strict=False) if side)


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
        ranges = []
        for i, key in enumerate(spec.parameters):
            try:
                ranges.append(key_range(key, self.document))
            except InputError as exc:
                raise InputError(f"cannot be fitted ({key} {exc.problem})", spec.source or None,
                                 f"parameters[{i}]") from None
        self.ranges = tuple(ranges)
        inner = np.array([r.inner() for r in self.ranges]).reshape(-1, 2)
        self.lower, self.upper = inner[:, 0], inner[:, 1]
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

    def pinned_document(self, p: np.ndarray) -> dict[str, Any]:
        """The document at ``p`` with ``basis.cutoff_eV`` set to the fit's cutoff: the targets
        were met on that cutoff's plane waves, and without it a run of the written file would
        take the converged cutoff of the new parameters and miss them."""
        doc = self.document_at(p)
        doc.setdefault("basis", {})["cutoff_eV"] = self.targets.cutoff_eV
        return doc

    def material(self, p: np.ndarray) -> Material:
        """The material at parameters ``p``. The bounds keep every key in its own range; a
        trial step that breaks a constraint between keys (atoms closer than the reader allows,
        a form factor above the limit of a lattice constant being fitted) is the fit's doing,
        not the file's, and is named as such (in the targets file's terms)."""
        try:
            return parse_material(self.document_at(p), self.source)
        except InputError as exc:
            key = next((k for k in self.spec.parameters if exc.key is not None and (
                k == exc.key or k.startswith(exc.key + "["))), None)
            if key is None or np.array_equal(p, self.start):
                raise
            i = self.spec.parameters.index(key)
            raise InputError(f"a trial step of the fit moved {key} to a value the file refuses "
                             f"({exc.problem}); expected targets these parameters reach inside "
                             "the accepted ranges, a closer start, or this parameter held fixed",
                             self.spec.source or None, f"parameters[{i}]") from None

    def steps(self, p: np.ndarray) -> np.ndarray:
        return RELATIVE_STEP * np.maximum(np.abs(p), 1e-3)

    def differences(self, p: np.ndarray) -> tuple[list[Pair], np.ndarray, np.ndarray]:
        """The difference columns of the Jacobian at ``p``, how they combine, and the side of
        each.

        Central, (p + δ, p − δ, δ), where both points lie inside the bounds; else one-sided
        of second order (module docstring), as two columns (p + δ, p, δ/2) and (p + 2δ, p, δ)
        (their mirrors at an upper bound) combined 2 × first − second, δ shrunk if need be so
        that p ± 2δ stays inside.

        Returns
        -------
        pairs : list of (Material, Material, float)
            The columns (:data:`Pair`).
        combine : numpy.ndarray
            (n_columns, n_parameters): ∂f/∂p = (f-columns) @ combine.
        directions : numpy.ndarray
            (n_columns,) the side whose derivative a column stands for where a parameter splits
            a degenerate level (:class:`~bandpert.physics.fit_states.ParameterSlopes`): −1
            (p decreasing) at an upper bound, the only way the fit can move there; else +1
            (p increasing: inside the range by convention, at a lower bound by necessity).
        """
        p = np.asarray(p, dtype=float)
        base: Material | None = None
        pairs: list[Pair] = []
        weights: list[tuple[int, float]] = []
        directions: list[float] = []
        for j, step in enumerate(self.steps(p)):
            if p[j] - step >= self.lower[j] and p[j] + step <= self.upper[j]:
                up, down = p.copy(), p.copy()
                up[j] += step
                down[j] -= step
                pairs.append((self.material(up), self.material(down), float(step)))
                weights.append((j, 1.0))
                directions.append(1.0)
                continue
            if base is None:
                base = self.material(p)
            room = (self.upper[j] - p[j]) if p[j] - step < self.lower[j] else (
                p[j] - self.lower[j])
            sign = 1.0 if p[j] - step < self.lower[j] else -1.0
            step = min(step, room / 2.0)
            if step <= 0:
                raise InputError(f"the range of {self.spec.parameters[j]} is too narrow to "
                                 "difference in; expected a range wider than the parameter's "
                                 "step", self.spec.source or None, f"parameters[{j}]")
            for multiple, weight in ((1.0, 2.0), (2.0, -1.0)):
                moved = p.copy()
                moved[j] += sign * multiple * step
                far = self.material(moved)
                pairs.append((far, base, multiple * step / 2.0) if sign > 0
                             else (base, far, multiple * step / 2.0))
                weights.append((j, weight))
                directions.append(sign)
        combine = np.zeros((len(pairs), len(p)))
        for column, (j, weight) in enumerate(weights):
            combine[column, j] = weight
        return pairs, combine, np.array(directions)

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
        """∂r/∂p: Hellmann–Feynman rows for energies and masses, differences of the targets
        for any row without one; one-sided at a bound (:meth:`differences`).

        With ``finite_differences`` every row comes from differences of the targets (the check
        of the Hellmann–Feynman rows).
        """
        p = np.asarray(p, dtype=float)
        pairs, combine, directions = self.differences(p)
        jac = np.full((len(self.target_values), len(pairs)), np.nan)
        if not finite_differences:
            evaluation = self.evaluate(p)
            jac = self.targets.energy_derivatives(evaluation.material, pairs, evaluation,
                                                  directions)
        need = np.isnan(jac).any(axis=1)
        if need.any():
            for j, (up, down, step) in enumerate(pairs):
                diff = (self.targets.values(up, need)
                        - self.targets.values(down, need)) / (2 * step)
                jac[need, j] = diff[need]
        return (jac @ combine) / self.tolerances[:, None]

    def bound_sides(self, p: np.ndarray) -> tuple[str, ...]:
        """Per parameter "lower", "upper" or "": within :data:`AT_BOUND_RTOL` of a bound."""
        sides = []
        for x, lo, hi in zip(p, self.lower, self.upper, strict=True):
            width = hi - lo
            near = [AT_BOUND_RTOL * (width if np.isfinite(width) else max(1.0, abs(b)))
                    for b in (lo, hi)]
            sides.append("lower" if np.isfinite(lo) and x - lo <= near[0] else
                         "upper" if np.isfinite(hi) and hi - x <= near[1] else "")
        return tuple(sides)


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

    x0 = np.clip(fit.start, fit.lower, fit.upper)  # a start within an open end's margin
    with np.errstate(all="ignore"):
        result = scipy.optimize.least_squares(
            residuals, x0, jac=fit.jacobian, bounds=(fit.lower, fit.upper), method="trf",
            x_scale="jac", xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=MAX_EVALUATIONS)
    if result.status <= 0:
        raise InputError(f"the fit did not converge in {result.nfev} evaluations (cost "
                         f"{result.cost:.4g}); expected targets the parameters can reach, or "
                         "a closer starting point", fit.source, "parameters")
    sides = fit.bound_sides(result.x)
    p = np.where([s == "lower" for s in sides], fit.lower,
                 np.where([s == "upper" for s in sides], fit.upper, result.x))
    free = np.array([not s for s in sides], dtype=bool)
    rank, sigma, corr, undetermined = _statistics(fit.jacobian(p), free, spec.parameters)
    evaluation = fit.evaluate(p)
    model_values = evaluation.values
    residual = (model_values - fit.target_values) / fit.tolerances
    doc = fit.pinned_document(p)
    doc["source"] = _fitted_source(str(document.get("source", "")), spec)
    doc["note"] = _fitted_note(str(document.get("note", "")), spec)
    warnings = (*moved_minima(fit.targets, evaluation.material),
                *_bound_warnings(spec.parameters, sides, p))
    if warnings:  # the written file says it too
        doc["note"] = " ".join([str(doc.get("note", "")), "Fit warning:", *warnings]).strip()
    return FitResult(keys=spec.parameters, start=fit.start, values=p, uncertainties=sigma,
                     correlations=corr, rank=rank, undetermined=undetermined,
                     target_values=fit.target_values, model_values=model_values,
                     residuals=residual, cost=0.5 * float(residual @ residual),
                     evaluations=fit.state.evaluations, document=doc, warnings=warnings,
                     ranges=fit.ranges, at_bound=sides)


def _statistics(jac: np.ndarray, free: np.ndarray, keys: tuple[str, ...]
                ) -> tuple[int, np.ndarray, np.ndarray, tuple[str, ...]]:
    """Rank, uncertainties, correlations and undetermined keys from the Jacobian over the
    ``free`` parameters (module docstring); NaN for the others (at a bound)."""
    n = len(keys)
    sigma = np.full(n, np.nan)
    corr = np.full((n, n), np.nan)
    idx = np.flatnonzero(free)
    if not len(idx):
        return 0, sigma, corr, ()
    _, s_some, vt = np.linalg.svd(jac[:, idx], full_matrices=True)  # vt: every free direction
    s = np.zeros(len(idx))
    s[:len(s_some)] = s_some
    keep = s > RANK_RTOL * s.max() if s.max() > 0 else np.zeros(s.shape, bool)
    rank = int(keep.sum())
    cov = (vt[keep].T / s[keep] ** 2) @ vt[keep]
    sub = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    undetermined = tuple(keys[j] for col, j in enumerate(idx)
                         if np.any(np.abs(vt[~keep][:, col]) > 0.3)) if rank < len(idx) else ()
    sub = np.array([np.nan if keys[j] in undetermined else x
                    for j, x in zip(idx, sub, strict=True)])
    sigma[idx] = sub
    with np.errstate(all="ignore"):
        corr[np.ix_(idx, idx)] = cov / np.outer(sub, sub)
    return rank, sigma, corr, undetermined


def _bound_warnings(keys: tuple[str, ...], sides: tuple[str, ...], p: np.ndarray
                    ) -> tuple[str, ...]:
    """One line per parameter that ended at a bound."""
    return tuple(f"{k} ended at the {side} bound of its accepted range ({x:g}): the targets pull "
                 "it beyond what its key accepts, so its uncertainty is not meaningful (the "
                 "others' are with it held there)."
                 for k, side, x in zip(keys, sides, p, strict=True) if side)


def _fitted_note(note: str, spec: FitSpec) -> str:
    """The new file's note: what the fit changed before the starting file's own words (which
    may describe the parameters as they were)."""
    head = (f"Parameters {', '.join(spec.parameters)} fitted by bandpert fit at the cutoff "
            "below (source: the targets); a model estimate, not a measured band structure.")
    return f"{head} The starting file's note, written before the fit: {note}" if note else head


def _fitted_source(source: str, spec: FitSpec) -> str:
    """The new file's source: the old one, the fitted keys, every target and its source."""
    targets = "; ".join(f"{t.name} = {t.value:g} ± {t.tolerance:g} {t.unit} ({t.source})"
                        for t in spec.targets)
    return (f"{source}; {', '.join(spec.parameters)} fitted by bandpert fit to: {targets}")
