"""Read and validate ``project.toml``: the stack of units, the grid and the thresholds.

The configuration is data only: it is parsed with :mod:`tomllib`, never evaluated, and every
path it names is resolved inside the project folder. A path that escapes the folder is
refused.

Example ``project.toml`` (every key below ``[project]``, ``[grid]`` and ``[[units]]`` has a
documented default)::

    [project]
    name = "Ostrel Valley"
    crs = "EPSG:32632"

    [grid]
    cell_size_m = 50

    [[units]]
    code = "SAND"
    name = "Surficial sand"
    role = "cover"
    effective_porosity = 0.30
    k_default_m_s = 1e-4
    k_method = "hazen"

Zones come in two tiers (:class:`ScreeningThresholds`): ``p_window_threshold`` and
``p_thin_threshold`` set the *likely* tier, ``p_window_possible_threshold`` and
``p_thin_possible_threshold`` the *possible* tier, the risk tolerance (what the holes cannot
rule out)::

    [screening]
    p_window_possible_threshold = 0.2
    p_thin_possible_threshold = 0.2
"""

from __future__ import annotations

import hashlib
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pyproj import CRS
from pyproj.exceptions import CRSError

from aquitardmap.config.materials import MaterialRule
from aquitardmap.errors import ProblemList
from aquitardmap.geostat.variogram import VariogramModel

PROJECT_FILE = "project.toml"
ROLES = ("cover", "aquitard", "aquifer")
K_METHODS = ("hazen", "kozeny_carman", "slichter", "terzaghi", "beyer", "none")
CRUST_TREATMENTS = ("raise_k", "not_protective")
VARIOGRAM_MODELS = ("spherical", "exponential", "gaussian")
ANISOTROPY_CHOICES = ("none", "auto")
#: [kriging] external_drift: the ground elevation (DEM) as an external drift of the total
#: aquitard thickness behind the probability maps: never, always, or when cross-validation
#: says it helps.
EXTERNAL_DRIFT_CHOICES = ("none", "ground", "auto")
ZONE_BASES = ("probability", "kriged_thickness")
#: Ways to make P(window) and P(thin) (``[screening] probability_method``).
PROBABILITY_METHODS = ("indicator", "latent_gaussian")
DRILLING_TARGETS = ("thin", "window", "both")
COMPUTE_MODES = ("single", "dask")

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
REQUIRED_FILES = ("collars", "intervals")
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


