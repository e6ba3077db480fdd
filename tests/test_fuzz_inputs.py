"""Property-based tests: generated projects, valid and broken, through the whole pipeline.

Every generated project either runs and its outputs pass the sanity contract
(:func:`projectgen.check_result`), or is refused with :class:`InputError` whose problems
name the file and, for a broken cell, its line and column. Never another exception, never
a run that succeeds on broken input.

The examples are derandomised (the same cases on every machine) and small: a few holes,
grids of a few hundred cells. ``AQUITARDMAP_FUZZ_SCALE=10`` runs ten times as many cases
and ``AQUITARDMAP_FUZZ_RANDOM=1`` draws new ones on every run (for a deeper search before a
release). The number of cases run is printed at the end of
the session ("generated input cases").
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import tempfile
import warnings
from dataclasses import dataclass
from pathlib import Path

import projectgen as pg
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import aquitardmap
from aquitardmap.errors import InputError

from conftest import GENERATED_CASES, REPO

SCALE = float(os.environ.get("AQUITARDMAP_FUZZ_SCALE", "1"))
#: ``AQUITARDMAP_FUZZ_RANDOM=1`` draws new cases on every run instead of the fixed ones.
FIXED = os.environ.get("AQUITARDMAP_FUZZ_RANDOM", "") != "1"


def _settings(n: int) -> settings:
    return settings(max_examples=max(1, int(n * SCALE)), deadline=None, derandomize=FIXED,
                    database=None, print_blob=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                           HealthCheck.filter_too_much])


def _run(root: Path, out: Path | None = None):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return aquitardmap.run(root, out)


def _assert_located(err: InputError, files: set[str]) -> None:
    """Every problem names one of the project's files (or the folder), never a blank."""
    assert err.problems
    for p in err.problems:
        assert p.file in files, f"problem names {p.file!r}: {p}"
        assert p.line >= 0 and p.column >= 0 and p.message


PROJECT_FILES = {"project.toml", "collars.csv", "intervals.csv", "samples.csv", "dem.tif",
                 "boundary.geojson", "boreholes_store.gpkg", "hazards.geojson",
                 "water_table.csv", "aquifer_head.csv", "p"}


# ---------------------------------------------------------------------------- valid projects


@_settings(120)
@given(spec=pg.specs())
def test_valid_projects_run_with_sane_outputs_or_are_refused_for_a_stated_reason(spec):
    GENERATED_CASES["valid projects, in process"] += 1
    reason = pg.expected_refusal(spec)
    with tempfile.TemporaryDirectory() as d:
        root = pg.render(spec).write(Path(d) / "p")
        if reason is None:
            pg.check_result(_run(root))
        else:
            with pytest.raises(InputError) as exc:
                _run(root)
            assert any(reason in p.message for p in exc.value.problems), exc.value
            _assert_located(exc.value, PROJECT_FILES)


@_settings(6)
@given(spec=pg.specs(max_holes=8))
def test_written_outputs_hold_the_checked_grids_and_replace_the_previous_run(spec):
    GENERATED_CASES["valid projects, outputs written and read back"] += 1
    if pg.expected_refusal(spec) is not None:
        return
    with tempfile.TemporaryDirectory() as d:
        root = pg.render(spec).write(Path(d) / "p")
        out = Path(d) / "out"
        for _ in range(2):  # the second run replaces the first
            result = _run(root, out)
            pg.check_result(result)
            pg.check_outputs(out, result)
        assert sorted(p.name for p in Path(d).iterdir()) == ["out", "p"]


