"""Wall mechanics of the steady solve: distensible elements, lumen radius, wall stress, blood volume.

:func:`distensible_group` turns the vessels marked ``distensible`` into
elements with the square-root wall law (:mod:`vesselnet.tubelaw`);
:func:`with_wall_outputs` adds, for every vessel of a solved network, the
lumen radius at mean pressure, the radial strain, the circumferential wall
stress and the blood volume, and warns where a distensible vessel leaves
the law's range.  :func:`volume_summary` totals the volume per tag.

Choices (documented in DEVELOPERS.md):

- A tapered distensible vessel is treated as a uniform distensible tube of
  the same rigid resistance (radius (8 mu L / (pi R_taper))^(1/4)), so the
  rigid limit reproduces the rigid taper exactly; its volume is the rigid
  taper volume scaled by that tube's distension.
- A distensible vessel carrying a lesion is solved rigid (the lesion law in
  series with the rigid vessel) and a warning says so.
- Lumen radius, strain and stress are reported at the mean of the two end
  pressures; the volume integrates the law along the tube.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> wall = {"wall_thickness_m": 3e-4, "wall_modulus_pa": 1e5, "distensible": True}
>>> net = Network.build(nodes={"venule": {"pressure_pa": 1600.0}, "atrium": {"pressure_pa": 530.0}},
...     vessels=[{"id": "calf", "from": "venule", "to": "knee", "length_m": 0.3,
...               "radius_m": 0.002, **wall},
...              {"id": "thigh", "from": "knee", "to": "atrium", "length_m": 0.3,
...               "radius_m": 0.003, **wall}])
>>> result = solve(net)
>>> result.iterations, [round(float(r) * 1e3, 3) for r in result.vessel_extra["lumen_radius_m"]]
(2, [2.116, 3.14])
>>> round(volume_summary(result)["stressed_m3"] * 1e6, 3)             # mL held by pressure
1.265
"""

from __future__ import annotations

import dataclasses

import numpy as np

from .elements import ElementGroup, LinearLaw
from .model import Network
from .result import SteadyResult, laminar_warnings
from .tubelaw import (SMALL_STRAIN, DistensibleLaw, distended_radius, distensible_volume,
                      laplace_wall_stress, wall_stiffness)

WARN_LIMIT = 5
"""Vessels named per warning."""


def equivalent_radius(length_m, resistance_pa_s_m3, viscosity_pa_s):
    """Radius of the uniform tube with the given Poiseuille resistance, (8 mu L / (pi R))^(1/4) (m).

    >>> round(float(equivalent_radius(0.1, 5.5704e7, 3.5e-3)) * 1e3, 4)     # REFERENCES 1.1
    2.0
    """
    return (8.0 * np.asarray(viscosity_pa_s) * np.asarray(length_m)
            / (np.pi * np.asarray(resistance_pa_s_m3))) ** 0.25


def distensible_group(network: Network, rows: np.ndarray, viscosity_pa_s: np.ndarray,
                      resistance_pa_s_m3: np.ndarray) -> ElementGroup:
    """Element group of the distensible vessels ``rows`` (square-root wall law).

    Parameters
    ----------
    network : Network
    rows : ndarray of int
        Vessel rows, each with wall thickness and modulus.
    viscosity_pa_s, resistance_pa_s_m3 : ndarray, shape (n_vessels,)
        Viscosity and rigid (linear) resistance of every vessel; the rigid
        resistance fixes the unstressed radius of the equivalent uniform tube.

    Returns
    -------
    ElementGroup
        Kind ``vessel`` with a :class:`~vesselnet.tubelaw.DistensibleLaw`.
    """
    v = network.vessels
    mu, length = viscosity_pa_s[rows], v.length_m[rows]
    radius = equivalent_radius(length, resistance_pa_s_m3[rows], mu)
    stiffness = wall_stiffness(radius, v.wall_thickness_m[rows], v.wall_modulus_pa[rows],
                               v.wall_poisson[rows])
    law = DistensibleLaw(radius, stiffness, v.external_pressure_pa[rows], mu, length)
    return ElementGroup("vessel", rows, v.from_node[rows], v.to_node[rows],
                        np.full(len(rows), np.nan), law)


