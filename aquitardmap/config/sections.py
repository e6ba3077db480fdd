"""One reader for each table of ``project.toml``, each returning its checked settings.

Every reader takes the :class:`~aquitardmap.config.document.ConfigDocument` under review,
reports what it cannot accept there (file, line and column) and falls back to the
documented default for that key, so that one read lists every problem of the file. The
defaults are those of the settings classes (:mod:`aquitardmap.config.settings`).
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from pyproj import CRS
from pyproj.exceptions import CRSError

from aquitardmap.config.document import ConfigDocument
from aquitardmap.config.materials import MaterialRule
from aquitardmap.config.settings import (
    DEFAULT_FILES,
    MAP_BACKGROUNDS,
    MAX_GRID_CELLS,
    ComputeSettings,
    DrillingSettings,
    HydraulicSettings,
    KrigingSettings,
    MapSettings,
    QASettings,
    ScreeningThresholds,
    Unit,
)
from aquitardmap.geostat.variogram import MODELS, VariogramModel

ROLES = ("cover", "aquitard", "aquifer")
K_METHODS = ("hazen", "kozeny_carman", "slichter", "terzaghi", "beyer", "none")
CRUST_TREATMENTS = ("raise_k", "not_protective")
ANISOTROPY_CHOICES = ("none", "auto")
#: [kriging] external_drift: the ground elevation (DEM) as an external drift of the total
#: aquitard thickness behind the probability maps: never, always, or when cross-validation
#: says it helps.
EXTERNAL_DRIFT_CHOICES = ("none", "ground", "auto")
ZONE_BASES = ("probability", "kriged_thickness")
#: Ways to make P(window) and P(thin) (``[screening] probability_method``).
PROBABILITY_METHODS = ("indicator", "latent_gaussian")
DRILLING_TARGETS = ("thin", "window", "both")
COMPUTE_MODES = ("local", "single", "dask")
VARIOGRAM_KEYS = ("model", "nugget", "psill", "range_m", "anisotropy_ratio",
                  "anisotropy_angle_deg", "model2", "psill2", "range2_m")
DRILLING_KEYS = ("holes", "p_low", "p_high", "target", "min_spacing_m", "priority_grid")
MATERIAL_KEYS = ("unit", "words", "pattern")


def read_project_table(doc: ConfigDocument, cfg: dict[str, Any]) -> tuple[str, CRS]:
    """``[project]``: the project's name and its projected CRS in metres (both required)."""
    proj = doc.section(cfg, "project")
    name = proj.get("name")
    if not isinstance(name, str) or not name.strip():
        doc.add(doc.locate("name", "project"),
                "[project] name is required (a non-empty string)")
        name = ""
    crs_value = proj.get("crs")
    crs = CRS.from_epsg(3857)
    where = doc.locate("crs", "project")
    if crs_value is None:
        doc.add(where, "[project] crs is required, e.g. crs = \"EPSG:32632\"")
    else:
        try:
            crs = CRS.from_user_input(crs_value)
            unit = crs.axis_info[0].unit_name if crs.axis_info else ""
            if not crs.is_projected or unit not in ("metre", "meter"):
                doc.add(where, f"[project] crs {crs_value!r} must be a projected CRS in "
                        f"metres (got {crs.name}, axis unit {unit or 'unknown'})")
        except CRSError:
            doc.add(where, f"[project] crs {crs_value!r} is not a known CRS; give an EPSG "
                    "code such as \"EPSG:32632\"")
    return name, crs


def read_grid(doc: ConfigDocument, cfg: dict[str, Any]) -> tuple[float, float, int]:
    """``[grid]``: (cell size in m, buffer around the holes in m, largest number of cells).
    ``cell_size_m`` is required."""
    grid = doc.section(cfg, "grid")
    if "cell_size_m" not in grid:
        doc.add(doc.locate("", "grid"), "[grid] cell_size_m is required")
    cell_size_m = doc.number(grid, "cell_size_m", 50.0, "grid", low=0, low_open=True)
    buffer_m = doc.number(grid, "buffer_m", 250.0, "grid", low=0)
    max_cells = int(doc.number(grid, "max_cells", MAX_GRID_CELLS, "grid", low=1,
                               integer=True))
    return cell_size_m, buffer_m, max_cells


