"""The optical spectrum of a plane-wave model: ε2 from interband momentum matrix elements on a
k-mesh, the joint density of states, ε1 by Kramers–Kronig, and the f-sum rule.

One-electron spectrum (no excitonic or local-field effects), in the long-wavelength limit, averaged
over directions (the trace over three, which for a cubic crystal is every diagonal component)
(P. Y. Yu and M. Cardona, Fundamentals of Semiconductors, Springer, ch. 6, Eqs. 6.48 and 6.55 in
Gaussian units, e² → e²/4πε0):

    ε2(E) = 4π² (e²/4πε0) (ħ²/m0)² / (Ω E_cv²) · g_s Σ_k w_k Σ_{c,v} (f_v − f_c) |⟨c|k+G|v⟩|²/3
            · δ(E_cv − E)

with p = ħ(k + G) diagonal in plane waves (the velocity of the local model is p/m0; of any
model (1/ħ)∂H/∂k, :mod:`~bandpert.physics.optics_velocity`, which replaces k + G), Ω the cell
volume, g_s = 2 electrons per spinless band and E_cv = E_c − E_v; the 1/E_cv² sits inside the sum
so that the broadened spectrum stays finite at E → 0. Every δ is a Gaussian exp(−x²/σ²)/(σ√π),
laid onto a uniform grid by linear binning and a discrete convolution. The effective electron
number n_eff(E) = Ω/(2π² (e²/4πε0) ħ²/m0) ∫_0^E E' ε2(E') dE' tends to the valence count (the
Thomas–Reiche–Kuhn f-sum rule, ∫ ω ε2 dω = (π/2) ω_p²; for a k-dependent H(k) its generalisation,
:mod:`~bandpert.physics.optics_velocity`); for a metal the intraband (Drude) weight
completes it: g_s Σ_n ∫ δ(E_n − E_F) (m0/ħ²)|∇E_n|²/3 dk/V_zone, integrated by parts over the
periodic zone into g_s Σ_n ∫ f_n (m0/m*_n) dk/V_zone, the occupied-region integral of the
direction-averaged inverse effective mass (N. W. Ashcroft and N. D. Mermin, Solid State Physics
(1976), ch. 1 for the Drude weight ω_p² = 4πne²/m and ch. 13 for Bloch electrons, from memory),
with f_n the linear-tetrahedron occupations (:func:`~bandpert.physics.tetrahedra.occupations`)
that also occupy the interband transitions.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..units import COULOMB_EV_A, HBAR2_OVER_2M0_EV_A2

#: ħ²/m0 in eV·Å².
HBAR2_OVER_M0_EV_A2 = 2.0 * HBAR2_OVER_2M0_EV_A2

#: Levels closer than this (eV) to their neighbour form one group at that k: no transition
#: inside a group is counted as interband (with linear-tetrahedron occupations such a pair can be
#: partly filled on both sides; its weight belongs to the intraband, Drude, part, whose band
#: curvature is averaged over the group in the same way).
INTRABAND_EV = 0.01

#: The Gaussian kernel is cut this many widths from its centre.
KERNEL_WIDTHS = 6.0


@dataclass(frozen=True)
class OpticalSums:
    """Transition sums accumulated over k-points (what the spectrum is made of).

    Attributes
    ----------
    grid_eV : numpy.ndarray
        (n_E,) uniform energy grid from 0.
    strength : numpy.ndarray
        (n_E,) Σ w (f_v − f_c) S_cv / E_cv², linearly binned on the grid (Å⁻² eV⁻², per bin).
    joint : numpy.ndarray
        (n_E,) Σ w (f_v − f_c), binned (the joint DOS before broadening, per bin).
    f_sum : float
        g_s Σ w (f_v − f_c) 2(ħ²/m0) S_cv / E_cv: the interband effective electron number of
        every pair, without broadening or grid.
    inverse_cube : float
        Σ w (f_v − f_c) S_cv / E_cv³ (Å⁻² eV⁻³), for ε1(0) directly.
    """

    grid_eV: np.ndarray
    strength: np.ndarray
    joint: np.ndarray
    f_sum: float
    inverse_cube: float


def level_groups(energies_eV: np.ndarray) -> np.ndarray:
    """(n_k, n_b) group number of each level: runs of levels spaced by ≤ :data:`INTRABAND_EV`."""
    e = np.asarray(energies_eV, dtype=float)
    new = np.ones(e.shape, dtype=np.int64)
    new[:, 1:] = np.diff(e, axis=1) > INTRABAND_EV
    return np.cumsum(new, axis=1) - 1


def _bin(grid_eV: np.ndarray, x: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Linear binning of values v at energies x onto a uniform grid (keeps Σv and Σvx)."""
    h = grid_eV[1] - grid_eV[0]
    pos = (x - grid_eV[0]) / h
    j = np.floor(pos).astype(np.int64)
    t = pos - j
    n = len(grid_eV)
    inside = (j >= 0) & (j < n - 1)
    out = np.bincount(j[inside], (1 - t[inside]) * v[inside], minlength=n)
    out += np.bincount(j[inside] + 1, t[inside] * v[inside], minlength=n)
    return out[:n]


