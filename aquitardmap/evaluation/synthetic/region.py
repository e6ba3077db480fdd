"""Writing a synthetic project folder: inputs, truth rasters, ``truth.json``, hazards.

:func:`make_synthetic_region` draws the truth (:mod:`.truth`), drills it
(:mod:`.boreholes`) and writes the project folder; :func:`hold_back_holes` splits a written
project into earlier drilling and incoming logs. See :mod:`aquitardmap.evaluation.synthetic`.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
from affine import Affine
from pyproj import CRS
from shapely.geometry import Polygon

from aquitardmap.evaluation.demo_stack import (
    CLAY_UNITS,
    COVER_UNIT,
    K_TRUE_M_S,
    STACK,
    project_toml_text,
)
from aquitardmap.evaluation.synthetic.boreholes import (
    CORED,
    GEOTECHNICAL,
    HOLE_LAYOUTS,
    WATER_WELL,
    drill_holes,
    recording_noise,
    write_borehole_tables,
    write_truth_holes,
)
from aquitardmap.evaluation.synthetic.truth import (
    CHARACTERS,
    Truth,
    draw_truth,
    points_in,
    smooth_noise_1d,
)
from aquitardmap.grid import Grid, make_grid, snapped_bounds, write_raster
from aquitardmap.outputs import names as outputs

__all__ = [
    "DEMO_SEED",
    "SyntheticRegion",
    "hold_back_holes",
    "make_synthetic_region",
]

#: Seed of the bundled demo region (``demo_region/``).
DEMO_SEED = 20_515

#: The comment heading a generated ``project.toml`` (the rest: the demo stack and settings).
_TOML_COMMENT = """\
# {name} — an INVENTED, synthetic region written by aquitardmap.evaluation.synthetic (seed {seed},
# character "{character}"). Every place, borehole and value here is synthetic; the truth it
# was drawn from is in truth/.
"""


@dataclass(frozen=True)
class SyntheticRegion:
    """What :func:`make_synthetic_region` wrote.

    Attributes:
        root: the project folder.
        seed, character: generator seed and region character.
        files: input files by key (``collars``, ``intervals``, ``samples``, ``dem``,
            ``boundary``, and ``project`` when a ``project.toml`` was written).
        truth: truth files by key (``ground``, ``SAND``, ``UMC``, ``LMC``, ``LAM``,
            ``aquitard``, ``boreholes``, ``json``).
        grid: the screening grid the truth rasters are on.
        counts: boreholes by kind (``water_well``, ``geotechnical``, ``cored``, ``total``),
            plus ``window_wells`` (water wells placed to prove a window) and
            ``elevation_blunders`` (water wells with a gross ground-elevation error).
        area_km2: study-area polygon area (km²).
        window_area_km2: area of grid cells with no clay at all (truth thickness 0, km²).
        thin_area_km2: area of grid cells with less than 5 m of clay, windows included (km²).
        k_true_m_s: true hydraulic conductivity per unit (m/s).
    """

    root: Path
    seed: int
    character: str
    files: dict[str, Path]
    truth: dict[str, Path]
    grid: Grid
    counts: dict[str, int]
    area_km2: float
    window_area_km2: float
    thin_area_km2: float
    k_true_m_s: dict[str, float]


def _write_boundary(path: Path, polygon: Polygon, crs: CRS) -> Path:
    if path.exists():
        path.unlink()
    gdf = gpd.GeoDataFrame({"name": ["Ostrel Valley study area (synthetic)"]},
                           geometry=[polygon], crs=crs)
    gdf.to_file(path, driver="GeoJSON")
    return path


def _lobe(rng: np.random.Generator, cx: float, cy: float, a_m: float, b_m: float,
          angle: float, wobble: float = 0.15, n: int = 36) -> Polygon:
    """An irregular elliptical polygon (semi-axes a, b; rotated by ``angle`` radians)."""
    t = np.linspace(0.0, 2.0 * np.pi, n, endpoint=False)
    r = 1.0 + wobble * smooth_noise_1d(rng, n, 2.0)
    x, y = a_m * r * np.cos(t), b_m * r * np.sin(t)
    ca, sa = math.cos(angle), math.sin(angle)
    ring = np.round(np.column_stack([cx + ca * x - sa * y, cy + sa * x + ca * y]), 2)
    return Polygon(ring)


def _write_hazards(path: Path, seed: int, truth: Truth, polygon: Polygon,
                   places: dict[str, tuple[float, float]], crs: CRS) -> list[dict]:
    """Invented man-made and slope hazards, written to ``hazards.geojson``.

    A clay pit by the town, a road cutting by the village and a landslide scar on a valley
    side where the clay is moderately thick. Drawn from their own random stream (seeded by
    ``seed``), so the borehole files do not depend on them. They are not in the truth
    grids (the geology) nor in any log. Returns their descriptions for ``truth.json``.
    """
    rng = np.random.default_rng([seed, 4])
    valley = truth.valley

    def clay(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return truth.column(x, y).clay_m

    specs = []
    px, py = points_in(rng, polygon, 1, lambda x, y: (clay(x, y) >= 14.0)
                       & (clay(x, y) <= 18.0), centre=places["Marrowdene"], sd_m=1500.0)
    if px.size:
        specs.append(("Marrowdene brickworks clay pit", "pit", 16.0,
                      _lobe(rng, px[0], py[0], 110.0, 70.0, rng.uniform(0, np.pi), 0.08)))
    ex, ey = points_in(rng, polygon, 1, lambda x, y: clay(x, y) >= 3.0,
                       centre=places["Lidderholt"], sd_m=500.0)
    if ex.size:
        ang = rng.uniform(0, np.pi)
        ca, sa = math.cos(ang), math.sin(ang)
        hw, hl = 20.0, 180.0
        corners = [(-hl, -hw), (hl, -hw), (hl, hw), (-hl, hw)]
        specs.append(("Lidderholt road cutting", "excavation", 6.0, Polygon(
            [(round(ex[0] + ca * u - sa * v, 2), round(ey[0] + sa * u + ca * v, 2))
             for u, v in corners])))
    sx, sy = points_in(rng, polygon, 1, lambda x, y: (valley.across(x, y) > 0.6)
                       & (valley.across(x, y) < 0.8) & (clay(x, y) >= 8.0)
                       & (clay(x, y) <= 12.0))
    if sx.size:
        specs.append(("Old slide scar on the valley side", "landslide_scar", 11.0,
                      _lobe(rng, sx[0], sy[0], 260.0, 150.0, rng.uniform(0, np.pi))))
    if path.exists():
        path.unlink()
    gdf = gpd.GeoDataFrame({"name": [n for n, _, _, _ in specs],
                            "kind": [k for _, k, _, _ in specs],
                            "removed_depth_m": [d for _, _, d, _ in specs]},
                           geometry=[g for _, _, _, g in specs], crs=crs)
    gdf.to_file(path, driver="GeoJSON")
    return [{"name": n, "kind": k, "removed_depth_m": d, "area_m2": round(g.area, 1)}
            for n, k, d, g in specs]


# ------------------------------------------------------------------------------ main API


def make_synthetic_region(
    out_dir: str | Path,
    *,
    seed: int,
    n_holes: int = 400,
    extent_m: tuple[float, float] = (10_000.0, 7_000.0),
    origin_xy: tuple[float, float] = (548_000.0, 6_712_000.0),
    cell_size_m: float = 50.0,
    character: str = "esker_window",
    hole_layout: str | None = None,
    partial_fraction: float | None = None,
    n_cored: int | None = None,
    n_window_wells: int = 6,
    n_elevation_blunders: int = 4,
    dem_cell_size_m: float = 25.0,
    crs: str = "EPSG:32632",
    write_project_toml: bool = False,
    project_name: str | None = None,
    hazards: bool = True,
) -> SyntheticRegion:
    """Generate a synthetic project folder from a known truth and write the truth beside it.

    Args:
        out_dir: folder to write (created if needed; files of the same names are replaced).
        seed: seed of ``numpy.random.default_rng``; the same seed and arguments give the same
            CSV files byte for byte.
        n_holes: number of boreholes of all kinds.
        extent_m: (east-west, north-south) size of the rectangle holding the valley (m);
            about (12000, 10000) for ``"ridge_and_channel"``.
        origin_xy: south-west corner of that rectangle in ``crs`` (m).
        cell_size_m: cell size of the screening grid the truth rasters are written on (m).
        character: one of :data:`CHARACTERS` (``"esker_window"``, ``"channel_cut"``,
            ``"bedrock_highs"``, ``"ridge_and_channel"``).
        hole_layout: ``"clustered"`` (water wells around a town and a village and uniform,
            geotechnical holes by the town and along a road, ``n_window_wells`` planted in
            windows) or ``"even"`` (all holes uniform at random over the study area at least
            0.5 * sqrt(area / n_holes) apart; cored and geotechnical holes taken at random
            among the positions where the clay suits them, fewer if too few do; no planted
            window wells). Default: ``"even"`` for ``"ridge_and_channel"``, else
            ``"clustered"``.
        partial_fraction: fraction of the holes that are geotechnical holes stopping inside
            the clay (censored); default 0.2 for the even layout, 0.3 for the clustered.
        n_cored: number of cored holes with samples (default: ``n_holes / 30``, 2 to 15).
        n_window_wells: water wells placed inside clay windows, reaching the aquifer with no
            clay in their log (fewer if the windows are too small to hold them); clustered
            layout only (the even layout plants none).
        n_elevation_blunders: water wells whose reported ground elevation is off by 6-15 m.
        dem_cell_size_m: cell size of ``dem.tif`` (m).
        crs: projected CRS of every coordinate (metres).
        write_project_toml: also write ``project.toml`` with the demo stack.
        project_name: name written in ``project.toml``.
        hazards: also write ``hazards.geojson`` (a clay pit, a road cutting, a landslide
            scar; from their own random stream, so the other files do not change).

    Returns:
        A :class:`SyntheticRegion` describing the files and the truth.

    Raises:
        ValueError: for an unknown character or inconsistent counts.
    """
    if character not in CHARACTERS:
        raise ValueError(f"character must be one of {', '.join(CHARACTERS)}, got {character!r}")
    if hole_layout is None:
        hole_layout = "even" if character == "ridge_and_channel" else "clustered"
    if hole_layout not in HOLE_LAYOUTS:
        raise ValueError(f"hole_layout must be one of {', '.join(HOLE_LAYOUTS)}, "
                         f"got {hole_layout!r}")
    if hole_layout == "even":
        n_window_wells = 0
    if partial_fraction is None:
        partial_fraction = 0.2 if hole_layout == "even" else 0.3
    if not 0.0 <= partial_fraction <= 0.8:
        raise ValueError(f"partial_fraction must be within 0 to 0.8, got {partial_fraction}")
    if min(extent_m) < 2000.0:
        raise ValueError(f"extent_m must be at least 2000 m each way, got {extent_m}")
    if n_cored is None:
        n_cored = int(min(15, max(2, round(n_holes / 30))))
    n_gt = int(round(partial_fraction * n_holes))
    n_ow = n_holes - n_gt - n_cored
    if n_ow < n_window_wells + n_elevation_blunders or n_ow < 1:
        raise ValueError(f"n_holes={n_holes} leaves {n_ow} water wells, fewer than the "
                         f"{n_window_wells} window wells and {n_elevation_blunders} "
                         "blunders asked for")

    root = Path(out_dir)
    (root / "truth").mkdir(parents=True, exist_ok=True)
    crs_obj = CRS.from_user_input(crs)
    rng = np.random.default_rng(seed)

    truth, polygon = draw_truth(rng, character, origin_xy, extent_m)
    grid = make_grid(polygon, cell_size_m, crs_obj)

    # truth grids at the centres of the screening grid
    xs_c, ys_c = grid.cell_centres()
    gx, gy = np.meshgrid(xs_c, ys_c)
    col = truth.column(gx, gy)
    clay = col.clay_m
    truth_files: dict[str, Path] = {}
    tdir = root / "truth"
    truth_files["ground"] = write_raster(tdir / "ground_elev_m.tif", col.ground_m, grid,
                                         description="true ground elevation", units="m")
    for u in (COVER_UNIT, *CLAY_UNITS):
        truth_files[u] = write_raster(tdir / outputs.unit_thickness(u), col.thickness_m[u],
                                      grid, description=f"true thickness of {u}", units="m")
    truth_files["aquitard"] = write_raster(tdir / outputs.AQUITARD_THICKNESS, clay, grid,
                                           description="true total aquitard thickness",
                                           units="m")

    # DEM: the true ground on a finer grid reaching a little beyond the study area
    pad = 4 * dem_cell_size_m
    bx0, by0, bx1, by1 = snapped_bounds(polygon.bounds, max(cell_size_m, dem_cell_size_m))
    bx0, by0, bx1, by1 = bx0 - pad, by0 - pad, bx1 + pad, by1 + pad
    dw = int(round((bx1 - bx0) / dem_cell_size_m))
    dh = int(round((by1 - by0) / dem_cell_size_m))
    dem_grid = Grid(Affine(dem_cell_size_m, 0.0, bx0, 0.0, -dem_cell_size_m, by1), dw, dh,
                    crs_obj, np.ones((dh, dw), bool))
    dx, dy = dem_grid.cell_centres()
    dgx, dgy = np.meshgrid(dx, dy)
    dem = truth.column(dgx, dgy).ground_m
    files: dict[str, Path] = {}
    files["dem"] = write_raster(root / "dem.tif", np.round(dem, 2), dem_grid,
                                description="ground elevation", units="m")
    files["boundary"] = _write_boundary(root / "boundary.geojson", polygon, crs_obj)

    holes, places = drill_holes(rng, truth, polygon, grid, clay, hole_layout=hole_layout,
                                n_water_wells=n_ow, n_geotechnical=n_gt, n_cored=n_cored,
                                n_window_wells=n_window_wells,
                                n_elevation_blunders=n_elevation_blunders)
    files.update(write_borehole_tables(root, holes))
    truth_files["boreholes"] = write_truth_holes(tdir / "boreholes.csv", holes)
    hazard_meta: list[dict] = []
    if hazards:
        files["hazards"] = root / "hazards.geojson"
        hazard_meta = _write_hazards(files["hazards"], seed, truth, polygon, places, crs_obj)

    if write_project_toml:
        name = project_name or f"Synthetic {character} region (seed {seed})"
        path = root / "project.toml"
        comment = _TOML_COMMENT.format(name=name, seed=seed, character=character)
        path.write_text(project_toml_text(name, comment=comment, crs=crs,
                                          cell_size_m=cell_size_m), encoding="utf-8")
        files["project"] = path

    counts = {kind: sum(h.kind == kind for h in holes)
              for kind in (WATER_WELL, GEOTECHNICAL, CORED)}
    counts["total"] = len(holes)
    counts["window_wells"] = sum(h.in_window for h in holes)
    counts["elevation_blunders"] = sum(h.blunder_m != 0.0 for h in holes)
    cell_km2 = grid.cell_area_m2 / 1e6
    inside = grid.mask
    area_km2 = polygon.area / 1e6
    window_km2 = float(np.sum(inside & (clay <= 0.0)) * cell_km2)
    below_1_km2 = float(np.sum(inside & (clay < 1.0)) * cell_km2)
    thin_km2 = float(np.sum(inside & (clay < 5.0)) * cell_km2)

    meta = {
        "synthetic": True,
        "note": "Invented region generated by aquitardmap.evaluation.synthetic; not real data.",
        "seed": seed,
        "character": character,
        "parameters": {
            "n_holes": n_holes, "extent_m": list(extent_m), "origin_xy": list(origin_xy),
            "cell_size_m": cell_size_m, "partial_fraction": partial_fraction,
            "n_cored": n_cored, "n_window_wells": n_window_wells,
            "n_elevation_blunders": n_elevation_blunders,
            "dem_cell_size_m": dem_cell_size_m, "crs": crs,
        },
        "stack": list(STACK),
        "k_true_m_s": K_TRUE_M_S,
        "hole_counts": counts,
        "areas_km2": {
            "study_area": round(area_km2, 4),
            "study_area_grid_cells": round(float(inside.sum()) * cell_km2, 4),
            "clay_absent": round(window_km2, 4),
            "clay_below_1m": round(below_1_km2, 4),
            "clay_below_5m": round(thin_km2, 4),
        },
        "clay_m_inside": {
            "min": round(float(clay[inside].min()), 3),
            "median": round(float(np.median(clay[inside])), 3),
            "max": round(float(clay[inside].max()), 3),
        },
        "noise": recording_noise(),
        "places": {k: [round(v[0], 1), round(v[1], 1)] for k, v in places.items()},
        "hazards": hazard_meta,
        "files": {k: p.name for k, p in sorted(files.items()) if k != "project"},
        "truth_files": {k: f"truth/{p.name}" for k, p in sorted(truth_files.items())},
    }
    if hole_layout != "clustered":  # recorded only when not the original layout, so the
        meta["parameters"]["hole_layout"] = hole_layout  # demo's truth.json is unchanged
    truth_files["json"] = tdir / "truth.json"
    truth_files["json"].write_text(json.dumps(meta, indent=2, sort_keys=True) + "\n",
                                   encoding="utf-8")

    return SyntheticRegion(root=root, seed=seed, character=character, files=files,
                           truth=truth_files, grid=grid, counts=counts,
                           area_km2=area_km2, window_area_km2=window_km2,
                           thin_area_km2=thin_km2, k_true_m_s=dict(K_TRUE_M_S))


def hold_back_holes(project_dir: str | Path, incoming_dir: str | Path, n_holes: int, *,
                    seed: int) -> list[Path]:
    """Take ``n_holes`` boreholes, chosen at random, out of a project's ``collars.csv``,
    ``intervals.csv`` and ``samples.csv`` and write their rows to ``<table>_new.csv`` in
    ``incoming_dir`` (created): the project then holds the earlier drilling and the
    incoming files the new logs to ``aquitardmap add``. Returns the incoming files."""
    import pandas as pd

    project_dir, incoming_dir = Path(project_dir), Path(incoming_dir)
    tables = {n: pd.read_csv(project_dir / f"{n}.csv", dtype=str)
              for n in ("collars", "intervals", "samples")}
    ids = tables["collars"]["borehole_id"].to_numpy()
    new = set(np.random.default_rng(seed).choice(ids, n_holes, replace=False))
    incoming_dir.mkdir(parents=True, exist_ok=True)
    for name, df in tables.items():
        df[~df["borehole_id"].isin(new)].to_csv(project_dir / f"{name}.csv", index=False)
        df[df["borehole_id"].isin(new)].to_csv(incoming_dir / f"{name}_new.csv", index=False)
    return sorted(incoming_dir.iterdir())