def _read_unit(doc: ConfigDocument, u: dict[str, Any], i: int,
               seen_codes: set[str]) -> Unit:
    """The ``i``-th ``[[units]]`` table (0-based); its code is added to ``seen_codes``."""
    d = Unit("", "", "cover")
    u = doc.track(u, "units", i)
    code = u.get("code")
    lc = doc.locate("code", "units", i)
    if not isinstance(code, str) or not re.fullmatch(r"[A-Za-z0-9_]{1,24}", code or ""):
        doc.add(lc, f"unit {i + 1}: code must be 1-24 letters, digits or underscores, got "
                f"{code!r}")
        code = f"unit{i + 1}"
    elif code in seen_codes:
        doc.add(lc, f"unit code {code!r} appears twice")
    seen_codes.add(code)
    uname = u.get("name", code)
    if not isinstance(uname, str):
        doc.add(doc.locate("name", "units", i),
                f"unit {code}: name must be a string, got {uname!r}")
        uname = code
    role = u.get("role")
    if role not in ROLES:
        doc.add(doc.locate("role", "units", i),
                f"unit {code}: role must be one of {', '.join(ROLES)}, got {role!r}")
        role = "cover"
    k_method = u.get("k_method", d.k_method)
    if k_method not in K_METHODS:
        doc.add(doc.locate("k_method", "units", i),
                f"unit {code}: k_method must be one of {', '.join(K_METHODS)}, "
                f"got {k_method!r}")
        k_method = d.k_method
    por = doc.number(u, "effective_porosity", d.effective_porosity, "units", i, low=0,
                     low_open=True, high=1.0)
    kdef = doc.number(u, "k_default_m_s", d.k_default_m_s, "units", i, low=0,
                      low_open=True, high=1.0)
    aniso = doc.number(u, "anisotropy_kh_kv", d.anisotropy_kh_kv, "units", i, low=0,
                       low_open=True)
    secondary = doc.number(u, "secondary_k_factor", d.secondary_k_factor, "units", i,
                           low=1.0)
    return Unit(code, str(uname), role, por, kdef, k_method, aniso, secondary)


def read_units(doc: ConfigDocument, cfg: dict[str, Any]) -> tuple[Unit, ...]:
    """``[[units]]``: the stack, top to bottom; it needs an aquifer with an aquitard above."""
    units_cfg = cfg.get("units", [])
    units: list[Unit] = []
    if not isinstance(units_cfg, list) or not units_cfg:
        where = doc.locate("", "units")
        if where == (0, 0):
            where = doc.locate("units")
        doc.add(where, "at least one [[units]] table is required (the stack, top to bottom)")
        units_cfg = []
    seen_codes: set[str] = set()
    for i, u in enumerate(units_cfg):
        if not isinstance(u, dict):
            doc.add(doc.locate("units"), f"unit {i + 1}: each unit must be a table "
                    f"([[units]] followed by its keys), got {u!r}")
            continue
        units.append(_read_unit(doc, u, i, seen_codes))
    roles = [u.role for u in units]
    if units and "aquifer" not in roles:
        doc.add((0, 0), "the stack needs a unit with role = \"aquifer\" (the aquifer to "
                "protect)")
    elif units:
        above = roles[: roles.index("aquifer")]
        if "aquitard" not in above:
            doc.add((0, 0), "the stack needs at least one unit with role = \"aquitard\" "
                    "above the first aquifer")
    return tuple(units)