def test_where_nothing_covers_the_aquifer_travel_time_is_0_and_leakance_infinite(tmp_path):
    # Every hole meets the aquifer at the surface: a window with no cover everywhere. By
    # the series formulas (c = sum b/K = 0): resistance and travel time 0, leakance 1/c =
    # +inf, Kv = sum b / c = 0/0 undefined (nodata). Map and report must still be written.
    units = [pg.UnitSpec("CLAY", "aquitard", 0.4, 1e-9, "none", 1.0),
             pg.UnitSpec("GRAV", "aquifer", 0.25, 1e-3, "none", 1.0)]
    holes = [pg.HoleSpec(f"W-{i}", 500_000 + 300 * (i % 3), 6_700_000 + 300 * (i // 3), 20.0,
                         5.0, [(0.0, 5.0, "GRAV")]) for i in range(6)]
    spec = pg.Spec(crs="EPSG:32632", origin=(500_000.0, 6_700_000.0), extent_m=600.0,
                   cell_size_m=100.0, buffer_m=100.0, units=units, holes=holes, settings={},
                   with_samples=False)
    root = pg.render(spec).write(tmp_path / "p")
    result = _run(root, tmp_path / "out")
    pg.check_result(result)
    pg.check_outputs(tmp_path / "out", result)
    g = result.summary["grid"]
    assert g["cells_without_column"] == g["cells_in_study_area"] > 0
    assert set(result.zones["kind"]) == {"window", "fast"}


# --------------------------------------------------------------------------- broken projects


@dataclass
class Expect:
    """Where the tool must point: file, and line / column when the break is a cell."""

    file: str
    line: int | None = None
    column: int | None = None

    def found_in(self, err: InputError) -> bool:
        return any(p.file == self.file
                   and (self.line is None or p.line == self.line)
                   and (self.column is None or p.column == self.column)
                   for p in err.problems)


BAD_NUMBERS = ["twelve", "nan", "inf", "-inf", "1e999", "1.2.3", "0x10", "1,5", "12 m"]
COLLAR_NUMERIC = {"x": 2, "y": 3, "ground_elev_m": 4, "total_depth_m": 5}


def _cells(line: str) -> list[str]:
    return line.split(",")


def _set_cell(r: pg.Rendered, file: str, line: int, col: int, value: str) -> None:
    cells = _cells(r.lines[file][line - 1])
    if "," in value:
        value = '"' + value + '"'
    cells[col - 1] = value
    r.lines[file][line - 1] = ",".join(cells)


def _pick_hole(draw, spec: pg.Spec, with_intervals: bool = False) -> pg.HoleSpec:
    holes = [h for h in spec.holes if h.intervals or not with_intervals]
    return draw(st.sampled_from(holes))


def _break_collar_number(draw, spec, r):
    h = _pick_hole(draw, spec)
    name = draw(st.sampled_from(sorted(COLLAR_NUMERIC)))
    line, col = r.where[("collars.csv", h.bid)], COLLAR_NUMERIC[name]
    _set_cell(r, "collars.csv", line, col, draw(st.sampled_from(BAD_NUMBERS + [""])))
    return Expect("collars.csv", line, col)


def _break_total_depth(draw, spec, r):
    h = _pick_hole(draw, spec)
    line = r.where[("collars.csv", h.bid)]
    _set_cell(r, "collars.csv", line, 5, draw(st.sampled_from(["0", "-3.5"])))
    return Expect("collars.csv", line, 5)


def _degrees_in_metre_crs(draw, spec, r):
    h = _pick_hole(draw, spec)
    line = r.where[("collars.csv", h.bid)]
    _set_cell(r, "collars.csv", line, 2, "10.75")
    _set_cell(r, "collars.csv", line, 3, "59.91")
    return Expect("collars.csv", line, 2)


def _swapped_x_y(draw, spec, r):
    h = _pick_hole(draw, spec)
    line = r.where[("collars.csv", h.bid)]
    _set_cell(r, "collars.csv", line, 2, f"{h.y:.1f}")
    _set_cell(r, "collars.csv", line, 3, f"{h.x:.1f}")
    return Expect("collars.csv", line, 2)


def _duplicate_collar(draw, spec, r):
    h = _pick_hole(draw, spec)
    r.lines["collars.csv"].append(r.lines["collars.csv"][r.where[("collars.csv", h.bid)] - 1])
    return Expect("collars.csv", len(r.lines["collars.csv"]), 1)


def _blank_id(draw, spec, r):
    h = _pick_hole(draw, spec)
    line = r.where[("collars.csv", h.bid)]
    _set_cell(r, "collars.csv", line, 1, "")
    return Expect("collars.csv", line, 1)


def _interval_line(draw, spec, r) -> tuple[pg.HoleSpec, int, int]:
    h = _pick_hole(draw, spec, with_intervals=True)
    k = draw(st.integers(0, len(h.intervals) - 1))
    return h, k, r.where[("intervals.csv", (h.bid, k))]


def _break_interval_number(draw, spec, r):
    _, _, line = _interval_line(draw, spec, r)
    col = draw(st.sampled_from([2, 3]))
    _set_cell(r, "intervals.csv", line, col, draw(st.sampled_from(BAD_NUMBERS + [""])))
    return Expect("intervals.csv", line, col)


def _unknown_unit(draw, spec, r):
    h, k, line = _interval_line(draw, spec, r)
    code = draw(st.sampled_from(["XYZ", h.intervals[k][2].lower(), ""]))
    _set_cell(r, "intervals.csv", line, 4, code)
    return Expect("intervals.csv", line, 4)


def _inverted_interval(draw, spec, r):
    h, k, line = _interval_line(draw, spec, r)
    a, b, _ = h.intervals[k]
    _set_cell(r, "intervals.csv", line, 2, f"{b:.2f}")
    _set_cell(r, "intervals.csv", line, 3, f"{a:.2f}")
    return Expect("intervals.csv", line, 3)


def _interval_below_total_depth(draw, spec, r):
    h, k, line = _interval_line(draw, spec, r)
    _set_cell(r, "intervals.csv", line, 3, f"{h.total_depth_m + 5:.2f}")
    return Expect("intervals.csv", line, 3)


def _interval_of_unknown_hole(draw, spec, r):
    _, _, line = _interval_line(draw, spec, r)
    _set_cell(r, "intervals.csv", line, 1, "NOT-A-HOLE")
    return Expect("intervals.csv", line, 1)


def _negative_from(draw, spec, r):
    _, _, line = _interval_line(draw, spec, r)
    _set_cell(r, "intervals.csv", line, 2, "-1.00")
    return Expect("intervals.csv", line, 2)


def _overlap(draw, spec, r):
    holes = [h for h in spec.holes if len(h.intervals) >= 2]
    if not holes:
        return _negative_from(draw, spec, r)
    h = draw(st.sampled_from(holes))
    k = draw(st.integers(1, len(h.intervals) - 1))
    line = r.where[("intervals.csv", (h.bid, k))]
    prev_top = h.intervals[k - 1][0]
    _set_cell(r, "intervals.csv", line, 2, f"{prev_top:.2f}")
    return Expect("intervals.csv", None, 2)  # reported on whichever sorts second


def _sample_line(draw, spec, r):
    holes = [h for h in spec.holes if h.samples]
    h = draw(st.sampled_from(holes))
    k = draw(st.integers(0, len(h.samples) - 1))
    return h, k, r.where[("samples.csv", (h.bid, k))]


def _break_sample(draw, spec, r):
    if not spec.with_samples or not any(h.samples for h in spec.holes):
        return _break_interval_number(draw, spec, r)
    h, k, line = _sample_line(draw, spec, r)
    kind = draw(st.sampled_from(["token", "porosity", "d10_gt_d60", "k", "deep", "hole"]))
    if kind == "token":
        col = draw(st.sampled_from([2, 3, 4, 5, 6]))
        _set_cell(r, "samples.csv", line, col, draw(st.sampled_from(BAD_NUMBERS)))
    elif kind == "porosity":
        col = 5
        _set_cell(r, "samples.csv", line, col, draw(st.sampled_from(["0", "1", "1.5", "-0.2"])))
    elif kind == "d10_gt_d60":
        col = 3
        _set_cell(r, "samples.csv", line, 3, "0.5")
        _set_cell(r, "samples.csv", line, 4, "0.1")
    elif kind == "k":
        col = 6
        _set_cell(r, "samples.csv", line, col, draw(st.sampled_from(["0", "-1e-9"])))
    elif kind == "deep":
        col = 2
        _set_cell(r, "samples.csv", line, col, f"{h.total_depth_m + 3:.2f}")
    else:
        col = 1
        _set_cell(r, "samples.csv", line, col, "NOT-A-HOLE")
    return Expect("samples.csv", line, col)


def _csv_file(draw, spec) -> str:
    files = ["collars.csv", "intervals.csv"] + (["samples.csv"] if spec.with_samples else [])
    return draw(st.sampled_from(files))


def _csv_data_line(draw, r, file) -> int | None:
    n = len(r.lines[file])
    return draw(st.integers(2, n)) if n >= 2 else None


def _wrong_field_count(draw, spec, r):
    file = _csv_file(draw, spec)
    line = _csv_data_line(draw, r, file)
    if line is None:
        return _missing_column(draw, spec, r)
    r.lines[file][line - 1] += ",extra"
    return Expect(file, line, len(_cells(r.lines[file][0])) + 1)


def _unterminated_quote(draw, spec, r):
    file = _csv_file(draw, spec)
    line = _csv_data_line(draw, r, file)
    if line is None:
        return _missing_column(draw, spec, r)
    r.lines[file][line - 1] = '"' + r.lines[file][line - 1]
    return Expect(file, line)


def _not_utf8(draw, spec, r):
    file = _csv_file(draw, spec)
    line = _csv_data_line(draw, r, file) or 1
    lines = r.lines.pop(file)
    raw = [ln.encode("utf-8") for ln in lines]
    raw[line - 1] += b"\xe9"  # Latin-1 'é'
    r.binary[file] = b"\n".join(raw) + b"\n"
    return Expect(file, line)


def _missing_column(draw, spec, r):
    file = _csv_file(draw, spec)
    header = _cells(r.lines[file][0])
    drop = draw(st.integers(0, 1))  # borehole_id and the first value are always required
    r.lines[file][0] = ",".join(c if i != drop else "something_else"
                                for i, c in enumerate(header))
    return Expect(file, 1)


def _semicolons(draw, spec, r):
    file = _csv_file(draw, spec)
    r.lines[file] = [ln.replace(",", ";") for ln in r.lines[file]]
    return Expect(file, 1)


def _empty_file(draw, spec, r):
    file = _csv_file(draw, spec)
    r.lines[file] = [draw(st.sampled_from(["", " ", ",,,"]))]
    return Expect(file)


NUMERIC_SETTINGS = ["grid.cell_size_m", "grid.buffer_m", "kriging.n_lags",
                    "kriging.max_lag_fraction", "kriging.max_neighbours",
                    "hydraulics.groundwater_temp_c", "hydraulics.vertical_gradient",
                    "hydraulics.hazen_c", "screening.window_thickness_m",
                    "screening.fast_travel_time_yr", "qa.dem_misfit_m"]
UNIT_NUMBERS = ["effective_porosity", "k_default_m_s", "anisotropy_kh_kv"]


def _set_toml(r: pg.Rendered, line: int, value: str) -> None:
    key = r.lines["project.toml"][line - 1].split("=")[0].strip()
    r.lines["project.toml"][line - 1] = f"{key} = {value}"


def _bad_setting_value(draw, spec, r):
    if draw(st.booleans()):
        key = draw(st.sampled_from(NUMERIC_SETTINGS))
    else:
        i = draw(st.integers(0, len(spec.units) - 1))
        key = f"units.{i}.{draw(st.sampled_from(UNIT_NUMBERS))}"
    line = r.where[("project.toml", key)]
    _set_toml(r, line, draw(st.sampled_from(["nan", "inf", "-inf", "-1.0", '"12"', "true",
                                             "[1]", "{a = 1}", "1979-05-27"])))
    return Expect("project.toml", line, 1)


def _bad_choice(draw, spec, r):
    kind = draw(st.sampled_from(["role", "k_method", "variogram_model", "code"]))
    if kind == "variogram_model":
        line = r.where[("project.toml", "kriging.variogram_model")]
        _set_toml(r, line, '"cubic"')
    else:
        i = draw(st.integers(0, len(spec.units) - 1))
        line = r.where[("project.toml", f"units.{i}.{kind}")]
        _set_toml(r, line, {"role": '"bedrock"', "k_method": '"darcy"',
                            "code": '"has space"'}[kind])
    return Expect("project.toml", line, 1)


def _unknown_key(draw, spec, r):
    section = draw(st.sampled_from(["grid", "kriging", "hydraulics", "screening", "qa",
                                    "units"]))
    if section == "units":
        line = r.where[("project.toml", "units.0.code")] + 1
    else:
        line = min(v for (f, k), v in r.where.items()
                   if f == "project.toml" and str(k).startswith(section + "."))
    typo = draw(st.sampled_from(["thin_thicknes_m", "cellsize", "porosity", "gradient"]))
    r.lines["project.toml"].insert(line - 1, f"{typo} = 1.0")
    return Expect("project.toml", line, 1)


def _bad_crs(draw, spec, r):
    line = r.where[("project.toml", "project.crs")]
    _set_toml(r, line, draw(st.sampled_from(['"EPSG:4326"', '"EPSG:999999"', '"not a crs"',
                                             '"EPSG:2056 "' + "x", "[1, 2]"])))
    return Expect("project.toml", line)


def _escaping_path(draw, spec, r):
    key = draw(st.sampled_from(["collars", "intervals", "samples", "dem", "boundary"]))
    value = draw(st.sampled_from(['"../collars.csv"', '"/etc/hostname"', '"a\\u0000b"', '""',
                                  '"."', '"sub/../../x.csv"']))
    r.lines["project.toml"] += ["", "[files]", f"{key} = {value}"]
    return Expect("project.toml", len(r.lines["project.toml"]), 1)


def _toml_syntax(draw, spec, r):
    n = len(r.lines["project.toml"])
    line = draw(st.integers(1, n + 1))
    junk = draw(st.sampled_from(["= broken", "[grid", 'name = "unterminated', "cell_size_m",
                                 "a = 1 2"]))
    r.lines["project.toml"].insert(line - 1, junk)
    return Expect("project.toml", line)


def _duplicate_key(draw, spec, r):
    line = r.where[("project.toml", "grid.cell_size_m")] + 1
    r.lines["project.toml"].insert(line - 1, "cell_size_m = 10.0")
    return Expect("project.toml", line)


def _thin_below_window(draw, spec, r):
    line = r.where[("project.toml", "screening.thin_thickness_m")]
    w = float(spec.settings["screening"]["window_thickness_m"])
    _set_toml(r, line, repr(w - 0.5) if w >= 0.5 else "-0.5")
    return Expect("project.toml", line, 1)


BREAKS = [_break_collar_number, _break_total_depth, _degrees_in_metre_crs, _swapped_x_y,
          _duplicate_collar, _blank_id, _break_interval_number, _unknown_unit,
          _inverted_interval, _interval_below_total_depth, _interval_of_unknown_hole,
          _negative_from, _overlap, _break_sample, _wrong_field_count, _unterminated_quote,
          _not_utf8, _missing_column, _semicolons, _empty_file, _bad_setting_value,
          _bad_choice, _unknown_key, _bad_crs, _escaping_path, _toml_syntax, _duplicate_key,
          _thin_below_window]


@st.composite
def broken_projects(draw) -> tuple[pg.Spec, pg.Rendered, Expect, str]:
    spec = draw(pg.specs(max_holes=6))
    r = pg.render(spec)
    if not any(h.intervals for h in spec.holes):  # every break below needs a log
        spec.holes[0].intervals = [(0.0, 1.0, spec.units[-1].code)]
        spec.holes[0].total_depth_m = max(spec.holes[0].total_depth_m, 1.0)
        r = pg.render(spec)
    brk = draw(st.sampled_from(BREAKS))
    return spec, r, brk(draw, spec, r), brk.__name__


@_settings(200)
@given(case=broken_projects())
def test_broken_input_is_refused_naming_file_line_and_column(case):
    spec, rendered, expect, name = case
    GENERATED_CASES["broken projects, in process"] += 1
    with tempfile.TemporaryDirectory() as d:
        root = rendered.write(Path(d) / "p")
        with pytest.raises(InputError) as exc:
            _run(root)
    _assert_located(exc.value, PROJECT_FILES)
    assert expect.found_in(exc.value), f"{name}: expected {expect}, got\n{exc.value}"


# ------------------------------------------------------------------ garbage and odd values


def _toml_scalar() -> st.SearchStrategy[str]:
    return st.one_of(
        st.integers(-10**6, 10**6).map(str),
        st.floats(allow_nan=True, allow_infinity=True).map(pg._toml_value),
        st.booleans().map(lambda b: "true" if b else "false"),
        st.text(max_size=12).map(pg._toml_value),
        st.sampled_from(["[]", "[1, 2]", '["x"]', "{}", "{a = 1}", "1979-05-27",
                         "07:32:00", "1979-05-27T07:32:00Z"]),
    )


@_settings(150)
@given(spec=pg.specs(max_holes=5), data=st.data())
def test_any_value_of_any_setting_is_used_or_refused_at_its_line(spec, data):
    GENERATED_CASES["settings of any type, in process"] += 1
    r = pg.render(spec)
    keys = sorted(k for (f, k) in r.where if f == "project.toml")
    changed = data.draw(st.lists(st.sampled_from(keys), min_size=1, max_size=3, unique=True))
    lines = set()
    for key in changed:
        line = r.where[("project.toml", key)]
        _set_toml(r, line, data.draw(_toml_scalar()))
        lines.add(line)
        if key == "screening.window_thickness_m":  # judged together with thin_thickness_m
            lines.add(r.where[("project.toml", "screening.thin_thickness_m")])
    with tempfile.TemporaryDirectory() as d:
        root = r.write(Path(d) / "p")
        try:
            result = _run(root)
        except InputError as err:
            _assert_located(err, PROJECT_FILES)
            toml = [p for p in err.problems if p.file == "project.toml"]
            base = pg.expected_refusal(spec)  # the data alone may call for a refusal
            # a grid too large is reported at cell_size_m, whichever setting grew it
            size_line = r.where[("project.toml", "grid.cell_size_m")]
            assert all(p.line in lines or p.line == 0 or (base and base in p.message)
                       or (p.line == size_line and "max_cells" in p.message)
                       for p in toml), err
            return
    pg.check_result(result)


@_settings(120)
@given(spec=pg.specs(max_holes=5), data=st.data())
def test_any_bytes_in_any_input_file_never_crash(spec, data):
    GENERATED_CASES["arbitrary file contents, in process"] += 1
    r = pg.render(spec)
    # the files of the project, and optional inputs it does not have (a store, hazards,
    # heads) appearing with junk in them
    names = sorted({*r.lines, *r.binary, "boreholes_store.gpkg", "hazards.geojson",
                    "water_table.csv", "aquifer_head.csv"})
    target = data.draw(st.sampled_from(names))
    junk = data.draw(st.one_of(
        st.binary(max_size=300),
        st.text(max_size=300).map(lambda t: t.encode("utf-8")),
        st.lists(st.text(alphabet=',"\n\r;\t 0123456789.-eEnaif', max_size=20), max_size=8)
        .map(lambda ls: "\n".join(ls).encode("utf-8")),
    ))
    r.lines.pop(target, None)
    r.binary[target] = junk
    with tempfile.TemporaryDirectory() as d:
        root = r.write(Path(d) / "p")
        try:
            result = _run(root)
        except InputError as err:
            _assert_located(err, PROJECT_FILES)
            return
    pg.check_result(result)


# ------------------------------------------------------------------------ the command line


_LOCATION = re.compile(r"^\s*- (\S+?)(?:, line (\d+))?(?:, column (\d+))?: ", re.M)


def _cli(*args: object) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                          capture_output=True, text=True, timeout=300, env=env, cwd=REPO)