_SCREENING_DEFAULTS = ScreeningThresholds()


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
        mode: ``"single"`` (default): in the running process; ``"dask"``: on a Dask cluster
            (optional extra ``aquitardmap[dask]``).
        scheduler: address of an existing Dask scheduler, e.g. ``"tcp://10.0.0.5:8786"``;
            empty: start local worker processes.
        workers: local worker processes when no scheduler is given (0: one per CPU core).
        tile_cells: grid cells per tile, the unit of work and of working memory.
    """

    mode: str = "single"
    scheduler: str = ""
    workers: int = 0
    tile_cells: int = 65_536


@dataclass(frozen=True)
class Project:
    """A validated project: where its files are and every setting of the run."""

    root: Path
    name: str
    crs: CRS
    cell_size_m: float
    buffer_m: float
    units: tuple[Unit, ...]
    kriging: KrigingSettings = field(default_factory=KrigingSettings)
    hydraulics: HydraulicSettings = field(default_factory=HydraulicSettings)
    screening: ScreeningThresholds = field(default_factory=ScreeningThresholds)
    qa: QASettings = field(default_factory=QASettings)
    files: dict[str, Path] = field(default_factory=dict)
    compute: ComputeSettings = field(default_factory=ComputeSettings)
    config_sha256: str = ""
    materials: tuple[MaterialRule, ...] = ()
    drilling: DrillingSettings = field(default_factory=DrillingSettings)
    max_grid_cells: int = MAX_GRID_CELLS

    @property
    def unit_codes(self) -> tuple[str, ...]:
        return tuple(u.code for u in self.units)

    def unit(self, code: str) -> Unit:
        for u in self.units:
            if u.code == code:
                return u
        raise KeyError(code)

    @property
    def column_units(self) -> tuple[Unit, ...]:
        """Units above the protected aquifer (the first unit whose role is ``aquifer``)."""
        out = []
        for u in self.units:
            if u.role == "aquifer":
                break
            out.append(u)
        return tuple(out)

    @property
    def aquitard_units(self) -> tuple[Unit, ...]:
        """Aquitard units above the protected aquifer, top to bottom."""
        return tuple(u for u in self.column_units if u.role == "aquitard")

    @property
    def aquifer_unit(self) -> Unit:
        return next(u for u in self.units if u.role == "aquifer")

    def file(self, key: str) -> Path | None:
        """Path of input ``key`` (``collars``, ``dem``, ...) or None if it is absent."""
        p = self.files.get(key)
        return p if p is not None and p.exists() else None


def _locate(text: str, key: str, table: str | None = None, index: int = 0) -> tuple[int, int]:
    """Best-effort (line, column) of ``key = ...`` inside ``[table]`` or the ``index``-th
    ``[[table]]``; (0, 0) when it cannot be found. Used only to point messages."""
    lines = text.splitlines()
    start = 0
    if table is not None:
        header = re.compile(r"^\s*\[\[\s*" + re.escape(table) + r"\s*\]\]|^\s*\[\s*"
                            + re.escape(table) + r"\s*\]")
        seen = -1
        start = None
        for i, ln in enumerate(lines):
            if header.match(ln):
                seen += 1
                if seen == index:
                    start = i
                    break
        if start is None:
            return (0, 0)
        if key == "":
            return (start + 1, 1)
    pat = re.compile(r"^(\s*)" + re.escape(key) + r"\s*=")
    for i in range(start + (1 if table else 0), len(lines)):
        if table is not None and re.match(r"^\s*\[", lines[i]):
            break
        m = pat.match(lines[i])
        if m:
            return (i + 1, len(m.group(1)) + 1)
    return (start + 1, 1) if table is not None else (0, 0)


class _Table(dict):
    """A TOML table that remembers which keys the reader asked for, so that every key it
    never asked for (a typo such as ``thin_thicknes_m``) can be reported instead of being
    silently ignored while its default is used."""

    def __init__(self, data: dict[str, Any], name: str, index: int | None = None) -> None:
        super().__init__(data)
        self.name = name
        self.index = index
        self.asked: set[str] = set()

    def get(self, key: str, default: Any = None) -> Any:
        self.asked.add(key)
        return super().get(key, default)

    def __getitem__(self, key: str) -> Any:
        self.asked.add(key)
        return super().__getitem__(key)

    def __contains__(self, key: object) -> bool:
        self.asked.add(str(key))
        return super().__contains__(key)


def _section(problems: ProblemList, path: Path, text: str, cfg: dict[str, Any], key: str,
             tables: list[_Table]) -> _Table:
    """``cfg[key]`` as a tracked table; a value that is not a table is reported."""
    value = dict.get(cfg, key, {})
    if not isinstance(value, dict):
        problems.add(path, *_locate(text, key), f"{key} must be a table ([{key}] followed "
                     f"by its keys), got {value!r}")
        value = {}
    tbl = _Table(value, key)
    tables.append(tbl)
    return tbl


def _unknown_keys(problems: ProblemList, path: Path, text: str, tables: list[_Table]) -> None:
    """Report every key of every table that the reader never asked for."""
    for tbl in tables:
        unknown = [k for k in dict.keys(tbl) if k not in tbl.asked]
        where = f"[[{tbl.name}]] {tbl.index + 1}" if tbl.index is not None else f"[{tbl.name}]"
        for k in unknown:
            line, col = _locate(text, k, tbl.name, tbl.index or 0)
            problems.add(path, line, col, f"unknown key {k!r} in {where}; expected one of "
                         f"{', '.join(sorted(tbl.asked))}")


def _number(problems: ProblemList, path: Path, text: str, tbl: dict[str, Any], key: str,
            default: float, table: str, index: int = 0, *, low: float | None = None,
            high: float | None = None, low_open: bool = False,
            integer: bool = False) -> float:
    value = tbl.get(key, default)
    line, col = _locate(text, key, table, index)
    if isinstance(value, bool) or not isinstance(value, int | float):
        problems.add(path, line, col, f"[{table}] {key} must be a number, got {value!r}")
        return float(default)
    value = float(value)
    if not math.isfinite(value):
        problems.add(path, line, col, f"[{table}] {key} must be a finite number, got {value}")
        return float(default)
    if integer and value != int(value):
        problems.add(path, line, col, f"[{table}] {key} must be a whole number, got {value:g}")
        return float(default)
    if low is not None and (value <= low if low_open else value < low):
        rel = ">" if low_open else ">="
        problems.add(path, line, col, f"[{table}] {key} must be {rel} {low}, got {value}")
    if high is not None and value > high:
        problems.add(path, line, col, f"[{table}] {key} must be <= {high}, got {value}")
    return value


def _resolve_inside(problems: ProblemList, path: Path, text: str, root: Path, key: str,
                    name: str) -> Path:
    """Resolve ``name`` inside ``root``; a path that escapes the folder (by ``..``, as an
    absolute path, or through a symbolic link) is refused, as is one that names no file."""
    line, col = _locate(text, key, "files")
    if not name.strip() or "\0" in name:
        problems.add(path, line, col, f"[files] {key} = {name!r} does not name a file")
        return root / DEFAULT_FILES[key]
    try:
        candidate = (root / name).resolve()
        candidate.relative_to(root.resolve())
    except ValueError:
        via = " through a symbolic link" if _has_link(root, name) else ""
        problems.add(path, line, col, f"[files] {key} = {name!r} points outside the project "
                     f"folder{via}; refused")
        return root / DEFAULT_FILES[key]
    except OSError as exc:
        problems.add(path, line, col, f"[files] {key} = {name!r} cannot be resolved: "
                     f"{exc.strerror or exc}")
        return root / DEFAULT_FILES[key]
    if candidate.exists() and not candidate.is_file():
        problems.add(path, line, col, f"[files] {key} = {name!r} is a folder, not a file")
    return candidate


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


def _flag(problems: ProblemList, path: Path, text: str, tbl: dict[str, Any], key: str,
          default: bool, table: str) -> bool:
    value = tbl.get(key, default)
    if not isinstance(value, bool):
        problems.add(path, *_locate(text, key, table), f"[{table}] {key} must be true or "
                     f"false, got {value!r}")
        return default
    return value


def _choice(problems: ProblemList, path: Path, text: str, tbl: dict[str, Any], key: str,
            default: str, table: str, choices: tuple[str, ...]) -> str:
    value = tbl.get(key, default)
    if value not in choices:
        problems.add(path, *_locate(text, key, table), f"[{table}] {key} must be one of "
                     f"{', '.join(choices)}, got {value!r}")
        return default
    return value


VARIOGRAM_KEYS = ("model", "nugget", "psill", "range_m", "anisotropy_ratio",
                  "anisotropy_angle_deg", "model2", "psill2", "range2_m")


def _read_variograms(problems: ProblemList, path: Path, text: str, cfg: Any,
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
        problems.add(path, *_locate(text, "variograms"), "variograms must hold one table per "
                     "surface, e.g. [variograms.aquitard]")
        return out
    for name, tbl in cfg.items():
        table = f"variograms.{name}"
        where = _locate(text, "", table)
        if name not in surfaces:
            problems.add(path, *where, f"[{table}]: {name!r} is not a kriged surface; "
                         f"expected one of {', '.join(surfaces)}")
            continue
        if not isinstance(tbl, dict):
            problems.add(path, *where, f"[{table}] must be a table")
            continue
        for key in tbl:
            if key not in VARIOGRAM_KEYS:
                problems.add(path, *_locate(text, key, table), f"[{table}] unknown key "
                             f"{key!r}; expected {', '.join(VARIOGRAM_KEYS)}")
        before = len(problems.problems)
        model = tbl.get("model")
        if model not in VARIOGRAM_MODELS:
            problems.add(path, *(_locate(text, "model", table) if "model" in tbl else where),
                         f"[{table}] model must be one of {', '.join(VARIOGRAM_MODELS)}, got "
                         f"{model!r}")
        for key in ("psill", "range_m"):
            if key not in tbl:
                problems.add(path, *where, f"[{table}] {key} is required")
        model2 = tbl.get("model2", "")
        if model2 not in ("", *VARIOGRAM_MODELS):
            problems.add(path, *_locate(text, "model2", table), f"[{table}] model2 must be "
                         f"one of {', '.join(VARIOGRAM_MODELS)}, got {model2!r}")
        if model2 and not {"psill2", "range2_m"} <= set(tbl):
            problems.add(path, *_locate(text, "model2", table),
                         f"[{table}] model2 needs psill2 and range2_m")
        vals = {
            "nugget": _number(problems, path, text, tbl, "nugget", 0.0, table, low=0),
            "psill": _number(problems, path, text, tbl, "psill", 1.0, table, low=0,
                             low_open=True),
            "range_m": _number(problems, path, text, tbl, "range_m", 1.0, table, low=0,
                               low_open=True),
            "anisotropy_ratio": _number(problems, path, text, tbl, "anisotropy_ratio", 1.0,
                                        table, low=1.0, high=100.0),
            "anisotropy_angle_deg": _number(problems, path, text, tbl, "anisotropy_angle_deg",
                                            0.0, table, low=-360.0, high=360.0),
            "psill2": _number(problems, path, text, tbl, "psill2", 0.0, table, low=0),
            "range2_m": _number(problems, path, text, tbl, "range2_m", 0.0, table, low=0),
        }
        if model2 and "range2_m" in tbl and vals["range2_m"] <= 0:
            problems.add(path, *_locate(text, "range2_m", table),
                         f"[{table}] range2_m must be > 0")
        if len(problems.problems) == before:
            out[name] = VariogramModel(model, vals["nugget"], vals["psill"], vals["range_m"],
                                       vals["anisotropy_ratio"], vals["anisotropy_angle_deg"],
                                       model2, vals["psill2"] if model2 else 0.0,
                                       vals["range2_m"] if model2 else 0.0)
    return out


def _read_materials(problems: ProblemList, path: Path, text: str, cfg: Any,
                    codes: set[str]) -> tuple[MaterialRule, ...]:
    """The ordered ``[[materials]]`` rules (see :mod:`aquitardmap.config.materials`)."""
    if not isinstance(cfg, list):
        problems.add(path, *_locate(text, "", "materials"),
                     "materials must be a list of [[materials]] tables")
        return ()
    rules = []
    for i, r in enumerate(cfg):
        where = _locate(text, "", "materials", i)
        if not isinstance(r, dict):
            problems.add(path, *where, f"materials rule {i + 1} must be a table")
            continue
        for key in r:
            if key not in ("unit", "words", "pattern"):
                problems.add(path, *_locate(text, key, "materials", i),
                             f"materials rule {i + 1}: unknown key {key!r}; expected unit, "
                             "words, pattern")
        unit = r.get("unit")
        if not isinstance(unit, str) or unit not in codes:
            problems.add(path, *_locate(text, "unit", "materials", i),
                         f"materials rule {i + 1}: unit must be a unit code of the stack "
                         f"({', '.join(sorted(codes))}), got {unit!r}")
            continue
        words = r.get("words", [])
        if isinstance(words, str):
            words = [words]
        if not isinstance(words, list) or not all(isinstance(w, str) and w.strip()
                                                  for w in words):
            problems.add(path, *_locate(text, "words", "materials", i),
                         f"materials rule {i + 1}: words must be a list of non-empty strings")
            continue
        pattern = r.get("pattern", "")
        if not isinstance(pattern, str):
            problems.add(path, *_locate(text, "pattern", "materials", i),
                         f"materials rule {i + 1}: pattern must be a string")
            continue
        if not words and not pattern:
            problems.add(path, *where, f"materials rule {i + 1}: give words or a pattern")
            continue
        try:
            rules.append(MaterialRule(unit, tuple(words), pattern))
        except re.error as exc:
            problems.add(path, *_locate(text, "pattern", "materials", i),
                         f"materials rule {i + 1}: pattern is not a valid regular expression "
                         f"({exc})")
    return tuple(rules)


def _read_drilling(problems: ProblemList, path: Path, text: str, root: Path,
                   dr: Any) -> DrillingSettings:
    """The ``[drilling]`` table (see :class:`DrillingSettings`; every key has a default)."""
    if not isinstance(dr, dict):
        problems.add(path, *_locate(text, "drilling"), "drilling must be a table")
        return DrillingSettings()
    for key in dr:
        if key not in ("holes", "p_low", "p_high", "target", "min_spacing_m",
                       "priority_grid"):
            problems.add(path, *_locate(text, key, "drilling"), f"[drilling] unknown key "
                         f"{key!r}; expected holes, p_low, p_high, target, min_spacing_m, "
                         "priority_grid")
    holes = _number(problems, path, text, dr, "holes", 5, "drilling", low=1, high=1000)
    if holes != int(holes):
        problems.add(path, *_locate(text, "holes", "drilling"),
                     f"[drilling] holes must be a whole number, got {holes:g}")
    p_low = _number(problems, path, text, dr, "p_low", 0.1, "drilling", low=0, low_open=True,
                    high=1.0)
    p_high = _number(problems, path, text, dr, "p_high", 0.9, "drilling", low=0,
                     low_open=True, high=1.0)
    if not p_low < p_high < 1.0:
        problems.add(path, *_locate(text, "p_high", "drilling"), "[drilling] p_high must "
                     f"lie between p_low and 1 (exclusive), got p_low = {p_low:g}, "
                     f"p_high = {p_high:g}")
    target = dr.get("target", "thin")
    if target not in DRILLING_TARGETS:
        problems.add(path, *_locate(text, "target", "drilling"), "[drilling] target must be "
                     f"one of {', '.join(DRILLING_TARGETS)}, got {target!r}")
        target = "thin"
    spacing = _number(problems, path, text, dr, "min_spacing_m", 250.0, "drilling", low=0)
    priority = dr.get("priority_grid", "")
    priority_path = None
    if not isinstance(priority, str):
        problems.add(path, *_locate(text, "priority_grid", "drilling"),
                     "[drilling] priority_grid must be a file name (a string)")
    elif priority.strip():
        try:
            priority_path = (root / priority).resolve()
            priority_path.relative_to(root.resolve())
        except (ValueError, OSError):  # outside the folder, or a NUL byte in the name
            problems.add(path, *_locate(text, "priority_grid", "drilling"),
                         f"[drilling] priority_grid = {priority!r} points outside the "
                         "project folder; refused")
            priority_path = None
        else:
            if not priority_path.is_file():
                problems.add(path, *_locate(text, "priority_grid", "drilling"),
                             f"[drilling] priority_grid {priority!r} not found in the "
                             "project folder")
    return DrillingSettings(int(holes), p_low, p_high, target, spacing, priority_path)


def setting_location(project: Project, table: str, key: str) -> tuple[int, int]:
    """(line, column) of ``key`` in ``[table]`` of the project's ``project.toml`` (the table
    header when the key is absent, (0, 0) when neither is there): for messages about a
    setting that only a later stage can judge."""
    try:
        text = (project.root / PROJECT_FILE).read_text(encoding="utf-8", errors="replace")
    except OSError:
        return (0, 0)
    return _locate(text, key, table)


def read_project(folder: str | Path) -> Project:
    """Read ``folder/project.toml`` and return a validated :class:`Project`.

    Raises:
        InputError: listing every problem found, each with file, line and column.
    """
    root = Path(folder)
    path = root / PROJECT_FILE
    problems = ProblemList()
    if not root.is_dir():
        problems.add(str(root), 0, 0, "project folder not found")
        problems.raise_if_any()
    if not path.is_file():
        problems.add(path, 0, 0, "project.toml not found in the project folder")
        problems.raise_if_any()
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8").removeprefix("\ufeff")  # a byte-order mark is accepted
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        problems.add(path, line, 0, "file is not valid UTF-8 text")
        problems.raise_if_any()
    try:
        cfg = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+), column (\d+)", str(exc))
        line, col = (int(m.group(1)), int(m.group(2))) if m else (0, 0)
        problems.add(path, line, col, f"not valid TOML: {str(exc).split(' (at')[0]}")
        problems.raise_if_any()

    known = {"project", "grid", "units", "kriging", "hydraulics", "screening", "qa", "files",
             "materials", "drilling", "compute", "variograms"}
    for key in cfg:
        if key not in known:
            line, col = _locate(text, "", key)
            if (line, col) == (0, 0):
                line, col = _locate(text, key)
            problems.add(path, line, col, f"unknown section or key {key!r}; "
                         f"expected one of {', '.join(sorted(known))}")

    tables: list[_Table] = []
    proj = _section(problems, path, text, cfg, "project", tables)
    name = proj.get("name")
    if not isinstance(name, str) or not name.strip():
        line, col = _locate(text, "name", "project")
        problems.add(path, line, col, "[project] name is required (a non-empty string)")
        name = ""
    crs_value = proj.get("crs")
    crs = CRS.from_epsg(3857)
    line, col = _locate(text, "crs", "project")
    if crs_value is None:
        problems.add(path, line, col, "[project] crs is required, e.g. crs = \"EPSG:32632\"")
    else:
        try:
            crs = CRS.from_user_input(crs_value)
            unit = crs.axis_info[0].unit_name if crs.axis_info else ""
            if not crs.is_projected or unit not in ("metre", "meter"):
                problems.add(path, line, col, f"[project] crs {crs_value!r} must be a projected "
                             f"CRS in metres (got {crs.name}, axis unit {unit or 'unknown'})")
        except CRSError:
            problems.add(path, line, col, f"[project] crs {crs_value!r} is not a known CRS; "
                         "give an EPSG code such as \"EPSG:32632\"")

    grid = _section(problems, path, text, cfg, "grid", tables)
    if "cell_size_m" not in grid:
        line, col = _locate(text, "", "grid")
        problems.add(path, line, col, "[grid] cell_size_m is required")
    cell = _number(problems, path, text, grid, "cell_size_m", 50.0, "grid", low=0,
                   low_open=True)
    buffer_m = _number(problems, path, text, grid, "buffer_m", 250.0, "grid", low=0)
    max_cells = int(_number(problems, path, text, grid, "max_cells", MAX_GRID_CELLS, "grid",
                            low=1, integer=True))

    units_cfg = cfg.get("units", [])
    units: list[Unit] = []
    if not isinstance(units_cfg, list) or not units_cfg:
        line, col = _locate(text, "", "units")
        if (line, col) == (0, 0):
            line, col = _locate(text, "units")
        problems.add(path, line, col, "at least one [[units]] table is required (the stack, "
                     "top to bottom)")
        units_cfg = []
    seen_codes: set[str] = set()
    for i, u in enumerate(units_cfg):
        if not isinstance(u, dict):
            problems.add(path, *_locate(text, "units"), f"unit {i + 1}: each unit must be a "
                         f"table ([[units]] followed by its keys), got {u!r}")
            continue
        u = _Table(u, "units", i)
        tables.append(u)
        code = u.get("code")
        lc = _locate(text, "code", "units", i)
        if not isinstance(code, str) or not re.fullmatch(r"[A-Za-z0-9_]{1,24}", code or ""):
            problems.add(path, *lc, f"unit {i + 1}: code must be 1-24 letters, digits or "
                         f"underscores, got {code!r}")
            code = f"unit{i + 1}"
        elif code in seen_codes:
            problems.add(path, *lc, f"unit code {code!r} appears twice")
        seen_codes.add(code)
        uname = u.get("name", code)
        if not isinstance(uname, str):
            problems.add(path, *_locate(text, "name", "units", i),
                         f"unit {code}: name must be a string, got {uname!r}")
            uname = code
        role = u.get("role")
        if role not in ROLES:
            problems.add(path, *_locate(text, "role", "units", i),
                         f"unit {code}: role must be one of {', '.join(ROLES)}, got {role!r}")
            role = "cover"
        k_method = u.get("k_method", "none")
        if k_method not in K_METHODS:
            problems.add(path, *_locate(text, "k_method", "units", i),
                         f"unit {code}: k_method must be one of {', '.join(K_METHODS)}, "
                         f"got {k_method!r}")
            k_method = "none"
        por = _number(problems, path, text, u, "effective_porosity", 0.30, "units", i,
                      low=0, low_open=True, high=1.0)
        kdef = _number(problems, path, text, u, "k_default_m_s", 1e-9, "units", i, low=0,
                       low_open=True, high=1.0)
        aniso = _number(problems, path, text, u, "anisotropy_kh_kv", 1.0, "units", i,
                        low=0, low_open=True)
        secondary = _number(problems, path, text, u, "secondary_k_factor", 1.0, "units", i,
                            low=1.0)
        units.append(Unit(code, str(uname), role, por, kdef, k_method, aniso, secondary))
    roles = [u.role for u in units]
    if units and "aquifer" not in roles:
        problems.add(path, 0, 0, "the stack needs a unit with role = \"aquifer\" (the "
                     "aquifer to protect)")
    elif units:
        above = roles[: roles.index("aquifer")]
        if "aquitard" not in above:
            problems.add(path, 0, 0, "the stack needs at least one unit with role = "
                         "\"aquitard\" above the first aquifer")

    kr = _section(problems, path, text, cfg, "kriging", tables)
    model = kr.get("variogram_model", "spherical")
    if model not in VARIOGRAM_MODELS:
        problems.add(path, *_locate(text, "variogram_model", "kriging"),
                     f"[kriging] variogram_model must be one of {', '.join(VARIOGRAM_MODELS)}")
        model = "spherical"
    nested = kr.get("nested_model", "")
    if nested not in ("", *VARIOGRAM_MODELS):
        problems.add(path, *_locate(text, "nested_model", "kriging"),
                     "[kriging] nested_model must be \"\" (none) or one of "
                     f"{', '.join(VARIOGRAM_MODELS)}, got {nested!r}")
        nested = ""
    aniso = kr.get("anisotropy", "none")
    if aniso not in ANISOTROPY_CHOICES:
        problems.add(path, *_locate(text, "anisotropy", "kriging"),
                     f"[kriging] anisotropy must be one of {', '.join(ANISOTROPY_CHOICES)}, "
                     f"got {aniso!r}")
        aniso = "none"
    column_codes = []
    for u in units:
        if u.role == "aquifer":
            break
        column_codes.append(u.code)
    kriging = KrigingSettings(
        variogram_model=model,
        n_lags=int(_number(problems, path, text, kr, "n_lags", 0, "kriging", low=0, high=100,
                           integer=True)),
        max_lag_fraction=_number(problems, path, text, kr, "max_lag_fraction", 0.25, "kriging",
                                 low=0.05, high=1.0),
        max_neighbours=int(_number(problems, path, text, kr, "max_neighbours", 64, "kriging",
                                   low=4, high=5000, integer=True)),
        nested_model=nested,
        lag_width_m=_number(problems, path, text, kr, "lag_width_m", 0.0, "kriging", low=0),
        anisotropy=aniso,
        n_directions=int(_number(problems, path, text, kr, "n_directions", 4, "kriging",
                                 low=2, high=36, integer=True)),
        direction_tolerance_deg=_number(problems, path, text, kr, "direction_tolerance_deg",
                                        22.5, "kriging", low=1.0, high=90.0),
        variograms=_read_variograms(problems, path, text, cfg.get("variograms", {}),
                                    ["aquitard", *column_codes, "aquitard_residual"]),
        external_drift=_choice(problems, path, text, kr, "external_drift", "auto", "kriging",
                               EXTERNAL_DRIFT_CHOICES),
        reuse_variogram_within=_number(problems, path, text, kr, "reuse_variogram_within",
                                       0.1, "kriging", low=0.0, high=1.0),
        reuse_variogram_angle_deg=_number(problems, path, text, kr,
                                          "reuse_variogram_angle_deg", 10.0, "kriging",
                                          low=0.0, high=90.0),
    )
    hy = _section(problems, path, text, cfg, "hydraulics", tables)
    hydraulics = HydraulicSettings(
        groundwater_temp_c=_number(problems, path, text, hy, "groundwater_temp_c", 10.0,
                                   "hydraulics", low=0.0, high=40.0),
        vertical_gradient=_number(problems, path, text, hy, "vertical_gradient", 1.0,
                                  "hydraulics", low=0, low_open=True, high=100.0),
        hazen_c=_number(problems, path, text, hy, "hazen_c", 100.0, "hydraulics", low=0,
                        low_open=True, high=1000.0),
        terzaghi_c=_number(problems, path, text, hy, "terzaghi_c", 10.7e-3, "hydraulics",
                           low=6.1e-3, high=10.7e-3),
        crust_depth_m=_number(problems, path, text, hy, "crust_depth_m", 3.0, "hydraulics",
                              low=0.0, high=50.0),
        crust_k_factor=_number(problems, path, text, hy, "crust_k_factor", 100.0,
                               "hydraulics", low=1.0, high=1e6),
        crust_treatment=str(hy.get("crust_treatment", "raise_k")),
        effective_diffusion_m2_s=_number(problems, path, text, hy,
                                         "effective_diffusion_m2_s", 5e-10, "hydraulics",
                                         low=0, low_open=True, high=1e-8),
    )
    if hydraulics.crust_treatment not in CRUST_TREATMENTS:
        problems.add(path, *_locate(text, "crust_treatment", "hydraulics"),
                     f"[hydraulics] crust_treatment must be one of "
                     f"{', '.join(CRUST_TREATMENTS)}, got {hy.get('crust_treatment')!r}")
    sc = _section(problems, path, text, cfg, "screening", tables)
    screening = ScreeningThresholds(
        window_thickness_m=_number(problems, path, text, sc, "window_thickness_m", 1.0,
                                   "screening", low=0),
        thin_thickness_m=_number(problems, path, text, sc, "thin_thickness_m", 5.0,
                                 "screening", low=0),
        fast_travel_time_yr=_number(problems, path, text, sc, "fast_travel_time_yr", 50.0,
                                    "screening", low=0, low_open=True),
        piercing_radius_m=_number(problems, path, text, sc, "piercing_radius_m", 500.0,
                                  "screening", low=0, low_open=True),
        piercing_flag_per_km2=_number(problems, path, text, sc, "piercing_flag_per_km2", 10.0,
                                      "screening", low=0, low_open=True),
        zone_basis=_choice(problems, path, text, sc, "zone_basis", "probability", "screening",
                           ZONE_BASES),
        p_window_threshold=_number(problems, path, text, sc, "p_window_threshold",
                                   _SCREENING_DEFAULTS.p_window_threshold, "screening",
                                   low=0, low_open=True, high=1.0),
        p_thin_threshold=_number(problems, path, text, sc, "p_thin_threshold",
                                 _SCREENING_DEFAULTS.p_thin_threshold, "screening", low=0,
                                 low_open=True, high=1.0),
        p_window_possible_threshold=_number(
            problems, path, text, sc, "p_window_possible_threshold",
            _SCREENING_DEFAULTS.p_window_possible_threshold, "screening", low=0,
            low_open=True, high=1.0),
        p_thin_possible_threshold=_number(
            problems, path, text, sc, "p_thin_possible_threshold",
            _SCREENING_DEFAULTS.p_thin_possible_threshold, "screening", low=0, low_open=True,
            high=1.0),
        probability_draws=int(_number(problems, path, text, sc, "probability_draws", 64,
                                      "screening", low=8, high=5000, integer=True)),
        probability_seed=int(_number(problems, path, text, sc, "probability_seed", 0,
                                     "screening", low=0, integer=True)),
        probability_variance_from_cv=_flag(problems, path, text, sc,
                                           "probability_variance_from_cv", True, "screening"),
        window_latent_floor_m=_number(problems, path, text, sc, "window_latent_floor_m", 3.0,
                                      "screening", low=0, low_open=True),
        window_proof_radius_m=_number(problems, path, text, sc, "window_proof_radius_m", 300.0,
                                      "screening", low=0),
        probability_method=_choice(problems, path, text, sc, "probability_method",
                                   _SCREENING_DEFAULTS.probability_method, "screening",
                                   PROBABILITY_METHODS),
        continuity_ratio=_number(problems, path, text, sc, "continuity_ratio",
                                 _SCREENING_DEFAULTS.continuity_ratio, "screening", low=1.0,
                                 high=20.0),
        chain_corridor_m=_number(problems, path, text, sc, "chain_corridor_m",
                                 _SCREENING_DEFAULTS.chain_corridor_m, "screening", low=0),
        location_sd_m=_number(problems, path, text, sc, "location_sd_m",
                              _SCREENING_DEFAULTS.location_sd_m, "screening", low=0,
                              high=1000.0),
    )
    if screening.thin_thickness_m < screening.window_thickness_m:
        problems.add(path, *_locate(text, "thin_thickness_m", "screening"),
                     "[screening] thin_thickness_m must be >= window_thickness_m")
    for kind in ("window", "thin"):
        likely = getattr(screening, f"p_{kind}_threshold")
        possible = getattr(screening, f"p_{kind}_possible_threshold")
        if possible > likely:
            key = (f"p_{kind}_possible_threshold" if f"p_{kind}_possible_threshold" in sc
                   else f"p_{kind}_threshold")
            problems.add(path, *_locate(text, key, "screening"),
                         f"[screening] p_{kind}_possible_threshold ({possible:g}, the possible "
                         f"tier) must be <= p_{kind}_threshold ({likely:g}, the likely tier)")
    q = _section(problems, path, text, cfg, "qa", tables)
    excl = q.get("exclude_boreholes", [])
    if not isinstance(excl, list) or not all(isinstance(e, str | int) for e in excl):
        problems.add(path, *_locate(text, "exclude_boreholes", "qa"),
                     "[qa] exclude_boreholes must be a list of borehole ids")
        excl = []
    qa = QASettings(
        dem_misfit_m=_number(problems, path, text, q, "dem_misfit_m", 3.0, "qa", low=0,
                             low_open=True),
        exclude_boreholes=tuple(str(e) for e in excl),
        cv_standardised_error_max=_number(problems, path, text, q, "cv_standardised_error_max",
                                          3.0, "qa", low=0, low_open=True),
    )

    drilling = _read_drilling(problems, path, text, root, cfg.get("drilling", {}))
    cp = _section(problems, path, text, cfg, "compute", tables)
    mode = cp.get("mode", "single")
    if mode not in COMPUTE_MODES:
        problems.add(path, *_locate(text, "mode", "compute"),
                     f"[compute] mode must be one of {', '.join(COMPUTE_MODES)}, got {mode!r}")
        mode = "single"
    scheduler = cp.get("scheduler", "")
    if not isinstance(scheduler, str):
        problems.add(path, *_locate(text, "scheduler", "compute"),
                     "[compute] scheduler must be an address such as \"tcp://host:8786\"")
        scheduler = ""
    compute = ComputeSettings(
        mode=mode, scheduler=scheduler.strip(),
        workers=int(_number(problems, path, text, cp, "workers", 0, "compute", low=0,
                            high=4096, integer=True)),
        tile_cells=int(_number(problems, path, text, cp, "tile_cells", 65_536, "compute",
                               low=1024, high=16_777_216, integer=True)),
    )

    files_cfg = _section(problems, path, text, cfg, "files", tables)
    files: dict[str, Path] = {}
    for key, default in DEFAULT_FILES.items():
        name_ = files_cfg.get(key, default)
        if not isinstance(name_, str):
            problems.add(path, *_locate(text, key, "files"), f"[files] {key} must be a path")
            continue
        files[key] = _resolve_inside(problems, path, text, root, key, name_)
    _unknown_keys(problems, path, text, tables)
    materials = _read_materials(problems, path, text, cfg.get("materials", []),
                                {u.code for u in units})
    store_file = files.get("store")
    for key in REQUIRED_FILES:
        if store_file is not None and store_file.is_file():
            break  # the project's boreholes live in its store (aquitardmap.inputs.store)
        if key in files and not files[key].exists():
            problems.add(files[key], 0, 0, f"required input file {files[key].name} not found "
                         "in the project folder")

    problems.raise_if_any()
    return Project(
        root=root.resolve(), name=name, crs=crs, cell_size_m=cell, buffer_m=buffer_m,
        units=tuple(units), kriging=kriging, hydraulics=hydraulics, screening=screening,
        qa=qa, files=files, config_sha256=hashlib.sha256(raw).hexdigest(),
        materials=materials,
        drilling=drilling, compute=compute,
        max_grid_cells=max_cells,
    )