def read_variograms(doc: ConfigDocument, cfg: Any,
                    surfaces: list[str]) -> dict[str, VariogramModel]:
    """Manual variograms from ``[variograms.<surface>]`` tables, e.g.::

        [variograms.aquitard]
        model = "spherical"       # spherical, exponential or gaussian
        nugget = 1.0              # m²
        psill = 60.0              # m²
        range_m = 1200.0
        anisotropy_ratio = 1.5    # optional: major / minor range (>= 1)
        anisotropy_angle_deg = 20 # optional: major axis, degrees counter-clockwise from east
        model2 = "exponential"    # optional second structure
        psill2 = 15.0
        range2_m = 5000.0
    """
    out: dict[str, VariogramModel] = {}
    if not isinstance(cfg, dict):
        doc.add(doc.locate("variograms"), "variograms must hold one table per surface, "
                "e.g. [variograms.aquitard]")
        return out
    for name, tbl in cfg.items():
        table = f"variograms.{name}"
        where = doc.locate("", table)
        if name not in surfaces:
            doc.add(where, f"[{table}]: {name!r} is not a kriged surface; expected one of "
                    f"{', '.join(surfaces)}")
            continue
        if not isinstance(tbl, dict):
            doc.add(where, f"[{table}] must be a table")
            continue
        for key in tbl:
            if key not in VARIOGRAM_KEYS:
                doc.add(doc.locate(key, table), f"[{table}] unknown key {key!r}; expected "
                        f"{', '.join(VARIOGRAM_KEYS)}")
        before = len(doc.problems.problems)
        model = tbl.get("model")
        if model not in MODELS:
            doc.add(doc.locate("model", table) if "model" in tbl else where,
                    f"[{table}] model must be one of {', '.join(MODELS)}, got "
                    f"{model!r}")
        for key in ("psill", "range_m"):
            if key not in tbl:
                doc.add(where, f"[{table}] {key} is required")
        model2 = tbl.get("model2", "")
        if model2 not in ("", *MODELS):
            doc.add(doc.locate("model2", table), f"[{table}] model2 must be one of "
                    f"{', '.join(MODELS)}, got {model2!r}")
        if model2 and not {"psill2", "range2_m"} <= set(tbl):
            doc.add(doc.locate("model2", table), f"[{table}] model2 needs psill2 and range2_m")
        vals = {
            "nugget": doc.number(tbl, "nugget", 0.0, table, low=0),
            "psill": doc.number(tbl, "psill", 1.0, table, low=0, low_open=True),
            "range_m": doc.number(tbl, "range_m", 1.0, table, low=0, low_open=True),
            "anisotropy_ratio": doc.number(tbl, "anisotropy_ratio", 1.0, table, low=1.0,
                                           high=100.0),
            "anisotropy_angle_deg": doc.number(tbl, "anisotropy_angle_deg", 0.0, table,
                                               low=-360.0, high=360.0),
            "psill2": doc.number(tbl, "psill2", 0.0, table, low=0),
            "range2_m": doc.number(tbl, "range2_m", 0.0, table, low=0),
        }
        if model2 and "range2_m" in tbl and vals["range2_m"] <= 0:
            doc.add(doc.locate("range2_m", table), f"[{table}] range2_m must be > 0")
        if len(doc.problems.problems) == before:
            out[name] = VariogramModel(model, vals["nugget"], vals["psill"], vals["range_m"],
                                       vals["anisotropy_ratio"], vals["anisotropy_angle_deg"],
                                       model2, vals["psill2"] if model2 else 0.0,
                                       vals["range2_m"] if model2 else 0.0)
    return out


