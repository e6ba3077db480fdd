"""Stage 3: conductivity of every unit and the hydraulic grids of the column (resistance,
leakance, travel times, AVI class, hazards and crust, piercing boreholes)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from aquitardmap.config.project import Project
from aquitardmap.geostat.surfaces import Surface
from aquitardmap.hydraulics.column import (
    SECONDS_PER_YEAR,
    advective_travel_time_yr,
    avi_class,
    crossing_time_yr,
    crust_thickness_m,
    diffusion_time_yr,
    downward_travel_time_yr,
    equivalent_kv_m_s,
    gradient_from_heads,
    leakance_per_s,
    peclet_number,
    remove_from_top_m,
    series_flux_m_s,
    series_resistance_s,
)
from aquitardmap.hydraulics.conductivity import unit_conductivity
from aquitardmap.hydraulics.heads import HeadSurface, head_surface
from aquitardmap.hydraulics.piercing import piercing_mask, piercing_table, point_density_per_km2
from aquitardmap.inputs.hazards import (
    hazard_table,
    removed_depth_grid_m,
)
from aquitardmap.inputs.heads import HEAD_KEYS
from aquitardmap.inputs.load import Inputs


@dataclass
class Hydraulics:
    """Per-unit conductivity and the per-cell hydraulic grids."""

    unit_k: pd.DataFrame
    column_thickness_m: dict[str, np.ndarray]
    resistance_yr: np.ndarray
    kv_m_s: np.ndarray
    leakance_per_s: np.ndarray
    travel_time_yr: np.ndarray
    avi_class: np.ndarray | None = None
    diffusion_time_yr: np.ndarray | None = None
    peclet_number: np.ndarray | None = None
    vertical_gradient: np.ndarray | None = None
    gradient_source: str = "stated"
    crust_m: np.ndarray | None = None
    protective_thickness_m: np.ndarray | None = None
    protective_cut_m: np.ndarray | None = None
    hazard_removed_m: np.ndarray | None = None
    hazard_index: np.ndarray | None = None
    hazard_removed_aquitard_m: np.ndarray | None = None
    hazards: list[dict] = field(default_factory=list)
    piercing_density_per_km2: np.ndarray | None = None
    piercing: pd.DataFrame | None = None
    heads: dict[str, HeadSurface] = field(default_factory=dict)


def protective_cut_m(project: Project, surfaces: dict[str, Surface],
                     hazard_removed_m: np.ndarray | None) -> np.ndarray:
    """Depth below the top of the clay that does not count as protective (m, per cell): what
    a hazard removes below the kriged cover (its removed depth less the cover, at least 0),
    plus the crust depth when ``[hydraulics] crust_treatment = "not_protective"``. The
    protective thickness is then ``max(0, T − cut)``, so ``P(protective < t) = P(T < t +
    cut)`` (the probability stage's thresholds)."""
    shape = surfaces["aquitard"].thickness_m.shape
    cut = np.zeros(shape)
    if hazard_removed_m is not None:
        cover = sum((np.nan_to_num(surfaces[u.code].thickness_m) for u in project.column_units
                     if u.role == "cover"), np.zeros(shape))
        cut = np.maximum(np.nan_to_num(hazard_removed_m) - cover, 0.0)
    if project.hydraulics.crust_treatment == "not_protective":
        cut = cut + project.hydraulics.crust_depth_m
    return cut


def screened_thickness_m(total: Surface, hyd: Hydraulics) -> np.ndarray:
    """The aquitard thickness the zones screen (m): the protective thickness (cut by hazards,
    without the crust when it is not protective) where the total is kriged, the kriged total
    when the hydraulics carry no protective thickness."""
    if hyd.protective_thickness_m is None:
        return total.thickness_m
    return np.where(np.isfinite(total.thickness_m), hyd.protective_thickness_m, np.nan)


def compute_hydraulics(inputs: Inputs, surfaces: dict[str, Surface]) -> Hydraulics:
    """Stage 3: K per unit (lab, else grain size, else default; times the unit's anisotropy
    and secondary-permeability multipliers), then per cell, through every unit above the
    aquifer (cover included, as in the AVI):

    1. the column cut down from the top by the hazards (excavations, pits, scars);
    2. the weathered crust, the top ``crust_depth_m`` of the remaining clay, with its K
       raised by ``crust_k_factor`` or left out (``crust_treatment``);
    3. series resistance, equivalent Kv, leakance, AVI class;
    4. with both head inputs, the head drop drives one steady Darcy flux through the units
       in series (``Δh / c``) and the advective travel time is ``Σ nₑbᵢ / q``; elsewhere
       the stated gradient acts in every unit alike; infinite where the flow is not
       downward;
    5. the diffusion time scale B²/De of the intact clay below the crust and its Péclet
       number (diffusive over advective time of that clay);
    6. the density of boreholes piercing the aquitard.
    """
    p = inputs.project
    h = p.hydraulics
    g = inputs.grid
    units = p.column_units
    unit_k = unit_conductivity(inputs.boreholes.samples, p.units, h)
    thick0 = np.stack([surfaces[u.code].thickness_m for u in units])
    kv = np.array([unit_k.at[u.code, "kv_m_s"] for u in units], dtype=float)
    por = np.array([u.effective_porosity for u in units], dtype=float)
    is_aq = np.array([u.role == "aquitard" for u in units])

    hazards = inputs.hazards
    removed = index = None
    hazard_rows: list[dict] = []
    thick = thick0
    if hazards is not None and len(hazards):
        removed, index = removed_depth_grid_m(hazards, g)
        thick = remove_from_top_m(thick0, np.nan_to_num(removed, nan=0.0))
        hazard_rows = hazard_table(hazards, index, (thick0[is_aq] - thick[is_aq]).sum(axis=0),
                                   g.cell_area_m2)
    aq_removed = (thick0[is_aq] - thick[is_aq]).sum(axis=0)

    crust = crust_thickness_m(thick, is_aq, h.crust_depth_m)
    intact = thick - crust
    if h.crust_treatment == "raise_k":
        layers = np.concatenate([intact, crust])
        kv_layers = np.concatenate([kv, kv * h.crust_k_factor])
        por_layers = np.concatenate([por, por])
        protective = thick[is_aq].sum(axis=0)
    else:  # "not_protective": the crust is left out of the column
        layers, kv_layers, por_layers = intact, kv, por
        protective = intact[is_aq].sum(axis=0)

    stated = h.vertical_gradient
    gradient = np.where(g.mask, stated, np.nan)
    source = "stated"
    head_drop = None
    heads = {k: head_surface(v, g, p.kriging) for k, v in inputs.heads.items()}
    if set(HEAD_KEYS) <= set(heads):
        head_drop = heads["water_table"].head_m - heads["aquifer_head"].head_m
        from_heads = gradient_from_heads(heads["water_table"].head_m,
                                         heads["aquifer_head"].head_m,
                                         np.nansum(thick, axis=0))
        gradient = np.where(np.isfinite(from_heads), from_heads, gradient)
        source = "heads"
    downward = gradient > 0
    safe_i = np.where(downward, gradient, 1.0)

    with np.errstate(divide="ignore", invalid="ignore"):
        c_s = series_resistance_s(layers, kv_layers)
        # A stated gradient acts in every unit alike; a head drop drives one steady flux
        # through the units in series, the gradient steepest across the tightest one.
        travel = downward_travel_time_yr(layers, kv_layers, por_layers, gradient)
        clay_b = intact[is_aq].sum(axis=0)
        t_diff = diffusion_time_yr(clay_b, h.effective_diffusion_m2_s)
        t_adv_clay = advective_travel_time_yr(intact[is_aq], kv[is_aq], por[is_aq], safe_i)
        t_adv_clay = np.where(downward, t_adv_clay, np.inf)
        if head_drop is not None:
            q = series_flux_m_s(layers, kv_layers, head_drop)
            by_heads = np.isfinite(head_drop) & np.isfinite(c_s)
            travel = np.where(by_heads, crossing_time_yr(layers, por_layers, q), travel)
            t_adv_clay = np.where(by_heads, crossing_time_yr(intact[is_aq], por[is_aq], q),
                                  t_adv_clay)
        resistance_yr = c_s / SECONDS_PER_YEAR
        used = inputs.columns
        density = point_density_per_km2(
            used.loc[piercing_mask(used), "x"].to_numpy(float),
            used.loc[piercing_mask(used), "y"].to_numpy(float), g,
            p.screening.piercing_radius_m)
        return Hydraulics(
            unit_k=unit_k,
            column_thickness_m={u.code: thick[i] for i, u in enumerate(units)},
            resistance_yr=resistance_yr,
            kv_m_s=equivalent_kv_m_s(layers, kv_layers),
            leakance_per_s=leakance_per_s(layers, kv_layers),
            travel_time_yr=travel,
            avi_class=avi_class(resistance_yr),
            diffusion_time_yr=t_diff,
            peclet_number=peclet_number(t_diff, t_adv_clay),
            vertical_gradient=gradient,
            gradient_source=source,
            crust_m=crust[is_aq].sum(axis=0),
            protective_thickness_m=protective,
            protective_cut_m=protective_cut_m(p, surfaces, removed),
            hazard_removed_m=removed,
            hazard_index=index,
            hazard_removed_aquitard_m=aq_removed,
            hazards=hazard_rows,
            piercing_density_per_km2=density,
            heads=heads,
            piercing=piercing_table(used, density, g, p.screening.piercing_flag_per_km2),
        )