def rigid_groups(groups) -> list[ElementGroup]:
    """``groups`` with every distensible law replaced by the rigid tube at its unstressed radius.

    Its solution starts Newton's method on the distensible network.
    """
    out = []
    for g in groups:
        if isinstance(g.law, DistensibleLaw):
            law = g.law
            g = dataclasses.replace(g, law=LinearLaw(np.pi * law.radius_m**4
                                                     / (8.0 * law.viscosity_pa_s * law.length_m)))
        out.append(g)
    return out


def taper_volume(length_m, radius_in_m, radius_out_m):
    """Volume of a linearly tapered tube, pi L (r0^2 + r0 r1 + r1^2) / 3 (m^3).

    >>> round(float(taper_volume(0.1, 0.002, 0.002)) * 1e6, 4)             # pi r^2 L, mL
    1.2566
    """
    r0, r1 = np.asarray(radius_in_m, dtype=float), np.asarray(radius_out_m, dtype=float)
    return np.pi * np.asarray(length_m) * (r0 * r0 + r0 * r1 + r1 * r1) / 3.0


def wall_state(network: Network, pressure_pa: np.ndarray, groups) -> dict[str, np.ndarray]:
    """Per-vessel wall results (SI) at nodal pressures ``pressure_pa``.

    Returns
    -------
    dict
        ``lumen_radius_m`` (at the mean end pressure), ``wall_strain``
        (r/r0 - 1 there; NaN for rigid vessels), ``wall_stress_pa`` (Laplace,
        mean transmural pressure; NaN without a wall thickness) and
        ``volume_m3``.  Where pressures are undetermined (parts cut off),
        the unstressed geometry.
    """
    v = network.vessels
    p_a, p_b = pressure_pa[v.from_node], pressure_pa[v.to_node]
    known = np.isfinite(p_a) & np.isfinite(p_b)
    transmural = np.where(known, 0.5 * (p_a + p_b), 0.0) - v.external_pressure_pa
    radius = 0.5 * (v.radius_in_m + v.radius_out_m)
    volume = taper_volume(v.length_m, v.radius_in_m, v.radius_out_m)
    strain = np.full(len(v), np.nan)
    for g in groups:
        if not isinstance(g.law, DistensibleLaw):
            continue
        rows, law = g.rows, g.law
        k_mean = wall_stiffness(radius[rows], v.wall_thickness_m[rows], v.wall_modulus_pa[rows],
                                v.wall_poisson[rows])
        strain[rows] = np.where(known[rows], transmural[rows] / k_mean, 0.0)
        lumen = distended_radius(radius[rows], k_mean, np.where(known[rows], transmural[rows], 0.0))
        swell = distensible_volume(np.where(known[rows], p_a[rows], law.external_pa),
                                   np.where(known[rows], p_b[rows], law.external_pa),
                                   law.radius_m, law.stiffness_pa, law.external_pa,
                                   law.length_m) / (np.pi * law.radius_m**2 * law.length_m)
        radius[rows] = lumen
        volume[rows] = volume[rows] * swell
    stress = np.where(known, laplace_wall_stress(transmural, radius, v.wall_thickness_m), np.nan)
    return {"lumen_radius_m": radius, "wall_strain": strain, "wall_stress_pa": stress,
            "volume_m3": volume}