def read_kriging(doc: ConfigDocument, cfg: dict[str, Any],
                 units: tuple[Unit, ...]) -> KrigingSettings:
    """``[kriging]`` with the manual ``[variograms.<surface>]`` of the aquitard surfaces
    (the total ``aquitard``, each unit above the aquifer, ``aquitard_residual``)."""
    d = KrigingSettings()
    kr = doc.section(cfg, "kriging")
    model = kr.get("variogram_model", d.variogram_model)
    if model not in MODELS:
        doc.add(doc.locate("variogram_model", "kriging"),
                f"[kriging] variogram_model must be one of {', '.join(MODELS)}")
        model = d.variogram_model
    nested = kr.get("nested_model", d.nested_model)
    if nested not in ("", *MODELS):
        doc.add(doc.locate("nested_model", "kriging"), "[kriging] nested_model must be \"\" "
                f"(none) or one of {', '.join(MODELS)}, got {nested!r}")
        nested = d.nested_model
    aniso = doc.choice(kr, "anisotropy", d.anisotropy, "kriging", ANISOTROPY_CHOICES)
    column_codes = []
    for u in units:
        if u.role == "aquifer":
            break
        column_codes.append(u.code)
    return KrigingSettings(
        variogram_model=model,
        n_lags=int(doc.number(kr, "n_lags", d.n_lags, "kriging", low=0, high=100,
                              integer=True)),
        max_lag_fraction=doc.number(kr, "max_lag_fraction", d.max_lag_fraction, "kriging",
                                    low=0.05, high=1.0),
        max_neighbours=int(doc.number(kr, "max_neighbours", d.max_neighbours, "kriging",
                                      low=4, high=5000, integer=True)),
        nested_model=nested,
        lag_width_m=doc.number(kr, "lag_width_m", d.lag_width_m, "kriging", low=0),
        anisotropy=aniso,
        n_directions=int(doc.number(kr, "n_directions", d.n_directions, "kriging", low=2,
                                    high=36, integer=True)),
        direction_tolerance_deg=doc.number(kr, "direction_tolerance_deg",
                                           d.direction_tolerance_deg, "kriging", low=1.0,
                                           high=90.0),
        variograms=read_variograms(doc, cfg.get("variograms", {}),
                                   ["aquitard", *column_codes, "aquitard_residual"]),
        external_drift=doc.choice(kr, "external_drift", d.external_drift, "kriging",
                                  EXTERNAL_DRIFT_CHOICES),
        reuse_variogram_within=doc.number(kr, "reuse_variogram_within",
                                          d.reuse_variogram_within, "kriging", low=0.0,
                                          high=1.0),
        reuse_variogram_angle_deg=doc.number(kr, "reuse_variogram_angle_deg",
                                             d.reuse_variogram_angle_deg, "kriging",
                                             low=0.0, high=90.0),
    )


def read_hydraulics(doc: ConfigDocument, cfg: dict[str, Any]) -> HydraulicSettings:
    """``[hydraulics]``: the physical constants of the screening."""
    d = HydraulicSettings()
    hy = doc.section(cfg, "hydraulics")
    hydraulics = HydraulicSettings(
        groundwater_temp_c=doc.number(hy, "groundwater_temp_c", d.groundwater_temp_c,
                                      "hydraulics", low=0.0, high=40.0),
        vertical_gradient=doc.number(hy, "vertical_gradient", d.vertical_gradient,
                                     "hydraulics", low=0, low_open=True, high=100.0),
        hazen_c=doc.number(hy, "hazen_c", d.hazen_c, "hydraulics", low=0, low_open=True,
                           high=1000.0),
        # Terzaghi's C: 10.7e-3 for smooth grains, 6.1e-3 for coarse (irregular) grains
        # (Vukovic & Soro 1992; Rosas et al. 2014; values *from memory*).
        terzaghi_c=doc.number(hy, "terzaghi_c", d.terzaghi_c, "hydraulics", low=6.1e-3,
                              high=10.7e-3),
        crust_depth_m=doc.number(hy, "crust_depth_m", d.crust_depth_m, "hydraulics",
                                 low=0.0, high=50.0),
        crust_k_factor=doc.number(hy, "crust_k_factor", d.crust_k_factor, "hydraulics",
                                  low=1.0, high=1e6),
        crust_treatment=str(hy.get("crust_treatment", d.crust_treatment)),
        effective_diffusion_m2_s=doc.number(hy, "effective_diffusion_m2_s",
                                            d.effective_diffusion_m2_s, "hydraulics", low=0,
                                            low_open=True, high=1e-8),
    )
    if hydraulics.crust_treatment not in CRUST_TREATMENTS:
        doc.add(doc.locate("crust_treatment", "hydraulics"), "[hydraulics] crust_treatment "
                f"must be one of {', '.join(CRUST_TREATMENTS)}, got "
                f"{hy.get('crust_treatment')!r}")
    return hydraulics


