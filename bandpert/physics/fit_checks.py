"""Checks of a fitted model that its targets cannot see.

A target at ``"min:c1"`` follows the line of the path that held the conduction minimum when the
fit started (:mod:`bandpert.physics.fit_valley`): the line and its plane waves are fixed so that
the targets stay smooth in the parameters. The fit can therefore move another valley below the
one it follows and still meet every target, describing a minimum that is no longer the band's
lowest (a germanium fit with a kinetic factor did exactly that: its "L" masses were met while its
Δ valley at 0.92 Γ→X dropped below L). :func:`moved_minima` searches the whole path of the
fitted model again and names every such band.
"""

from __future__ import annotations

from ..input.material import Material
from .fit_targets import TargetModel
from .fit_valley import find_valley_line, search_bracket, valley_minimum

#: A minimum elsewhere on the path counts as lower than the followed one beyond this (eV): both
#: are refined on their own line's plane waves, which differ by a few plane waves at the cutoff.
MOVED_TOLERANCE_EV = 5e-3


def moved_minima(targets: TargetModel, material: Material) -> tuple[str, ...]:
    """One sentence per followed conduction minimum that is no longer the band's lowest.

    Parameters
    ----------
    targets : TargetModel
        The fit's targets (their followed lines, fixed at the start).
    material : Material
        The fitted material.

    Returns
    -------
    tuple of str
        Empty when every followed minimum is still the lowest point of its band on the path.
    """
    out = []
    for (band, named), line in targets.valleys.items():
        if named is not None:  # a valley on a named line need not be the band's lowest, but
            # it must still be a minimum: not pinned to the end of its search's bracket
            t_prev = targets.t_min[band, named]
            lo, hi = search_bracket(t_prev)
            _, t = valley_minimum(material, line, band, targets.spinor, t_prev)
            if min(abs(t - lo), abs(t - hi)) < 1e-6:
                name = f"c{band - targets.n_valence + 1}"
                out.append(f"the targets at \"min({line.name}):{name}\" followed a valley "
                           f"that the fitted model no longer has: band {name} falls to the end "
                           f"of the search around {t_prev:.3f} of {line.name} (at {t:.3f})")
            continue
        followed, t_followed = valley_minimum(material, line, band, targets.spinor,
                                              targets.t_min[band, named])
        other = find_valley_line(material, targets.cutoff_eV, band)
        lowest, t_other = valley_minimum(material, other, band, targets.spinor, other.t_start)
        if lowest < followed - MOVED_TOLERANCE_EV:
            name = f"c{band - targets.n_valence + 1}"
            out.append(
                f"the targets at \"min:{name}\" followed the minimum on {line.name} (at "
                f"{t_followed:.3f} of the line), but the fitted model's band {name} is "
                f"{1000 * (followed - lowest):.0f} meV lower on {other.name} (at "
                f"{t_other:.3f} of that line): its minimum moved, and those targets describe "
                "a valley that is no longer the lowest")
    return tuple(out)
