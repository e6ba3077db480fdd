"""Small generated project folders for the property-based tests, and the sanity checks every
successful run must pass.

A :class:`Spec` describes a project (the stack, the settings, the holes, the optional
boundary and DEM); :func:`render` turns it into the text of every input file, remembering
on which line each borehole, interval, sample and setting was written, so that a test can
break one cell and know exactly which file, line and column the tool must name.
:func:`specs` is the hypothesis strategy of valid specs; they are kept small (at most a
dozen holes, grids of at most a few hundred cells) so that hundreds run in CI time.

The data are invented for the tests; nothing here comes from a real place.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from hypothesis import strategies as st

#: CRSs in metres the generator draws from, each with an origin inside its area of use.
CRS_ORIGINS = {
    "EPSG:32632": (500_000.0, 6_700_000.0),  # UTM 32N
    "EPSG:3067": (400_000.0, 6_900_000.0),  # ETRS89 / TM35FIN
    "EPSG:25833": (400_000.0, 6_000_000.0),  # ETRS89 / UTM 33N
    "EPSG:2056": (2_600_000.0, 1_200_000.0),  # CH1903+ / LV95
}
CODES = ("SAND", "FILL", "CRUST", "UMC", "LMC", "LAM", "SILT", "GRAV", "TILL", "ROCK")


@dataclass
class UnitSpec:
    code: str
    role: str
    porosity: float
    k_default_m_s: float
    k_method: str
    anisotropy: float


@dataclass
class HoleSpec:
    bid: str
    x: float
    y: float
    z: float
    total_depth_m: float
    intervals: list[tuple[float, float, str]]  # (from_m, to_m, unit)
    samples: list[tuple[float, str, str, str, str]] = field(default_factory=list)
    # (depth_m, d10_mm, d60_mm, porosity, k_lab_m_s) as written; "" = blank


@dataclass
class Spec:
    crs: str
    origin: tuple[float, float]
    extent_m: float
    cell_size_m: float
    buffer_m: float
    units: list[UnitSpec]
    holes: list[HoleSpec]
    settings: dict[str, dict[str, object]]  # section -> key -> value (written as TOML)
    exclude: list[str] = field(default_factory=list)
    boundary: str = "none"  # none | project | lonlat | no_crs
    boundary_margin_m: float = 0.0
    dem: str = "none"  # none | project | lonlat | partial
    with_samples: bool = True

    @property
    def column_codes(self) -> list[str]:
        out = []
        for u in self.units:
            if u.role == "aquifer":
                break
            out.append(u.code)
        return out

    def full_holes_used(self) -> int:
        """Holes that reach the aquifer and are not excluded."""
        column = set(self.column_codes)
        n = 0
        for h in self.holes:
            if h.bid in self.exclude or not h.intervals:
                continue
            if any(u not in column for _, _, u in h.intervals):
                n += 1
        return n


# ------------------------------------------------------------------------------ strategies


def _log_uniform(lo: float, hi: float) -> st.SearchStrategy[float]:
    return st.floats(math.log10(lo), math.log10(hi)).map(lambda e: float(f"{10 ** e:.3g}"))


@st.composite
def _units(draw) -> list[UnitSpec]:
    n_cover = draw(st.integers(0, 2))
    n_clay = draw(st.integers(1, 3))
    below = draw(st.sampled_from(["", "aquitard", "aquifer"]))
    roles = ["cover"] * n_cover + ["aquitard"] * n_clay + ["aquifer"] + ([below] if below
                                                                          else [])
    codes = draw(st.permutations(CODES))[: len(roles)]
    out = []
    for code, role in zip(codes, roles, strict=True):
        out.append(UnitSpec(
            code=code, role=role,
            porosity=draw(st.floats(0.05, 0.6).map(lambda v: round(v, 3))),
            k_default_m_s=draw(_log_uniform(1e-12, 1e-2)),
            k_method=draw(st.sampled_from(["none", "hazen", "kozeny_carman"])),
            anisotropy=draw(st.sampled_from([1.0, 2.0, 10.0])),
        ))
    return out


@st.composite
def _hole(draw, i: int, units: list[UnitSpec], origin: tuple[float, float], extent: float,
          position: st.SearchStrategy[float]) -> HoleSpec:
    column = []
    for u in units:
        if u.role == "aquifer":
            break
        column.append(u)
    below = units[len(column):]
    thickness = [draw(st.one_of(st.just(0.0), st.floats(0.1, 25).map(lambda v: round(v, 2))))
                 for _ in column]
    kind = draw(st.sampled_from(["full", "full", "full", "stop", "empty"]))
    gap_at = draw(st.one_of(st.none(), st.integers(0, len(column))))
    ivs: list[tuple[float, float, str]] = []
    depth = 0.0
    stop_at = draw(st.integers(0, len(column) - 1)) if kind == "stop" else None
    for j, (u, t) in enumerate(zip(column, thickness, strict=True)):
        if gap_at == j:
            depth = round(depth + 0.5, 2)
        if stop_at == j:
            part = round(max(0.05, t * draw(st.floats(0.1, 1.0))), 2)
            ivs.append((depth, round(depth + part, 2), u.code))
            depth = round(depth + part, 2)
            break
        if t > 0:
            ivs.append((depth, round(depth + t, 2), u.code))
            depth = round(depth + t, 2)
    if kind == "full":
        for u in below[: draw(st.integers(1, len(below)))]:
            t = draw(st.floats(0.5, 10).map(lambda v: round(v, 2)))
            ivs.append((depth, round(depth + t, 2), u.code))
            depth = round(depth + t, 2)
    if kind == "empty":
        ivs = []
        depth = draw(st.floats(1, 30).map(lambda v: round(v, 2)))
    extra = draw(st.sampled_from([0.0, 0.0, 0.0, 1.5]))
    td = round(max(depth, 0.5) + extra, 2)
    samples = []
    if ivs and draw(st.booleans()):
        for _ in range(draw(st.integers(1, 2))):
            d = round(draw(st.floats(0, 1)) * ivs[-1][1], 2)
            d10 = draw(_log_uniform(5e-4, 2.0))
            d60 = (f"{d10 * draw(st.floats(1, 12)):.4g}" if draw(st.booleans()) else "")
            por = f"{draw(st.floats(0.05, 0.6)):.3f}" if draw(st.booleans()) else ""
            klab = f"{draw(_log_uniform(1e-12, 1e-3)):.3g}" if draw(st.booleans()) else ""
            samples.append((d, f"{d10:.4g}", d60, por, klab))
    x = round(origin[0] + draw(position) * extent, 1)
    y = round(origin[1] + draw(position) * extent, 1)
    z = round(draw(st.floats(-5, 400)), 2)
    return HoleSpec(f"H-{i:02d}", x, y, z, td, ivs, samples)


@st.composite
def specs(draw, max_holes: int = 10) -> Spec:
    """A valid project: 3 to ``max_holes`` holes over 0.3 to 3 km, 4 to 16 cells across."""
    crs = draw(st.sampled_from(sorted(CRS_ORIGINS)))
    origin = CRS_ORIGINS[crs]
    extent = draw(st.floats(300, 3000).map(lambda v: round(v, -1)))
    cell = round(extent / draw(st.integers(4, 16)), 1)
    units = draw(_units())
    # Mostly spread holes; sometimes on a few shared positions (coincident, collinear).
    position = draw(st.sampled_from([
        st.floats(0, 1),
        st.sampled_from([0.0, 0.5, 1.0]),
        st.floats(0, 1) | st.just(0.5),
    ]))
    n = draw(st.integers(3, max_holes))
    holes = [draw(_hole(i, units, origin, extent, position)) for i in range(n)]
    window = draw(st.sampled_from([0.0, 0.5, 1.0, 2.0]))
    settings: dict[str, dict[str, object]] = {
        "kriging": {
            "variogram_model": draw(st.sampled_from(["spherical", "exponential", "gaussian"])),
            "n_lags": draw(st.sampled_from([0, 0, 3, 8])),
            "max_lag_fraction": draw(st.sampled_from([0.25, 0.5, 1.0])),
            "max_neighbours": draw(st.sampled_from([4, 8, 64])),
            "nested_model": draw(st.sampled_from(["", "", "exponential"])),
            "anisotropy": draw(st.sampled_from(["none", "none", "auto"])),
        },
        "hydraulics": {
            "groundwater_temp_c": draw(st.sampled_from([0.0, 8.0, 25.0, 40.0])),
            "vertical_gradient": draw(st.sampled_from([0.01, 0.3, 1.0, 5.0])),
            "hazen_c": draw(st.sampled_from([40.0, 100.0, 150.0])),
            "crust_treatment": draw(st.sampled_from(["raise_k", "not_protective"])),
            "crust_depth_m": draw(st.sampled_from([0.0, 3.0])),
        },
        "screening": {
            "window_thickness_m": window,
            "thin_thickness_m": window + draw(st.sampled_from([0.0, 4.0, 20.0])),
            "fast_travel_time_yr": draw(st.sampled_from([0.5, 50.0, 1e4])),
            "zone_basis": draw(st.sampled_from(["probability", "kriged_thickness"])),
            "probability_draws": draw(st.sampled_from([8, 16])),
            "probability_seed": draw(st.integers(0, 3)),
            "window_latent_floor_m": draw(st.sampled_from([0.01, 3.0, 1e6])),
            "window_proof_radius_m": draw(st.sampled_from([0.0, 300.0, 1e6])),
        },
        "qa": {"dem_misfit_m": draw(st.sampled_from([0.5, 3.0, 100.0]))},
    }
    exclude = [h.bid for h in holes if draw(st.integers(0, 9)) == 0]
    return Spec(
        crs=crs, origin=origin, extent_m=extent, cell_size_m=cell,
        buffer_m=draw(st.sampled_from([0.0, cell, extent / 4])), units=units, holes=holes,
        settings=settings, exclude=exclude,
        boundary=draw(st.sampled_from(["none", "none", "project", "lonlat", "no_crs"])),
        boundary_margin_m=draw(st.sampled_from([cell, extent / 3])),
        dem=draw(st.sampled_from(["none", "project", "lonlat", "partial"])),
        with_samples=draw(st.booleans()),
    )


# ------------------------------------------------------------------------------- rendering


def _toml_value(v: object) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v)  # a JSON string is a valid TOML basic string
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise TypeError(v)


@dataclass
class Rendered:
    """Text of every input file plus where things were written.

    ``lines[file]`` is the list of lines of a text file; ``where`` maps
    ``(file, key)`` to a 1-based line: ``("collars.csv", bid)``,
    ``("intervals.csv", (bid, k))``, ``("samples.csv", (bid, k))``,
    ``("project.toml", "section.key")`` or ``("project.toml", "units.<i>.key")``.
    """

    lines: dict[str, list[str]]
    where: dict[tuple[str, object], int]
    binary: dict[str, bytes] = field(default_factory=dict)

    def write(self, folder: Path) -> Path:
        folder.mkdir(parents=True, exist_ok=True)
        for name, lines in self.lines.items():
            (folder / name).write_bytes(("\n".join(lines) + "\n").encode("utf-8"))
        for name, data in self.binary.items():
            (folder / name).write_bytes(data)
        return folder


def render(spec: Spec) -> Rendered:
    where: dict[tuple[str, object], int] = {}
    t = ["[project]", 'name = "Generated test project"', f'crs = "{spec.crs}"', "",
         "[grid]", f"cell_size_m = {spec.cell_size_m!r}", f"buffer_m = {spec.buffer_m!r}",
         "max_cells = 5000  # generated grids have at most about 1000 cells"]
    where[("project.toml", "project.crs")] = 3
    where[("project.toml", "grid.cell_size_m")] = 6
    where[("project.toml", "grid.buffer_m")] = 7
    for i, u in enumerate(spec.units):
        t += ["", "[[units]]"]
        for key, value in (("code", u.code), ("name", f"Unit {u.code}"), ("role", u.role),
                           ("effective_porosity", u.porosity),
                           ("k_default_m_s", u.k_default_m_s), ("k_method", u.k_method),
                           ("anisotropy_kh_kv", u.anisotropy)):
            t.append(f"{key} = {_toml_value(value)}")
            where[("project.toml", f"units.{i}.{key}")] = len(t)
    for section, values in spec.settings.items():
        t += ["", f"[{section}]"]
        for key, value in values.items():
            t.append(f"{key} = {_toml_value(value)}")
            where[("project.toml", f"{section}.{key}")] = len(t)
        if section == "qa":
            t.append(f"exclude_boreholes = {_toml_value(spec.exclude)}")
            where[("project.toml", "qa.exclude_boreholes")] = len(t)

    c = ["borehole_id,x,y,ground_elev_m,total_depth_m"]
    iv = ["borehole_id,from_m,to_m,unit"]
    s = ["borehole_id,depth_m,d10_mm,d60_mm,porosity,k_lab_m_s"]
    for h in spec.holes:
        c.append(f"{h.bid},{h.x:.1f},{h.y:.1f},{h.z:.2f},{h.total_depth_m:.2f}")
        where[("collars.csv", h.bid)] = len(c)
        for k, (a, b, u) in enumerate(h.intervals):
            iv.append(f"{h.bid},{a:.2f},{b:.2f},{u}")
            where[("intervals.csv", (h.bid, k))] = len(iv)
        for k, (d, d10, d60, por, klab) in enumerate(h.samples):
            s.append(f"{h.bid},{d:.2f},{d10},{d60},{por},{klab}")
            where[("samples.csv", (h.bid, k))] = len(s)
    lines = {"project.toml": t, "collars.csv": c, "intervals.csv": iv}
    if spec.with_samples:
        lines["samples.csv"] = s
    out = Rendered(lines, where)
    if spec.boundary != "none":
        out.binary["boundary.geojson"] = _boundary(spec)
    if spec.dem != "none":
        out.binary["dem.tif"] = _dem(spec)
    return out


def hole_bounds(spec: Spec) -> tuple[float, float, float, float]:
    xs = [h.x for h in spec.holes]
    ys = [h.y for h in spec.holes]
    return min(xs), min(ys), max(xs), max(ys)


def _boundary(spec: Spec) -> bytes:
    from pyproj import Transformer

    x0, y0, x1, y1 = hole_bounds(spec)
    m = spec.boundary_margin_m
    ring = [(x0 - m, y0 - m), (x1 + m, y0 - m), (x1 + m, y1 + m), (x0 - m, y1 + m)]
    # densify the edges so that a reprojected rectangle stays close to the original
    dense = []
    for (ax, ay), (bx, by) in zip(ring, ring[1:] + ring[:1], strict=True):
        dense += [(ax + (bx - ax) * f, ay + (by - ay) * f) for f in np.linspace(0, 1, 8)[:-1]]
    dense.append(dense[0])
    doc: dict[str, object] = {"type": "FeatureCollection"}
    if spec.boundary == "project":
        doc["crs"] = {"type": "name", "properties": {
            "name": "urn:ogc:def:crs:EPSG::" + spec.crs.split(":")[1]}}
    elif spec.boundary == "lonlat":
        tr = Transformer.from_crs(spec.crs, "EPSG:4326", always_xy=True)
        dense = [tr.transform(x, y) for x, y in dense]
    doc["features"] = [{"type": "Feature", "properties": {"name": "generated area"},
                        "geometry": {"type": "Polygon", "coordinates": [dense]}}]
    return json.dumps(doc).encode("utf-8")


def _dem(spec: Spec) -> bytes:
    import rasterio
    from affine import Affine
    from rasterio.io import MemoryFile

    x0, y0, x1, y1 = hole_bounds(spec)
    pad = spec.extent_m * 0.5 + 100
    if spec.dem == "partial":  # covers only the holes west of the middle (and on it)
        x1 = (x0 + x1) / 2 + 1.0
        pad_e = 0.0
    else:
        pad_e = pad
    crs = spec.crs
    west, south, east, north = x0 - pad, y0 - pad, x1 + pad_e, y1 + pad
    if spec.dem == "lonlat":
        from pyproj import Transformer

        tr = Transformer.from_crs(spec.crs, "EPSG:4326", always_xy=True)
        west, south, east, north = tr.transform_bounds(west, south, east, north)
        crs = "EPSG:4326"
    nx, ny = 20, 20
    res_x, res_y = (east - west) / nx, (north - south) / ny
    values = np.full((ny, nx), float(np.mean([h.z for h in spec.holes])), dtype="float32")
    with MemoryFile() as mem:
        with mem.open(driver="GTiff", width=nx, height=ny, count=1, dtype="float32",
                      crs=rasterio.crs.CRS.from_user_input(crs), nodata=-9999.0,
                      transform=Affine(res_x, 0.0, west, 0.0, -res_y, north)) as dst:
            dst.write(values, 1)
        return mem.read()


# ---------------------------------------------------------------------------- sanity checks


def column_thickness_m(result) -> np.ndarray:
    """Thickness of the column the water crosses above the aquifer, per cell (m): cover and
    aquitards after any hazard cut, less the weathered crust when it is not protective."""
    hyd = result.hydraulics
    col = sum(hyd.column_thickness_m[u.code] for u in result.inputs.project.column_units)
    if (result.inputs.project.hydraulics.crust_treatment == "not_protective"
            and hyd.crust_m is not None):
        col = col - hyd.crust_m
    return col


def check_result(result) -> None:
    """The sanity contract of a successful run, checked on the in-memory result.

    Inside the study area every grid has a finite value, with two documented exceptions
    where the column above the aquifer has zero thickness: leakance is +inf (nothing
    separates surface and aquifer) and the equivalent Kv is undefined (0/0, NaN). There,
    resistance and travel time are exactly 0; elsewhere they are > 0. Thicknesses and
    SDs are >= 0, P(thin) is in [0, 1], unit thicknesses add up to the total. Outside the
    study area every grid is NaN.
    """
    g = result.inputs.grid
    m = g.mask
    p = result.inputs.project
    assert m.any(), "a run succeeded on a grid without a cell in the study area"
    for name, s in result.surfaces.items():
        for what, arr in (("thickness", s.thickness_m), ("sd", s.sd_m)):
            assert arr.shape == m.shape
            assert np.isfinite(arr[m]).all(), f"{what} of {name}: NaN/inf in the study area"
            assert (arr[m] >= 0).all(), f"{what} of {name}: negative in the study area"
            assert np.isnan(arr[~m]).all(), f"{what} of {name}: value outside the area"
    total = result.surfaces["aquitard"].thickness_m
    units_sum = sum(result.surfaces[u.code].thickness_m for u in p.aquitard_units)
    np.testing.assert_allclose(units_sum[m], total[m], rtol=1e-9, atol=1e-9)
    col = column_thickness_m(result)[m]
    none = col == 0
    hyd = result.hydraulics
    tt, res = hyd.travel_time_yr[m], hyd.resistance_yr[m]
    leak, kv = hyd.leakance_per_s[m], hyd.kv_m_s[m]
    assert np.isfinite(res).all(), "resistance: NaN/inf in the study area"
    assert (res[none] == 0).all() and (res[~none] > 0).all(), \
        "resistance: must be 0 exactly where the column has no thickness, > 0 elsewhere"
    # Travel time is infinite where the head gradient is not downward (a documented value);
    # with the stated gradient (> 0 by configuration) it is finite everywhere.
    down = (hyd.vertical_gradient[m] > 0 if hyd.vertical_gradient is not None
            else np.ones_like(none))
    assert not np.isnan(tt).any() and np.isfinite(tt[down]).all()
    assert (tt[none & down] == 0).all() and (tt[~none] > 0).all(), \
        "travel time: must be 0 exactly where the column has no thickness, > 0 elsewhere"
    assert (leak > 0).all() and not np.isnan(leak).any()
    assert (np.isinf(leak) == none).all(), "leakance must be +inf exactly where no column"
    assert np.isnan(kv[none]).all(), "Kv is undefined (0/0) where there is no column"
    assert np.isfinite(kv[~none]).all() and (kv[~none] > 0).all()
    pt = result.p_thin[m]
    assert np.isfinite(pt).all() and ((pt >= 0) & (pt <= 1)).all(), "P(thin) outside [0, 1]"
    probs = getattr(result, "probabilities", None)
    if probs is not None:
        for name, grid in probs.p_below.items():
            assert np.isfinite(grid[m]).all() and ((grid[m] >= 0) & (grid[m] <= 1)).all(), \
                f"P({name}) outside [0, 1] in the study area"
            assert np.isnan(grid[~m]).all()
        if {"window", "thin"} <= set(probs.p_below):
            # the window threshold is below the thin one: P(window) <= P(thin) in every
            # cell (the same draws are compared with both thresholds)
            pw, pt2 = probs.p_below["window"], probs.p_below["thin"]
            assert (pw[m] <= pt2[m] + 1e-12).all(), "P(window) above P(thin)"
    from aquitardmap.screening.zones import ZONE_KINDS

    z = result.zones
    assert set(z["kind"]) <= set(ZONE_KINDS)
    if len(z):
        assert (z["area_m2"] > 0).all() and z.geometry.is_valid.all()
        assert z["mean_p_thin"].between(0, 1).all()
        assert (z["mean_thickness_m"] >= 0).all() and (z["mean_travel_time_yr"] >= 0).all()
    assert len(result.boreholes) == len(result.inputs.columns)
    assert result.summary["grid"]["cells_without_column"] == int(none.sum())
    json.dumps(_json_ready(result.summary), allow_nan=False)


def _json_ready(summary: dict) -> object:
    from aquitardmap.outputs.summary import json_ready

    return json_ready(summary)


def check_outputs(out_dir: Path, result) -> None:
    """The files of a run hold exactly the in-memory grids (as float32, nodata -9999
    outside the study area and for the undefined Kv cells), and every file is readable."""
    import geopandas as gpd
    import rasterio

    from aquitardmap.inputs.load import crs_code
    from aquitardmap.outputs import names as outputs

    summary = json.loads((out_dir / outputs.SUMMARY).read_text(encoding="utf-8"),
                         parse_constant=_no_constants)
    assert sorted(p.name for p in out_dir.iterdir()) == sorted(summary["outputs"])
    g = result.inputs.grid
    p = result.inputs.project
    hyd = result.hydraulics
    expected = {
        outputs.AQUITARD_THICKNESS: result.surfaces["aquitard"].thickness_m,
        outputs.TRAVEL_TIME: hyd.travel_time_yr,
        outputs.LEAKANCE: hyd.leakance_per_s,
        outputs.KV: hyd.kv_m_s,
        outputs.RESISTANCE: hyd.resistance_yr,
        outputs.P_THIN: result.p_thin,
    }
    for u in p.aquitard_units:
        expected[outputs.unit_thickness(u.code)] = result.surfaces[u.code].thickness_m
    for name, mem in expected.items():
        with rasterio.open(out_dir / name) as src:
            # same EPSG code: GDAL's and pyproj's copies of the EPSG database may name a
            # datum differently, which makes CRS.equals() false for the same CRS
            assert crs_code(src.crs) == crs_code(p.crs) is not None
            assert src.transform == g.transform
            assert src.nodata == -9999.0
            band = src.read(1)
        outside = ~g.mask
        assert (band[outside] == -9999.0).all(), name
        want = np.where(np.isnan(mem), -9999.0, mem).astype("float32")
        np.testing.assert_array_equal(band[g.mask], want[g.mask], err_msg=name)
    zones = gpd.read_file(out_dir / outputs.ZONES, layer=outputs.ZONES_LAYER)
    assert len(zones) == len(result.zones)
    bh = gpd.read_file(out_dir / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    assert len(bh) == len(result.boreholes)
    assert outputs.CAUTION.split(".")[0] in (out_dir / outputs.MAP).read_text(encoding="utf-8")


def _no_constants(name: str) -> float:
    raise AssertionError(f"summary.json holds {name}, which is not JSON")


def expected_refusal(spec: Spec) -> str | None:
    """For a valid spec whose data cannot make a map, a fragment of the message the tool
    must give; None when the run must succeed. Worked out here independently of the
    package (shapely for the study area, the cell-centre rule for the grid)."""
    import shapely
    from shapely.geometry import MultiPoint, box

    if not any(h.intervals for h in spec.holes):
        return "no interval rows"
    used = [h for h in spec.holes if h.bid not in spec.exclude]
    if not used:
        return "no borehole left to use"
    if spec.full_holes_used() < 3:
        return "fewer than 3 boreholes reach the aquifer"
    if spec.boundary == "none":
        area = MultiPoint([(h.x, h.y) for h in used]).convex_hull.buffer(spec.buffer_m)
        if area.is_empty or area.area <= 0:
            return "buffer_m"
    else:
        x0, y0, x1, y1 = hole_bounds(spec)
        m = spec.boundary_margin_m
        area = box(x0 - m, y0 - m, x1 + m, y1 + m)
    c = spec.cell_size_m
    xmin, ymin, xmax, ymax = area.bounds
    xs = (np.arange(math.floor(xmin / c), math.ceil(xmax / c)) + 0.5) * c
    ys = (np.arange(math.floor(ymin / c), math.ceil(ymax / c)) + 0.5) * c
    xx, yy = np.meshgrid(xs, ys)
    if not shapely.contains_xy(area, xx.ravel(), yy.ravel()).any():
        return "holds no grid cell"
    return None
