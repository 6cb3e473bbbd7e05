"""Γ8 Luttinger parameters with spin–orbit: sum over states against the bands themselves."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled

from bandpert.physics.spinor_sos import gamma8_luttinger_sum_over_states
from bandpert.planewave.model import centred_model
from bandpert.planewave.solver import exact_energies
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C

#: A basis small enough for a fast test: the identity holds for any fixed basis.
CUTOFF_EV = 80.0


def pair_curvatures(material, direction, h_frac):
    """m0/m of the heavy and light holes (Kramers-pair means) along a direction by second
    differences at ±h, ±2h combined by Richardson extrapolation (error O(h⁴))."""
    model = centred_model(material, CUTOFF_EV, np.zeros(3), spin_orbit=True)
    n = material.valence_electrons
    d = np.asarray(direction, float) / np.linalg.norm(direction)
    h = h_frac * 2 * np.pi / material.a_A
    steps = np.array([-2, -1, 0, 1, 2])[:, None] * h * d
    e = exact_energies(model, steps, n)
    pairs = (e[:, n - 4:n:2] + e[:, n - 3:n:2]) / 2  # (light, heavy) Kramers-pair means
    c1 = (pairs[1] + pairs[3] - 2 * pairs[2]) / h**2
    c2 = (pairs[0] + pairs[4] - 2 * pairs[2]) / (2 * h) ** 2
    curvature = (4 * c1 - c2) / 3
    heavy, light = sorted(-curvature / (2 * C))
    return heavy, light


@pytest.mark.parametrize("name", ["silicon-spin-orbit", "germanium-spin-orbit",
                                  "gallium-arsenide-spin-orbit"])
def test_gamma8_luttinger_by_sum_over_states_equals_the_bands(name):
    # source: Löwdin partitioning / Luttinger & Kohn, Phys. Rev. 97, 869 (1955): the
    # second-order sum over every state of the basis is the exact curvature of the model at Γ;
    # m0/m = γ1 ∓ 2γ2 along [001], γ1 ∓ 2γ3 along [111] (J. M. Luttinger, Phys. Rev. 102, 1030
    # (1956)); GaAs compared through Kramers-pair means (the k-linear splitting of zincblende)
    material = bundled(name)
    sos = gamma8_luttinger_sum_over_states(material, CUTOFF_EV)
    g1, g2, g3 = sos.gammas
    hh, lh = pair_curvatures(material, [1, 0, 0], 5e-4)
    assert (hh + lh) / 2 == pytest.approx(g1, rel=1e-4)
    assert (lh - hh) / 4 == pytest.approx(g2, rel=1e-4)
    hh, lh = pair_curvatures(material, [1, 1, 1], 5e-4)
    assert (lh - hh) / 4 == pytest.approx(g3, rel=1e-4)
    assert sos.gamma1_111 == pytest.approx(g1, rel=1e-6)  # cubic symmetry
    # [110]: m0/m = γ1 ∓ √(γ2² + 3γ3²) (Luttinger 1956, from memory)
    hh, lh = pair_curvatures(material, [1, 1, 0], 5e-4)
    assert (lh - hh) / 2 == pytest.approx(np.sqrt(g2**2 + 3 * g3**2), rel=1e-4)
