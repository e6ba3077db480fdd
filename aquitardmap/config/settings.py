"""The typed settings of a project, one class for each table of ``project.toml``.

These are plain frozen records with the documented defaults; reading and checking the text
is :mod:`aquitardmap.config.sections`, and :class:`aquitardmap.config.project.Project`
gathers them for a run.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from aquitardmap.geostat.variogram import VariogramModel

#: Default input file names inside a project folder (``[files]`` may override them).
DEFAULT_FILES = {
    "collars": "collars.csv",
    "intervals": "intervals.csv",
    "samples": "samples.csv",
    "dem": "dem.tif",
    "boundary": "boundary.geojson",
    "store": "boreholes_store.gpkg",
    "hazards": "hazards.geojson",
    "water_table": "water_table.csv",
    "aquifer_head": "aquifer_head.csv",
}
#: Default of ``[grid] max_cells``: a grid with more cells is refused before any memory is
#: taken (a mistyped collar coordinate or a tiny cell size would otherwise ask for billions).
MAX_GRID_CELLS = 4_000_000


@dataclass(frozen=True)
class Unit:
    """One unit of the stack.

    Attributes:
        code: short code used in ``intervals.csv``.
        name: plain-language name shown to readers.
        role: ``"cover"``, ``"aquitard"`` or ``"aquifer"``.
        effective_porosity: fraction of the bulk volume that carries advective flow (-).
        k_default_m_s: hydraulic conductivity used when the unit has no lab or grain-size
            value (m/s).
        k_method: grain-size method used for samples of this unit (``"hazen"``,
            ``"kozeny_carman"``, ``"slichter"``, ``"terzaghi"``, ``"beyer"`` or ``"none"``);
            lab values always come first.
        anisotropy_kh_kv: ratio of horizontal to vertical conductivity; vertical K is the
            unit's K divided by this ratio (-).
        secondary_k_factor: multiplier (>= 1) on vertical K for secondary permeability
            (fissures, burrows, root holes, silt partings) that samples do not capture (-);
            1 = none.
    """

    code: str
    name: str
    role: str
    effective_porosity: float = 0.30
    k_default_m_s: float = 1e-9
    k_method: str = "none"
    anisotropy_kh_kv: float = 1.0
    secondary_k_factor: float = 1.0


@dataclass(frozen=True)
class KrigingSettings:
    """Variogram and neighbourhood choices for every kriged surface.

    Attributes:
        variogram_model: family of the (first) structure fitted to each surface.
        n_lags: lag classes; 0 = lag width from the median hole spacing.
        max_lag_fraction: largest lag as a fraction of the diagonal of the holes' extent.
        max_neighbours: nearest data used per kriged point.
        nested_model: family of a second, longer-range structure fitted with the first
            (``""`` = a single structure).
        lag_width_m: lag class width (m); 0 = from ``n_lags`` or the hole spacing.
        anisotropy: ``"none"`` (isotropic) or ``"auto"`` (geometric anisotropy fitted from
            directional variograms).
        n_directions: number of directional variograms (azimuths 0°, 180°/n, ...).
        direction_tolerance_deg: angular half-width of each direction class (degrees).
        variograms: manual variograms by surface name (``"aquitard"`` or a unit code), from
            ``[variograms.<name>]`` tables; used as given, never re-fitted.
        external_drift: ground elevation as an external drift of the total aquitard
            thickness behind ``p_window``/``p_thin`` and the zones: ``"none"``, ``"ground"``
            or ``"auto"`` (used when leave-one-out cross-validation of the full holes gives
            a lower RMSE with it; :mod:`aquitardmap.geostat.drift`).
        reuse_variogram_within: a run with a project cache reuses the variogram the
            previous run used for a surface while this run's fit differs from it by less
            than this (relative; nugget and sills against the kept sill); 0 = always use
            the fresh fit (:mod:`aquitardmap.geostat.cache.variograms`).
        reuse_variogram_angle_deg: largest change of the major axis (degrees) for reuse,
            checked when either model is anisotropic.
    """

    variogram_model: str = "spherical"
    n_lags: int = 0  # 0: lag width = median nearest-neighbour spacing of the holes
    max_lag_fraction: float = 0.25
    max_neighbours: int = 64
    nested_model: str = ""
    lag_width_m: float = 0.0
    anisotropy: str = "none"
    n_directions: int = 4
    direction_tolerance_deg: float = 22.5
    variograms: dict[str, VariogramModel] = field(default_factory=dict)
    external_drift: str = "auto"
    reuse_variogram_within: float = 0.1
    reuse_variogram_angle_deg: float = 10.0


@dataclass(frozen=True)
class HydraulicSettings:
    """Physical constants of the screening.

    Attributes:
        groundwater_temp_c: groundwater temperature for water viscosity and density (°C).
        vertical_gradient: downward hydraulic gradient across the column (-); 1.0 is the
            unit-gradient screening assumption.
        hazen_c: Hazen's empirical coefficient C in ``K[cm/s] = C * D10[cm]^2``.
        terzaghi_c: Terzaghi's coefficient C (-), 6.1e-3 (coarse grains) to 10.7e-3
            (smooth grains).
        crust_depth_m: thickness of the weathered crust, measured down from the top of the
            clay (m); 0 turns it off.
        crust_k_factor: the crust's vertical K is the unit's times this factor (-).
        crust_treatment: ``"raise_k"`` (the crust counts with the raised K) or
            ``"not_protective"`` (the crust is left out of the column).
        effective_diffusion_m2_s: effective diffusion coefficient of a conservative solute
            in the clay, for the diffusion time scale B²/De (m²/s).
    """

    groundwater_temp_c: float = 10.0
    vertical_gradient: float = 1.0
    hazen_c: float = 100.0
    terzaghi_c: float = 10.7e-3
    crust_depth_m: float = 3.0
    crust_k_factor: float = 100.0
    crust_treatment: str = "raise_k"
    effective_diffusion_m2_s: float = 5e-10


@dataclass(frozen=True)
class ScreeningThresholds:
    """Thresholds that turn grids into zones.

    Attributes:
        window_thickness_m: total aquitard thickness below which the clay is taken as absent.
        thin_thickness_m: total aquitard thickness below which the clay is flagged as thin.
        fast_travel_time_yr: advective travel time below which a cell is a fast path.
        piercing_radius_m: search radius of the piercing-borehole density (m).
        piercing_flag_per_km2: piercing-borehole density at or above which a cell is
            flagged (holes per km²).
        zone_basis: ``"probability"`` (window and thin zones where P(window) or P(thin)
            reaches its threshold) or ``"kriged_thickness"`` (where the kriged thickness is
            below the thickness threshold).
        p_window_threshold: the *likely* window tier: a cell is a likely window when
            P(total aquitard thinner than ``window_thickness_m``) is at least this (and a
            hole proving a window lies within ``window_proof_radius_m``).
        p_thin_threshold: the *likely* thin tier: a cell is likely thin when P(thinner
            than ``thin_thickness_m``) is at least this (and it is not a likely window).
        p_window_possible_threshold: the *possible* window tier, the risk tolerance for
            windows: a cell is a possible window when P(window) is at least this (a window
            the holes cannot rule out); ``0 < possible <= p_window_threshold``.
        p_thin_possible_threshold: the *possible* thin tier likewise, from P(thin);
            ``0 < possible <= p_thin_threshold``. Lowering either possible threshold flags
            more ground (fewer missed windows, more false alarms); where two tiers apply
            to a cell, likely beats possible, then window beats thin
            (:func:`aquitardmap.screening.zones.zone_tier_masks`).
        probability_draws: Monte Carlo draws of the censored data behind the probabilities.
        probability_seed: seed of those draws (the same seed gives the same grids).
        probability_variance_from_cv: scale the variogram behind the probabilities so that
            the cross-validation's standardised errors have variance 1.
        window_latent_floor_m: how far below zero the latent thickness may be drawn at a
            hole that proves a window (m; :func:`aquitardmap.geostat.probability.censored_data`).
        window_proof_radius_m: with probability zones, a cell is a window zone only within
            this distance of a hole that proves a window (or where a mapped hazard removes
            clay) for the likely tier; a likely window farther from any such hole is a
            possible window (m; :func:`aquitardmap.screening.zones.zone_tier_masks`). Also the
            distance within which a proving hole supports a zone (``supporting_holes``).
        probability_method: how P(window) and P(thin) are made: ``"indicator"`` (default;
            indicator kriging with continuity along chains of proving holes,
            :mod:`aquitardmap.geostat.indicator`) or ``"latent_gaussian"`` (a truncated Gaussian of
            the thickness with inequality data, :mod:`aquitardmap.geostat.probability`).
        continuity_ratio: indicator method: anisotropy ratio along a chain of holes proving
            thin clay (1 = no chains).
        chain_corridor_m: indicator method: a hole proving thicker clay within this distance
            of the segment between two proving holes breaks the chain (m).
        location_sd_m: indicator method: location error of the hole records (water wells
            are often tens of metres off); cells within it of a hole proving a window or
            thin clay get a probability of at least 0.9 (m).
    """

    window_thickness_m: float = 1.0
    thin_thickness_m: float = 5.0
    fast_travel_time_yr: float = 50.0
    piercing_radius_m: float = 500.0
    piercing_flag_per_km2: float = 10.0
    zone_basis: str = "probability"
    # Provisional tier thresholds, to be set from measurements over many regions.
    p_window_threshold: float = 0.5
    p_thin_threshold: float = 0.5
    p_window_possible_threshold: float = 0.2
    p_thin_possible_threshold: float = 0.2
    probability_draws: int = 64
    probability_seed: int = 0
    probability_variance_from_cv: bool = True
    window_latent_floor_m: float = 3.0
    window_proof_radius_m: float = 300.0
    probability_method: str = "indicator"
    continuity_ratio: float = 4.0
    chain_corridor_m: float = 150.0
    location_sd_m: float = 20.0


@dataclass(frozen=True)
class QASettings:
    """Borehole quality checks.

    Attributes:
        dem_misfit_m: a collar whose elevation differs from the DEM by more than this is
            flagged (m).
        exclude_boreholes: borehole ids left out of every computation (still listed).
        cv_standardised_error_max: a hole whose leave-one-out standardised error (error /
            kriging SD) of the total aquitard thickness exceeds this in absolute value is
            listed as suspicious.
    """

    dem_misfit_m: float = 3.0
    exclude_boreholes: tuple[str, ...] = ()
    cv_standardised_error_max: float = 3.0


@dataclass(frozen=True)
class DrillingSettings:
    """Choices of ``aquitardmap suggest`` (where to drill next).

    Attributes:
        holes: number of holes to suggest when the command line does not say.
        p_low, p_high: a cell is *uncertain* while its probability of a thin aquitard lies
            between these bounds (inclusive).
        target: which probability defines the uncertain area: ``"thin"`` (below
            ``thin_thickness_m``), ``"window"`` (below ``window_thickness_m``) or ``"both"``
            (the two uncertain areas added).
        min_spacing_m: smallest distance between two suggested holes (m).
        priority_grid: optional GeoTIFF inside the project folder weighting each cell's
            area (e.g. higher in wellhead protection areas); empty = every cell weighs 1.
    """

    holes: int = 5
    p_low: float = 0.1
    p_high: float = 0.9
    target: str = "thin"
    min_spacing_m: float = 250.0
    priority_grid: Path | None = None


@dataclass(frozen=True)
class ComputeSettings:
    """Where the kriging tiles run (see :mod:`aquitardmap.geostat.compute`).

    Attributes:
        mode: ``"local"`` (default): on worker processes on this machine, one per core;
            ``"single"``: in the running process; ``"dask"``: on a Dask cluster (optional
            extra ``aquitardmap[dask]``).
        scheduler: address of an existing Dask scheduler, e.g. ``"tcp://10.0.0.5:8786"``;
            empty: start local worker processes.
        workers: worker processes on this machine (local mode, or dask mode without a
            scheduler); 0: one per CPU core; 1 in local mode: in the running process.
        tile_cells: grid cells per tile, the unit of work and of working memory.
    """

    mode: str = "local"
    scheduler: str = ""
    workers: int = 0
    tile_cells: int = 65_536


#: Backgrounds of the map (``[map] background``): web map tiles, none, or a shaded relief
#: of the project's DEM.
MAP_BACKGROUNDS = ("tiles", "none", "relief")


@dataclass(frozen=True)
class MapSettings:
    """The planners' map (``map.html``).

    Attributes:
        background: ``"tiles"`` (OpenStreetMap tiles, fetched when the page opens),
            ``"none"``, or ``"relief"`` (a shaded relief drawn from the project's DEM and
            kept in the page). None (not set): tiles for a map that fetches its library,
            the relief for a self-contained one (``run --offline-map``), which never
            fetches tiles.
    """

    background: str | None = None