@_settings(4)  # each case starts a Python process (a few seconds of imports)
@given(case=st.one_of(broken_projects().map(lambda c: ("broken", c)),
                      pg.specs(max_holes=6).map(lambda s: ("valid", s))))
def test_command_line_exits_0_with_outputs_or_2_naming_the_cell(case):
    GENERATED_CASES["projects through the command line"] += 1
    kind, payload = case
    with tempfile.TemporaryDirectory() as d:
        out = Path(d) / "out"
        if kind == "broken":
            _, rendered, expect, name = payload
            root = rendered.write(Path(d) / "p")
        else:
            root = pg.render(payload).write(Path(d) / "p")
        r = _cli("run", root, "--out", out)
        assert "Traceback" not in r.stderr and r.returncode in (0, 2), r.stderr
        if kind == "valid" and pg.expected_refusal(payload) is None:
            assert r.returncode == 0, r.stderr
        if r.returncode == 2:
            assert not out.exists() and "nothing was written" in r.stderr
            located = _LOCATION.findall(r.stderr)
            assert located, r.stderr
            if kind == "broken":
                want = (expect.file, str(expect.line or ""), str(expect.column or ""))
                assert any(f == want[0] and (not want[1] or ln == want[1])
                           and (not want[2] or col == want[2]) for f, ln, col in located), \
                    f"{name}: expected {expect} in\n{r.stderr}"
        else:
            assert kind == "valid" and pg.expected_refusal(payload) is None
            assert (out / "summary.json").is_file() and (out / "map.html").is_file()