def read_screening(doc: ConfigDocument, cfg: dict[str, Any]) -> ScreeningThresholds:
    """``[screening]``: the thresholds that turn grids into zones, with the likely tier of
    each zone at least as strict as its possible tier."""
    d = ScreeningThresholds()
    sc = doc.section(cfg, "screening")

    def probability(key: str) -> float:
        return doc.number(sc, key, getattr(d, key), "screening", low=0, low_open=True,
                          high=1.0)

    screening = ScreeningThresholds(
        window_thickness_m=doc.number(sc, "window_thickness_m", d.window_thickness_m,
                                      "screening", low=0),
        thin_thickness_m=doc.number(sc, "thin_thickness_m", d.thin_thickness_m, "screening",
                                    low=0),
        fast_travel_time_yr=doc.number(sc, "fast_travel_time_yr", d.fast_travel_time_yr,
                                       "screening", low=0, low_open=True),
        piercing_radius_m=doc.number(sc, "piercing_radius_m", d.piercing_radius_m,
                                     "screening", low=0, low_open=True),
        piercing_flag_per_km2=doc.number(sc, "piercing_flag_per_km2",
                                         d.piercing_flag_per_km2, "screening", low=0,
                                         low_open=True),
        zone_basis=doc.choice(sc, "zone_basis", d.zone_basis, "screening", ZONE_BASES),
        p_window_threshold=probability("p_window_threshold"),
        p_thin_threshold=probability("p_thin_threshold"),
        p_window_possible_threshold=probability("p_window_possible_threshold"),
        p_thin_possible_threshold=probability("p_thin_possible_threshold"),
        probability_draws=int(doc.number(sc, "probability_draws", d.probability_draws,
                                         "screening", low=8, high=5000, integer=True)),
        probability_seed=int(doc.number(sc, "probability_seed", d.probability_seed,
                                        "screening", low=0, integer=True)),
        probability_variance_from_cv=doc.flag(sc, "probability_variance_from_cv",
                                              d.probability_variance_from_cv, "screening"),
        window_latent_floor_m=doc.number(sc, "window_latent_floor_m",
                                         d.window_latent_floor_m, "screening", low=0,
                                         low_open=True),
        window_proof_radius_m=doc.number(sc, "window_proof_radius_m",
                                         d.window_proof_radius_m, "screening", low=0),
        probability_method=doc.choice(sc, "probability_method", d.probability_method,
                                      "screening", PROBABILITY_METHODS),
        continuity_ratio=doc.number(sc, "continuity_ratio", d.continuity_ratio, "screening",
                                    low=1.0, high=20.0),
        chain_corridor_m=doc.number(sc, "chain_corridor_m", d.chain_corridor_m, "screening",
                                    low=0),
        location_sd_m=doc.number(sc, "location_sd_m", d.location_sd_m, "screening", low=0,
                                 high=1000.0),
    )
    if screening.thin_thickness_m < screening.window_thickness_m:
        doc.add(doc.locate("thin_thickness_m", "screening"),
                "[screening] thin_thickness_m must be >= window_thickness_m")
    for kind in ("window", "thin"):
        likely = getattr(screening, f"p_{kind}_threshold")
        possible = getattr(screening, f"p_{kind}_possible_threshold")
        if possible > likely:
            key = (f"p_{kind}_possible_threshold" if f"p_{kind}_possible_threshold" in sc
                   else f"p_{kind}_threshold")
            doc.add(doc.locate(key, "screening"),
                    f"[screening] p_{kind}_possible_threshold ({possible:g}, the possible "
                    f"tier) must be <= p_{kind}_threshold ({likely:g}, the likely tier)")
    return screening


def read_qa(doc: ConfigDocument, cfg: dict[str, Any]) -> QASettings:
    """``[qa]``: the borehole quality checks."""
    d = QASettings()
    q = doc.section(cfg, "qa")
    excl = q.get("exclude_boreholes", [])
    if not isinstance(excl, list) or not all(isinstance(e, str | int) for e in excl):
        doc.add(doc.locate("exclude_boreholes", "qa"),
                "[qa] exclude_boreholes must be a list of borehole ids")
        excl = []
    return QASettings(
        dem_misfit_m=doc.number(q, "dem_misfit_m", d.dem_misfit_m, "qa", low=0,
                                low_open=True),
        exclude_boreholes=tuple(str(e) for e in excl),
        cv_standardised_error_max=doc.number(q, "cv_standardised_error_max",
                                             d.cv_standardised_error_max, "qa", low=0,
                                             low_open=True),
    )


