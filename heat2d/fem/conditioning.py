"""A cheap lower estimate of the reduced conduction matrix's condition number, and the
warning the solve gives when round-off at that condition would show in the figures."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..errors import ModelError

if TYPE_CHECKING:
    import scipy.sparse as sp

    from .assembly import System

ILL_CONDITIONED_ROUNDOFF = 1e-6
"""Warn when the condition estimate times machine epsilon exceeds this: reported figures
then carry round-off above the 1e-6 to which the energy balance is otherwise checked."""
EPS = float(np.finfo(float).eps)
ROUNDOFF_CAP = 1e-5
"""In an ill-conditioned system Newton stops at a change of κε of the largest |T| (the
round-off of its solves, :func:`roundoff`), at most this fraction of it."""


def conditioning(system: System, Kf: sp.csr_matrix, free: np.ndarray,
                 diag: np.ndarray | None = None) -> tuple[float, str | None]:
    """A cheap lower estimate of the condition number of the reduced matrix, and a
    warning when round-off at that condition reaches :data:`ILL_CONDITIONED_ROUNDOFF`.

    For the constant vector v = 1/√n over the n free nodes, vᵀ K_ff v = G/n, where G is
    the conductance from the free nodes to the outside (convection ∫h dS and coupling
    to fixed nodes), so λ_min ≤ G/n; λ_max ≥ max diag K_ff. κ ≥ n max diag K_ff / G.
    G is summed from the boundary terms themselves, not from row sums of K (those cancel
    to round-off when conductivities are large).

    Parameters
    ----------
    system
        The assembled system.
    Kf
        Rows of K at the free nodes: all columns, or (with ``diag``) the columns of the
        fixed nodes only.
    free
        Mask of the free nodes.
    diag
        The diagonal of K_ff, if known (then ``Kf`` needs only the fixed columns).

    Returns
    -------
    kappa, note
        The estimate, and the warning text or None.
    """
    n = int(free.sum())
    h = np.nan_to_num(system.edge["h"])
    coupling = Kf if diag is not None else Kf[:, ~free]
    ground = float(np.abs(coupling).sum() + (h * system.layout.edge_load.sum(axis=1)).sum())
    if diag is None:
        diag = Kf[:, free].diagonal()
    top = float(diag.max()) if len(diag) else 0.0
    if ground <= 0 or top <= 0 or not np.isfinite(ground * top):
        return np.inf, None
    kappa = n * top / ground
    if kappa * EPS <= ILL_CONDITIONED_ROUNDOFF:
        return kappa, None
    k = np.maximum(system.kx, system.ky)
    material = system.model.materials[system.mesh.triangle_material[np.argmax(k)]]
    return kappa, (f"ill-conditioned system: conductances span at least {kappa:.0e} "
                   f"(conductivity up to {k.max():g} W/(m·K) in material \"{material.name}\" "
                   f"against {ground:.2g} W/K to the boundaries); figures may carry round-off "
                   f"of {kappa * EPS:.0e} relative")


def refusal(system: System, note: str, reason: str) -> ModelError:
    """The bad-input error for a solve that failed in a system ``note`` (from
    :func:`conditioning`) calls ill-conditioned: it names the most conducting material."""
    k = np.maximum(system.kx, system.ky)
    material = system.model.materials[system.mesh.triangle_material[np.argmax(k)]]
    return ModelError(f"{note.replace('figures may carry', 'the solve fails with')} ({reason})",
                      file=system.model.source, entry=f"material \"{material.name}\"")


def roundoff(system: System, free: np.ndarray) -> tuple[float, str | None]:
    """The relative change below which Newton cannot go in this system: κε (at most
    :data:`ROUNDOFF_CAP`) when :func:`conditioning` calls it ill-conditioned, else 0;
    and the ill-conditioning note or None."""
    K = system.K.tocsr()
    kappa, note = conditioning(system, K[free][:, ~free], free, K.diagonal()[free])
    return (min(kappa * EPS, ROUNDOFF_CAP) if note else 0.0), note