def wall_warnings(network: Network, pressure_pa: np.ndarray, groups) -> list[str]:
    """Warnings for distensible vessels outside the square-root law's range.

    Negative transmural pressure at either end (the vessel collapses, which
    the linear law does not describe) and radial strain beyond
    :data:`~vesselnet.tubelaw.SMALL_STRAIN` at either end.
    """
    v = network.vessels
    out: list[str] = []
    collapse, strained = [], []
    for g in groups:
        if isinstance(g.law, DistensibleLaw):
            law = g.law
            ends = np.stack([pressure_pa[g.a], pressure_pa[np.maximum(g.b, 0)]]) - law.external_pa
            low = np.nanmin(ends, axis=0)
            strain = np.nanmax(np.abs(ends), axis=0) / law.stiffness_pa
            collapse += [(float(low[i]), int(g.rows[i])) for i in np.flatnonzero(low < 0)]
            strained += [(-float(strain[i]), int(g.rows[i]))
                         for i in np.flatnonzero(strain > SMALL_STRAIN)]
        elif g.kind == "vessel":
            dropped = g.rows[v.distensible[g.rows]]
            if len(dropped):
                out.append(f"{len(dropped)} distensible vessel(s) carry a lesion and were solved "
                           f"rigid (the wall law is not combined with a lesion): {_named(v, dropped)}")
    if collapse:
        collapse.sort()
        rows = [r for _, r in collapse]
        worst = ", ".join(f"'{v.ids[r]}' ({t / 133.322387415:.1f} mmHg)" for t, r in collapse[:WARN_LIMIT])
        out.append(f"negative transmural pressure in {len(rows)} distensible vessel(s), lowest "
                   f"{worst}: the vessel collapses and the linear wall law does not hold there; "
                   "check the external pressure, or treat the vessel as rigid")
    if strained:
        strained.sort()
        worst = ", ".join(f"'{v.ids[r]}' ({-s:.0%})" for s, r in strained[:WARN_LIMIT])
        out.append(f"radial strain above {SMALL_STRAIN:.0%} (the small-strain range of the linear "
                   f"wall law) in {len(strained)} distensible vessel(s): {worst}; the real wall "
                   "stiffens there, so radius and flow are overestimated")
    return out


def _named(v, rows) -> str:
    text = ", ".join(f"'{v.ids[r]}'" for r in rows[:WARN_LIMIT])
    return text + (f" and {len(rows) - WARN_LIMIT} more" if len(rows) > WARN_LIMIT else "")


def with_wall_outputs(result: SteadyResult, groups) -> SteadyResult:
    """``result`` with the wall results in ``vessel_extra`` and the wall warnings added.

    The velocity, wall shear stress and Reynolds number of the result then
    use the distended lumen radius; the laminar-range warning is redone with it.
    """
    network = result.network
    extra = dict(result.vessel_extra)
    extra.update(wall_state(network, result.pressure_pa, groups))
    updated = dataclasses.replace(result, vessel_extra=extra)
    old = laminar_warnings(network, result.vessel_reynolds)
    kept = [w for w in result.warnings if w not in old]
    warnings = laminar_warnings(network, updated.vessel_reynolds) + kept
    warnings += wall_warnings(network, result.pressure_pa, groups)
    return dataclasses.replace(updated, warnings=tuple(warnings))


def volume_summary(result: SteadyResult) -> dict:
    """Blood volume of the vessels: total, unstressed, stressed and per tag (SI).

    Returns
    -------
    dict
        ``total_m3`` (sum of ``vessel_extra['volume_m3']``), ``unstressed_m3``
        (the geometry as given, at zero transmural pressure), ``stressed_m3``
        (their difference: what pressure holds in the distensible vessels),
        ``by_tag``: tag -> {``volume_m3``, ``share``} (share of the total;
        tags may overlap), and ``untagged`` likewise.  Beds hold no volume.
        Empty when the result carries no volumes.
    """
    extra = result.vessel_extra
    if "volume_m3" not in extra:
        return {}
    v = result.network.vessels
    volume = np.asarray(extra["volume_m3"], dtype=float)
    total = float(volume.sum())
    unstressed = float(taper_volume(v.length_m, v.radius_in_m, v.radius_out_m).sum())

    def entry(rows):
        part = float(volume[rows].sum())
        return {"volume_m3": part, "share": part / total if total > 0 else float("nan")}

    tagged = np.zeros(len(v), dtype=bool)
    by_tag = {}
    for tag, rows in v.tags.items():
        by_tag[tag] = entry(rows)
        tagged[rows] = True
    return {"total_m3": total, "unstressed_m3": unstressed, "stressed_m3": total - unstressed,
            "by_tag": by_tag, "untagged": entry(np.flatnonzero(~tagged))}
