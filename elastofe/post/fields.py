"""Reactions, equilibrium, strain energy and stresses of one solved load case or combination."""
from __future__ import annotations

from typing import Optional

import numpy as np

from ..bc import split_reactions
from ..case.schema import Case
from ..regions import model_size
from ..result import CaseResult, Model
from .recovery import principal, von_mises

__all__ = ["case_fields", "thermal_stress_offset"]


def thermal_stress_offset(case: Case) -> float:
    """``(3λ + 2μ) α`` [stress / K]: what a unit temperature rise takes off each normal stress."""
    lam, mu = case.material.lame
    return (3 * lam + 2 * mu) * (case.material.expansion or 0.0)


def case_fields(case: Case, model: Model, *, name: str, kind: str, factors: dict, loads: tuple,
                u: np.ndarray, Ku: np.ndarray, f: np.ndarray, stress: np.ndarray,
                temperature: Optional[np.ndarray], thermal_done: bool = False,
                element_stress: Optional[np.ndarray] = None) -> tuple[CaseResult, Optional[np.ndarray]]:
    """The :class:`CaseResult` of one displacement field (points and lines not yet sampled).

    Parameters
    ----------
    u : (3n,) [length] displacements; ``Ku`` (3n,) [force] the stiffness (elastic supports
        included) times ``u``; ``f`` (3n,) [force] the applied loads.
    stress : (n, 6) [stress] nodally averaged stress of the elastic strain of ``u``.
    temperature : (n,) [K] or None. Unless ``thermal_done``, the thermal part
        ``(3λ + 2μ) α ΔT`` is taken out of the normal stresses (and of ``element_stress``).

    Returns
    -------
    (CaseResult, element_stress with the thermal part taken out, or None)
    """
    mesh = model.mesh
    pts = mesh.points
    stress = np.array(stress, dtype=float, copy=True)
    therm = thermal_stress_offset(case)
    if temperature is not None and therm and not thermal_done:
        # Thermal strain out of the elastic strain: sigma = D (eps - alpha dT I).
        stress[:, :3] -= (therm * temperature)[:, None]
        if element_stress is not None:
            element_stress = element_stress.copy()
            element_stress[..., :3] -= (therm * temperature[mesh.cells])[..., None]
    r = (Ku - f).reshape(-1, 3)
    nodal, per = split_reactions(model.held, pts, r, len(case.supports))
    for fd in model.foundations:  # an elastic support pushes back with -K_s u
        per[fd.index] = -(fd.K @ u).reshape(-1, 3)
        nodal = nodal + per[fd.index]
    reactions: dict = {}
    for i, s in enumerate(case.supports):
        Ri = per[i]
        entry = reactions.setdefault(s.region, {"force": np.zeros(3), "moment": np.zeros(3)})
        entry["force"] = entry["force"] + Ri.sum(axis=0)
        entry["moment"] = entry["moment"] + np.cross(pts, Ri).sum(axis=0)
        if getattr(s, "moment_about", None) is not None:
            P = np.asarray(s.moment_about)
            entry["about"] = P
            entry["moment_about"] = entry.get("moment_about", np.zeros(3)) + np.cross(pts - P, Ri).sum(axis=0)
    F3 = f.reshape(-1, 3)
    F_app = F3.sum(axis=0)
    M_app = np.cross(pts, F3).sum(axis=0)
    R_tot = nodal.sum(axis=0)
    M_R = np.cross(pts, nodal).sum(axis=0)
    denom = max(np.linalg.norm(F_app), np.abs(nodal).sum(axis=0).max(), np.abs(F3).sum(axis=0).max(), 1e-300)
    eq = float(np.linalg.norm(R_tot + F_app) / denom)
    eq_m = float(np.linalg.norm(M_R + M_app) / (denom * max(model_size(mesh), 1e-300)))
    energy = 0.5 * float(u @ Ku)
    cr = CaseResult(name=name, kind=kind, factors=dict(factors), loads=tuple(loads), u=u.reshape(-1, 3),
                    stress=stress, von_mises=von_mises(stress), principal=principal(stress),
                    temperature=temperature, reaction_nodal=nodal, reactions=reactions,
                    applied_force=F_app, applied_moment=M_app, equilibrium_error=eq,
                    moment_equilibrium_error=eq_m, strain_energy=energy)
    return cr, element_stress