def _priority_grid(doc: ConfigDocument, root: Path, priority: Any) -> Path | None:
    """``[drilling] priority_grid``: a GeoTIFF inside the project folder, or None."""
    where = doc.locate("priority_grid", "drilling")
    if not isinstance(priority, str):
        doc.add(where, "[drilling] priority_grid must be a file name (a string)")
        return None
    if not priority.strip():
        return None
    try:
        priority_path = (root / priority).resolve()
        priority_path.relative_to(root.resolve())
    except (ValueError, OSError):  # outside the folder, or a NUL byte in the name
        doc.add(where, f"[drilling] priority_grid = {priority!r} points outside the project "
                "folder; refused")
        return None
    if not priority_path.is_file():
        doc.add(where, f"[drilling] priority_grid {priority!r} not found in the project "
                "folder")
    return priority_path


def read_drilling(doc: ConfigDocument, cfg: dict[str, Any], root: Path) -> DrillingSettings:
    """``[drilling]``: the choices of ``aquitardmap suggest``; ``root`` is the project
    folder the priority grid must lie in."""
    d = DrillingSettings()
    dr = cfg.get("drilling", {})
    if not isinstance(dr, dict):
        doc.add(doc.locate("drilling"), "drilling must be a table")
        return d
    for key in dr:
        if key not in DRILLING_KEYS:
            doc.add(doc.locate(key, "drilling"), f"[drilling] unknown key {key!r}; expected "
                    f"{', '.join(DRILLING_KEYS)}")
    holes = doc.number(dr, "holes", d.holes, "drilling", low=1, high=1000)
    if holes != int(holes):
        doc.add(doc.locate("holes", "drilling"),
                f"[drilling] holes must be a whole number, got {holes:g}")
    p_low = doc.number(dr, "p_low", d.p_low, "drilling", low=0, low_open=True, high=1.0)
    p_high = doc.number(dr, "p_high", d.p_high, "drilling", low=0, low_open=True, high=1.0)
    if not p_low < p_high < 1.0:
        doc.add(doc.locate("p_high", "drilling"), "[drilling] p_high must lie between "
                f"p_low and 1 (exclusive), got p_low = {p_low:g}, p_high = {p_high:g}")
    target = doc.choice(dr, "target", d.target, "drilling", DRILLING_TARGETS)
    spacing = doc.number(dr, "min_spacing_m", d.min_spacing_m, "drilling", low=0)
    priority_path = _priority_grid(doc, root, dr.get("priority_grid", ""))
    return DrillingSettings(int(holes), p_low, p_high, target, spacing, priority_path)


def read_compute(doc: ConfigDocument, cfg: dict[str, Any]) -> ComputeSettings:
    """``[compute]``: where the kriging tiles run."""
    d = ComputeSettings()
    cp = doc.section(cfg, "compute")
    mode = doc.choice(cp, "mode", d.mode, "compute", COMPUTE_MODES)
    scheduler = cp.get("scheduler", d.scheduler)
    if not isinstance(scheduler, str):
        doc.add(doc.locate("scheduler", "compute"),
                "[compute] scheduler must be an address such as \"tcp://host:8786\"")
        scheduler = d.scheduler
    return ComputeSettings(
        mode=mode, scheduler=scheduler.strip(),
        workers=int(doc.number(cp, "workers", d.workers, "compute", low=0, high=4096,
                               integer=True)),
        tile_cells=int(doc.number(cp, "tile_cells", d.tile_cells, "compute", low=1024,
                                  high=16_777_216, integer=True)),
    )


def read_map(doc: ConfigDocument, cfg: dict[str, Any]) -> MapSettings:
    """``[map]``: the background of the planners' map (tiles, none, or the DEM relief)."""
    mp = doc.section(cfg, "map")
    if "background" not in mp:
        return MapSettings()
    return MapSettings(background=doc.choice(mp, "background", "tiles", "map",
                                             MAP_BACKGROUNDS))


def _has_link(root: Path, name: str) -> bool:
    """True when some component of ``root / name`` below ``root`` is a symbolic link."""
    p = root
    for part in Path(name).parts:
        p = p / part
        try:
            if p.is_symlink():
                return True
        except OSError:
            return False
    return False