def accumulate(grid_eV: np.ndarray, energies_eV: np.ndarray, momentum_invA: np.ndarray,
               weights: np.ndarray, occupations: np.ndarray, electrons_per_band: int,
               sums: OpticalSums | None = None) -> OpticalSums:
    """Add a block of k-points to the transition sums.

    Parameters
    ----------
    grid_eV : numpy.ndarray
        (n_E,) uniform grid starting at 0.
    energies_eV : numpy.ndarray
        (n_k, n_b) levels, ascending at each k.
    momentum_invA : numpy.ndarray
        (n_k, d, n_b, n_b) (m0/ħ²)⟨n|∂H/∂k|m⟩ (Å⁻¹): ⟨n|k+G|m⟩ for a local model with β = 1
        (:mod:`~bandpert.physics.optics_velocity`).
    weights : numpy.ndarray
        (n_k,) k-point weights (summing to 1 over the whole mesh).
    occupations : numpy.ndarray
        (n_k, n_b) f of each level.
    electrons_per_band : int
        g_s.
    sums : OpticalSums, optional
        The sums so far.

    Returns
    -------
    OpticalSums
    """
    e = np.asarray(energies_eV, dtype=float)
    s = np.sum(np.abs(momentum_invA) ** 2, axis=1) / momentum_invA.shape[1]  # (n_k, n, m)
    gap = e[:, None, :] - e[:, :, None]  # [k, n, m] = E_m − E_n
    df = occupations[:, :, None] - occupations[:, None, :]
    group = level_groups(e)
    pair = (group[:, None, :] != group[:, :, None]) & (gap > 0) & (df > 0)
    k_idx, _, _ = np.nonzero(pair)
    w = weights[k_idx] * df[pair]
    x = gap[pair]
    sp = s[pair]
    g = electrons_per_band
    strength = _bin(grid_eV, x, w * sp / x**2)
    joint = _bin(grid_eV, x, w)
    f_sum = g * float(np.sum(w * 2.0 * HBAR2_OVER_M0_EV_A2 * sp / x))
    inverse_cube = float(np.sum(w * sp / x**3))
    if sums is not None:
        strength += sums.strength
        joint += sums.joint
        f_sum += sums.f_sum
        inverse_cube += sums.inverse_cube
    return OpticalSums(grid_eV, strength, joint, f_sum, inverse_cube)


def gaussian_broaden(grid_eV: np.ndarray, binned: np.ndarray, broadening_eV: float) -> np.ndarray:
    """Binned weights → a density: convolution with exp(−x²/σ²)/(σ√π) on the grid (per eV)."""
    h = grid_eV[1] - grid_eV[0]
    m = int(np.ceil(KERNEL_WIDTHS * broadening_eV / h))
    x = np.arange(-m, m + 1) * h
    kernel = np.exp(-((x / broadening_eV) ** 2))
    kernel /= kernel.sum() * h
    return np.convolve(binned, kernel, mode="same")


def kramers_kronig(grid_eV: np.ndarray, eps2: np.ndarray) -> np.ndarray:
    """ε1(E) = 1 + (2/π) P∫_0^∞ E' ε2(E') / (E'² − E²) dE' on a uniform grid from 0.

    Kramers–Kronig relation (Yu & Cardona, Fundamentals of Semiconductors, Eq. 6.51). The
    principal value is taken by subtracting the pole: the integrand
    [E'ε2(E') − Eε2(E)]/(E'² − E²) is regular (trapezoid rule, its limit at E' = E from the
    derivative of E'ε2), and Eε2(E) P∫_0^M dE'/(E'² − E²) = ε2(E)/2 · ln|(M − E)/(M + E)|
    in closed form; ε2 is taken as 0 beyond the grid's end M.
    """
    e = np.asarray(grid_eV, dtype=float)
    f = e * np.asarray(eps2, dtype=float)
    h = e[1] - e[0]
    top = e[-1]
    slope = np.gradient(f, h)
    wts = np.full(len(e), h)
    wts[0] = wts[-1] = h / 2
    out = np.empty(len(e))
    block = max(1, 2**22 // len(e))
    for s in range(0, len(e), block):
        ei = e[s:s + block, None]
        num = f[None, :] - f[s:s + block, None]
        den = e[None, :] ** 2 - ei**2
        with np.errstate(divide="ignore", invalid="ignore"):
            g = num / den
        rows = np.arange(len(ei))
        pole = s + rows
        safe = np.where(e[pole] > 0, e[pole], 1.0)
        g[rows, pole] = np.where(e[pole] > 0, slope[pole] / (2 * safe), 0.0)
        regular = g @ wts
        inner = (ei[:, 0] > 0) & (ei[:, 0] < top)  # at the end point ε2 is taken as 0
        with np.errstate(divide="ignore", invalid="ignore"):
            log = np.where(inner, np.log(np.abs((top - ei[:, 0]) / (top + ei[:, 0]))), 0.0)
        singular = np.where(ei[:, 0] > 0, f[s:s + block] / (2 * safe) * log, 0.0)
        out[s:s + block] = 1.0 + (2.0 / np.pi) * (regular + singular)
    return out


def eps2_prefactor(volume_A3: float, electrons_per_band: int) -> float:
    """4π² (e²/4πε0) (ħ²/m0)² g_s / Ω: ε2 = prefactor · Σ w Δf S/E² δ (eV² Å²)."""
    return (4.0 * np.pi**2 * COULOMB_EV_A * HBAR2_OVER_M0_EV_A2**2 * electrons_per_band
            / volume_A3)


def n_eff_factor(volume_A3: float) -> float:
    """Ω / (2π² (e²/4πε0) ħ²/m0): n_eff = factor · ∫ E ε2 dE."""
    return volume_A3 / (2.0 * np.pi**2 * COULOMB_EV_A * HBAR2_OVER_M0_EV_A2)


def occupations(energies_eV: np.ndarray, fermi_level_eV: float | None,
                n_occupied: int | None) -> np.ndarray:
    """f of each level: the lowest ``n_occupied`` bands filled (insulator), else f = θ(E_F − E)."""
    e = np.asarray(energies_eV, dtype=float)
    if n_occupied is not None:
        f = np.zeros_like(e)
        f[:, :n_occupied] = 1.0
        return f
    return (e <= fermi_level_eV).astype(float)