def _resolve_inside(doc: ConfigDocument, root: Path, key: str, name: str) -> Path:
    """Resolve ``name`` inside ``root``; a path that escapes the folder (by ``..``, as an
    absolute path, or through a symbolic link) is refused, as is one that names no file."""
    where = doc.locate(key, "files")
    if not name.strip() or "\0" in name:
        doc.add(where, f"[files] {key} = {name!r} does not name a file")
        return root / DEFAULT_FILES[key]
    try:
        candidate = (root / name).resolve()
        candidate.relative_to(root.resolve())
    except ValueError:
        via = " through a symbolic link" if _has_link(root, name) else ""
        doc.add(where, f"[files] {key} = {name!r} points outside the project folder{via}; "
                "refused")
        return root / DEFAULT_FILES[key]
    except OSError as exc:
        doc.add(where, f"[files] {key} = {name!r} cannot be resolved: "
                f"{exc.strerror or exc}")
        return root / DEFAULT_FILES[key]
    if candidate.exists() and not candidate.is_file():
        doc.add(where, f"[files] {key} = {name!r} is a folder, not a file")
    return candidate


def read_files(doc: ConfigDocument, cfg: dict[str, Any], root: Path) -> dict[str, Path]:
    """``[files]``: every input's path, resolved inside the project folder ``root``
    (defaults :data:`~aquitardmap.config.settings.DEFAULT_FILES`)."""
    files_cfg = doc.section(cfg, "files")
    files: dict[str, Path] = {}
    for key, default in DEFAULT_FILES.items():
        name = files_cfg.get(key, default)
        if not isinstance(name, str):
            doc.add(doc.locate(key, "files"), f"[files] {key} must be a path")
            continue
        files[key] = _resolve_inside(doc, root, key, name)
    return files


def _read_material(doc: ConfigDocument, r: Any, i: int,
                   codes: set[str]) -> MaterialRule | None:
    """The ``i``-th ``[[materials]]`` rule (0-based), or None when it is unusable."""
    if not isinstance(r, dict):
        doc.add(doc.locate("", "materials", i), f"materials rule {i + 1} must be a table")
        return None
    for key in r:
        if key not in MATERIAL_KEYS:
            doc.add(doc.locate(key, "materials", i), f"materials rule {i + 1}: unknown key "
                    f"{key!r}; expected {', '.join(MATERIAL_KEYS)}")
    unit = r.get("unit")
    if not isinstance(unit, str) or unit not in codes:
        doc.add(doc.locate("unit", "materials", i), f"materials rule {i + 1}: unit must be "
                f"a unit code of the stack ({', '.join(sorted(codes))}), got {unit!r}")
        return None
    words = r.get("words", [])
    if isinstance(words, str):
        words = [words]
    if not isinstance(words, list) or not all(isinstance(w, str) and w.strip()
                                              for w in words):
        doc.add(doc.locate("words", "materials", i),
                f"materials rule {i + 1}: words must be a list of non-empty strings")
        return None
    pattern = r.get("pattern", "")
    if not isinstance(pattern, str):
        doc.add(doc.locate("pattern", "materials", i),
                f"materials rule {i + 1}: pattern must be a string")
        return None
    if not words and not pattern:
        doc.add(doc.locate("", "materials", i),
                f"materials rule {i + 1}: give words or a pattern")
        return None
    try:
        return MaterialRule(unit, tuple(words), pattern)
    except re.error as exc:
        doc.add(doc.locate("pattern", "materials", i), f"materials rule {i + 1}: pattern is "
                f"not a valid regular expression ({exc})")
        return None


def read_materials(doc: ConfigDocument, cfg: dict[str, Any],
                   codes: set[str]) -> tuple[MaterialRule, ...]:
    """``[[materials]]``: the ordered rules that map a log's words to the unit ``codes``
    (see :mod:`aquitardmap.config.materials`)."""
    rules_cfg = cfg.get("materials", [])
    if not isinstance(rules_cfg, list):
        doc.add(doc.locate("", "materials"), "materials must be a list of [[materials]] "
                "tables")
        return ()
    rules = (_read_material(doc, r, i, codes) for i, r in enumerate(rules_cfg))
    return tuple(rule for rule in rules if rule is not None)
