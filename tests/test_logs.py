"""Tests for aquitardmap.inputs.logs: reading, validating and summarising borehole logs.

Every table here is a small invented CSV written to a temporary folder; positions are in
UTM-like metres. The censoring rule checked below: a hole that stops inside a unit gives
a lower bound on its thickness, never a thickness (common practice in aquitard mapping).
"""

from __future__ import annotations

import math
from pathlib import Path

import pandas as pd
import pytest

from aquitardmap.config.project import Project, read_project
from aquitardmap.errors import InputError, Problem
from aquitardmap.evaluation.demo_stack import DEMO_STACK_TOML
from aquitardmap.inputs.columns import FULL, LOWER_BOUND, UNKNOWN, column_table
from aquitardmap.inputs.logs import Boreholes, read_boreholes

# The stack of the demo project.
PROJECT_TOML = """
[project]
name = "Test valley (invented)"
crs = "EPSG:32632"

[grid]
cell_size_m = 50

""" + DEMO_STACK_TOML

COLLARS_OK = """borehole_id,x,y,ground_elev_m,total_depth_m
BH-A,500100,6600100,42.0,20.0
BH-B,500300,6600150,40.5,12.0
"""
INTERVALS_OK = """borehole_id,from_m,to_m,unit
BH-A,0,2.1,SAND
BH-A,2.1,14.0,UMC
BH-A,14.0,20.0,GRAV
BH-B,0,1.5,SAND
BH-B,1.5,6.0,UMC
BH-B,6.0,12.0,LMC
"""


def make_project(tmp_path: Path, collars: str | bytes | None = COLLARS_OK,
                 intervals: str | bytes | None = INTERVALS_OK,
                 samples: str | bytes | None = None, extra_toml: str = "") -> Project:
    """Write the files (None = leave out) and read the project."""
    (tmp_path / "project.toml").write_text(PROJECT_TOML + extra_toml, encoding="utf-8")
    for name, content in (("collars.csv", collars), ("intervals.csv", intervals),
                          ("samples.csv", samples)):
        if content is None:
            continue
        data = content.encode("utf-8") if isinstance(content, str) else content
        (tmp_path / name).write_bytes(data)
    if collars is None or intervals is None:
        # read_project refuses a project without its required files; write placeholders
        # for it and remove them again so that read_boreholes sees them missing.
        placeholders = [n for n, c in (("collars.csv", collars), ("intervals.csv", intervals))
                        if c is None]
        for n in placeholders:
            (tmp_path / n).write_text("x\n", encoding="utf-8")
        project = read_project(tmp_path)
        for n in placeholders:
            (tmp_path / n).unlink()
        return project
    return read_project(tmp_path)


def problems_of(project: Project) -> list[Problem]:
    with pytest.raises(InputError) as info:
        read_boreholes(project)
    return info.value.problems


def find(problems: list[Problem] | tuple[Problem, ...], file: str, line: int, column: int,
         text: str) -> Problem:
    """The problem at (file, line, column) whose message contains ``text``."""
    hits = [p for p in problems if p.file == file and p.line == line and p.column == column
            and text in p.message]
    assert hits, f"no problem {file}:{line}:{column} containing {text!r} in:\n" + "\n".join(
        map(str, problems))
    return hits[0]


# --------------------------------------------------------------------------------------------
# Reading good input


def test_reads_clean_logs_into_typed_tables(tmp_path):
    b = read_boreholes(make_project(tmp_path))
    assert isinstance(b, Boreholes)
    assert list(b.collars.index) == ["BH-A", "BH-B"]
    assert b.collars.loc["BH-A", "total_depth_m"] == 20.0
    assert b.collars.loc["BH-B", "x"] == 500300.0
    assert list(b.collars["line"]) == [2, 3]
    assert list(b.intervals.columns) == ["borehole_id", "from_m", "to_m", "unit", "line",
                                         "material", "source"]
    assert set(b.intervals["source"]) == {"intervals.csv"}
    assert len(b.intervals) == 6
    assert b.samples.empty
    assert list(b.samples.columns) == ["borehole_id", "depth_m", "d10_mm", "d60_mm",
                                       "porosity", "k_lab_m_s", "unit", "line", "source"]
    assert b.warnings == ()


def test_intervals_are_sorted_by_hole_then_depth(tmp_path):
    intervals = """borehole_id,from_m,to_m,unit
BH-B,6.0,12.0,LMC
BH-A,14.0,20.0,GRAV
BH-B,0,1.5,SAND
BH-A,0,2.1,SAND
BH-B,1.5,6.0,UMC
BH-A,2.1,14.0,UMC
"""
    b = read_boreholes(make_project(tmp_path, intervals=intervals))
    assert list(b.intervals["borehole_id"]) == ["BH-A"] * 3 + ["BH-B"] * 3
    assert list(b.intervals["from_m"]) == [0.0, 2.1, 14.0, 0.0, 1.5, 6.0]
    assert list(b.intervals["line"]) == [5, 7, 3, 4, 6, 2]


def test_byte_order_mark_is_accepted(tmp_path):
    b = read_boreholes(make_project(tmp_path, collars=b"\xef\xbb\xbf" + COLLARS_OK.encode()))
    assert list(b.collars.index) == ["BH-A", "BH-B"]
    assert list(b.collars["line"]) == [2, 3]


def test_quoted_fields_spaces_and_column_order(tmp_path):
    collars = ('total_depth_m , "borehole_id",x,y,ground_elev_m\n'
               '20.0,"BH,A",500100,6600100,42.0\n'
               '12.0, "BH-B",500300,6600150,40.5\n')
    intervals = ('unit,borehole_id,from_m,to_m\n'
                 '"SAND","BH,A",0,2.1\n"UMC","BH,A",2.1,14\n"GRAV","BH,A",14,20\n'
                 'SAND,BH-B,0,12\n')
    b = read_boreholes(make_project(tmp_path, collars, intervals))
    assert list(b.collars.index) == ["BH,A", "BH-B"]
    assert b.collars.loc["BH,A", "ground_elev_m"] == 42.0
    assert list(b.intervals.loc[b.intervals["borehole_id"] == "BH,A", "unit"]) == [
        "SAND", "UMC", "GRAV"]


def test_whitespace_only_lines_are_skipped_and_lines_still_counted(tmp_path):
    intervals = INTERVALS_OK.replace("BH-A,2.1,14.0,UMC\n", "   \n\n,,,\nBH-A,2.1,14.0,UMC\n")
    b = read_boreholes(make_project(tmp_path, intervals=intervals))
    umc = b.intervals[(b.intervals["borehole_id"] == "BH-A") & (b.intervals["unit"] == "UMC")]
    assert list(umc["line"]) == [6]  # header 1, SAND 2, three skipped lines 3-5


def test_extra_column_is_a_warning_not_an_error(tmp_path):
    collars = COLLARS_OK.replace("total_depth_m\n", "total_depth_m,driller\n")
    collars = collars.replace("20.0\n", "20.0,Ann\n").replace("12.0\n", "12.0,Bo\n")
    b = read_boreholes(make_project(tmp_path, collars=collars))
    find(b.warnings, "collars.csv", 1, 6, "extra column 'driller'")


def test_samples_blank_values_are_nan_and_get_their_unit(tmp_path):
    samples = """borehole_id,depth_m,d10_mm,d60_mm,porosity,k_lab_m_s
BH-A,1.0,0.12,0.40,0.32,
BH-A,8.0,,,0.45,3e-10
BH-A,14.0,0.3,1.2,,
BH-B,12.0,,,,
BH-B,6.0,0.001,0.004,0.5,1e-10
"""
    b = read_boreholes(make_project(tmp_path, samples=samples))
    s = b.samples
    assert list(s["unit"]) == ["SAND", "UMC", "GRAV", "LMC", "LMC"]
    # 14.0 is the UMC/GRAV contact: a sample on a contact belongs to the interval below;
    # 12.0 is the base of BH-B's deepest interval and belongs to it.
    assert math.isnan(s.loc[0, "k_lab_m_s"])
    assert math.isnan(s.loc[1, "d10_mm"]) and math.isnan(s.loc[1, "d60_mm"])
    assert s.loc[1, "k_lab_m_s"] == 3e-10
    assert s.loc[3, ["d10_mm", "d60_mm", "porosity", "k_lab_m_s"]].isna().all()
    assert list(s["line"]) == [2, 3, 4, 5, 6]
    assert b.warnings == ()


def test_sample_outside_every_interval_is_a_warning_with_unit_none(tmp_path):
    intervals = INTERVALS_OK.replace("BH-B,1.5,6.0,UMC\n", "BH-B,1.5,5.0,UMC\n")
    samples = "borehole_id,depth_m\nBH-B,5.5\n"
    b = read_boreholes(make_project(tmp_path, intervals=intervals, samples=samples))
    assert b.samples.loc[0, "unit"] is None
    find(b.warnings, "samples.csv", 2, 2, "lies in no logged interval")
    # the 5.0-6.0 gap is also reported on the line of the interval below it (line 7)
    find(b.warnings, "intervals.csv", 7, 2, "no interval from 5.0 to 6.0 m")
    # absent value columns of samples.csv are read as blank, with a warning each
    for name in ("d10_mm", "d60_mm", "porosity", "k_lab_m_s"):
        find(b.warnings, "samples.csv", 1, 0, f"column {name!r} is absent")
        assert b.samples[name].isna().all()


def test_collar_without_intervals_and_short_log_are_warnings(tmp_path):
    collars = COLLARS_OK + "BH-C,500500,6600200,41.0,8.0\n"
    intervals = INTERVALS_OK.replace("BH-B,6.0,12.0,LMC\n", "BH-B,6.0,10.0,LMC\n")
    b = read_boreholes(make_project(tmp_path, collars, intervals))
    find(b.warnings, "collars.csv", 4, 1, "'BH-C' has no intervals")
    find(b.warnings, "intervals.csv", 7, 3, "ends at 10.0 m, above its total depth of 12.0")


# --------------------------------------------------------------------------------------------
# Bad input: each kind of problem names the right file, line and column


def test_missing_required_files(tmp_path):
    problems = problems_of(make_project(tmp_path, collars=None, intervals=None))
    find(problems, "collars.csv", 0, 0, "not found")
    find(problems, "intervals.csv", 0, 0, "not found")


def test_missing_required_column_and_empty_file(tmp_path):
    collars = COLLARS_OK.replace("ground_elev_m,", "").replace("42.0,", "").replace("40.5,", "")
    problems = problems_of(make_project(tmp_path, collars=collars, intervals="  \n\n"))
    find(problems, "collars.csv", 1, 0, "missing required column 'ground_elev_m'")
    find(problems, "intervals.csv", 0, 0, "file is empty")


def test_semicolon_separated_header_gets_a_hint(tmp_path):
    collars = COLLARS_OK.replace(",", ";")
    problems = problems_of(make_project(tmp_path, collars=collars))
    find(problems, "collars.csv", 1, 1, "separated by semicolons")


def test_not_utf8_names_the_line(tmp_path):
    collars = (COLLARS_OK + "BH-\xc9,500500,6600200,41.0,8.0\n").encode("latin-1")
    problems = problems_of(make_project(tmp_path, collars=collars))
    find(problems, "collars.csv", 4, 0, "not valid UTF-8")


def test_collar_problems_are_all_reported_at_their_cells(tmp_path):
    collars = """borehole_id,x,y,ground_elev_m,total_depth_m
BH-A,500100,6600100,42.0,20.0
BH-B,5OO300,6600150,40.5,12.0
BH-A,500400,6600160,40.0,10.0
BH-D,500500,6600170,,10.0
BH-E,500600,6600180,39.0,0
BH-F,10.75,59.91,39.0,10.0
BH-G,500700,nan,39.0,10.0
,500800,6600190,39.0,10.0
BH-H,1e999,6600190,39.0,10.0
BH-I,500900,6600195,39.0
"""
    problems = problems_of(make_project(tmp_path, collars=collars))
    find(problems, "collars.csv", 3, 2, "x must be a number, got text '5OO300'")
    find(problems, "collars.csv", 4, 1, "borehole id 'BH-A' already used on line 2")
    find(problems, "collars.csv", 5, 4, "ground_elev_m is blank")
    find(problems, "collars.csv", 6, 5, "total_depth_m must be > 0")
    find(problems, "collars.csv", 7, 2, "look like degrees")
    find(problems, "collars.csv", 8, 3, "y must be a finite number")
    find(problems, "collars.csv", 9, 1, "borehole_id is blank")
    find(problems, "collars.csv", 10, 2, "x must be a finite number")
    find(problems, "collars.csv", 11, 5, "line has 4 fields but the header has 5")
    collar_problems = [p for p in problems if p.file == "collars.csv"]
    assert len(collar_problems) == 9
    # problems are listed in file order, then line order
    assert [p.line for p in collar_problems] == sorted(p.line for p in collar_problems)


def test_absurd_total_depth_is_flagged_not_refused(tmp_path):
    # A total depth of 1e9 m (a unit slip or a typo) is no hole anyone drilled: deeper than
    # MAX_PLAUSIBLE_DEPTH_M (2,000 m; water wells and geotechnical holes through these clays
    # stop within a few hundred metres, common practice) it is kept but warned about at its
    # cell and flagged in the borehole table's qa_flags.
    collars = COLLARS_OK.replace("BH-B,500300,6600150,40.5,12.0",
                                 "BH-B,500300,6600150,40.5,1e9")
    b = read_boreholes(make_project(tmp_path, collars=collars))
    w = [p for p in b.warnings if "deeper than any water well" in p.message]
    assert [(p.file, p.line, p.column) for p in w] == [("collars.csv", 3, 5)]
    flags = column_table(b, make_project(tmp_path, collars=collars))["qa_flags"]
    assert "total depth implausibly deep" in flags["BH-B"]
    assert "implausibly deep" not in flags["BH-A"]
    # the bound itself is credible: 2,000 m passes without a word
    collars = COLLARS_OK.replace("BH-B,500300,6600150,40.5,12.0",
                                 "BH-B,500300,6600150,40.5,2000")
    b = read_boreholes(make_project(tmp_path, collars=collars))
    assert not [p for p in b.warnings if "deeper than any water well" in p.message]


def test_interval_problems_are_all_reported_at_their_cells(tmp_path):
    intervals = """borehole_id,from_m,to_m,unit
BH-A,0,2.1,SAND
BH-A,2.1,14.0,UMC
BH-A,13.0,20.0,GRAV
BH-B,-0.5,1.5,SAND
BH-B,1.5,1.5,UMC
BH-B,6.0,4.0,LMC
BH-B,6.0,12.5,LMC
BH-X,0,3,SAND
BH-A,20,20.5,clay
BH-B,1.5,six,UMC
BH-B,,6,UMC
"""
    problems = problems_of(make_project(tmp_path, intervals=intervals))
    find(problems, "intervals.csv", 4, 2, "overlaps 2.1–14.0 on line 3")
    find(problems, "intervals.csv", 5, 2, "from_m must be >= 0")
    find(problems, "intervals.csv", 6, 3, "zero-length interval")
    find(problems, "intervals.csv", 7, 3, "inverted interval")
    find(problems, "intervals.csv", 8, 3, "below the total depth of BH-B (12 m)")
    find(problems, "intervals.csv", 9, 1, "'BH-X' is not in collars.csv")
    p = find(problems, "intervals.csv", 10, 4, "unknown unit code 'clay'")
    assert "SAND, UMC, LMC, LAM, GRAV" in p.message
    find(problems, "intervals.csv", 10, 3, "below the total depth of BH-A")
    find(problems, "intervals.csv", 11, 3, "to_m must be a number, got text 'six'")
    find(problems, "intervals.csv", 12, 2, "from_m is blank")
    assert len([p for p in problems if p.file == "intervals.csv"]) == 10


def test_to_depth_within_a_centimetre_of_total_depth_is_accepted(tmp_path):
    intervals = INTERVALS_OK.replace("BH-B,6.0,12.0,LMC", "BH-B,6.0,12.01,LMC")
    b = read_boreholes(make_project(tmp_path, intervals=intervals))
    assert b.intervals["to_m"].max() == 20.0
    intervals = INTERVALS_OK.replace("BH-B,6.0,12.0,LMC", "BH-B,6.0,12.02,LMC")
    find(problems_of(make_project(tmp_path, intervals=intervals)), "intervals.csv", 7, 3,
         "below the total depth")


def test_unit_code_with_wrong_case_gets_a_hint(tmp_path):
    intervals = INTERVALS_OK.replace("BH-B,0,1.5,SAND", "BH-B,0,1.5,sand")
    p = find(problems_of(make_project(tmp_path, intervals=intervals)), "intervals.csv", 5, 4,
             "unknown unit code 'sand'")
    assert "did you mean 'SAND'" in p.message


def test_sample_problems_are_all_reported_at_their_cells(tmp_path):
    samples = """k_lab_m_s,borehole_id,depth_m,d10_mm,d60_mm,porosity
,BH-A,1.0,0.1,0.4,1.2
,BH-A,2.0,0.1,0.4,0
-1e-9,BH-A,3.0,,,
,BH-A,4.0,0,0.4,
,BH-A,5.0,0.5,0.4,
,BH-Z,1.0,,,
,BH-B,12.5,,,
,BH-B,,,,
,BH-B,-1,,,
,BH-B,3,abc,,
"""
    problems = problems_of(make_project(tmp_path, samples=samples))
    find(problems, "samples.csv", 2, 6, "porosity must be a fraction between 0 and 1")
    find(problems, "samples.csv", 3, 6, "porosity must be a fraction")
    find(problems, "samples.csv", 4, 1, "k_lab_m_s must be > 0")
    find(problems, "samples.csv", 5, 4, "d10_mm must be > 0")
    find(problems, "samples.csv", 6, 4, "d10_mm (0.5) is larger than d60_mm (0.4)")
    find(problems, "samples.csv", 7, 2, "'BH-Z' is not in collars.csv")
    find(problems, "samples.csv", 8, 3, "below the total depth of BH-B")
    find(problems, "samples.csv", 9, 3, "depth_m is blank")
    find(problems, "samples.csv", 10, 3, "depth_m must be >= 0")
    find(problems, "samples.csv", 11, 4, "d10_mm must be a number, got text 'abc'")
    assert len(problems) == 10


def test_problems_in_several_files_come_in_one_error(tmp_path):
    collars = COLLARS_OK.replace("42.0", "forty-two")
    intervals = INTERVALS_OK.replace("BH-B,1.5,6.0,UMC", "BH-B,1.5,6.0,XYZ")
    samples = "borehole_id,depth_m,d10_mm,d60_mm,porosity,k_lab_m_s\nBH-A,1,,,2,\n"
    problems = problems_of(make_project(tmp_path, collars, intervals, samples))
    assert [(p.file, p.line, p.column) for p in problems] == [
        ("collars.csv", 2, 4), ("intervals.csv", 6, 4), ("samples.csv", 2, 5)]
    assert "forty-two" in str(InputError(problems))


def test_unterminated_quote_is_reported(tmp_path):
    intervals = INTERVALS_OK + '"BH-B,12,13,LMC\n'
    find(problems_of(make_project(tmp_path, intervals=intervals)), "intervals.csv", 8, 0,
         "malformed CSV record")


# --------------------------------------------------------------------------------------------
# column_table: censored thicknesses and flags


def column_for(tmp_path: Path, collars: str, intervals: str, extra_toml: str = ""
               ) -> pd.DataFrame:
    project = make_project(tmp_path, collars, intervals, extra_toml=extra_toml)
    return column_table(read_boreholes(project), project)


def test_partial_hole_in_lower_clay_gives_lower_bounds_not_thicknesses(tmp_path):
    collars = "borehole_id,x,y,ground_elev_m,total_depth_m\nP1,500000,6600000,30,15\n"
    intervals = ("borehole_id,from_m,to_m,unit\n"
                 "P1,0,2,SAND\nP1,2,9,UMC\nP1,9,15,LMC\n")
    row = column_for(tmp_path, collars, intervals).loc["P1"]
    assert row["status_SAND"] == FULL and row["thickness_SAND_m"] == 2.0
    assert row["status_UMC"] == FULL and row["thickness_UMC_m"] == 7.0
    assert row["status_LMC"] == LOWER_BOUND and row["thickness_LMC_m"] == 6.0
    assert row["status_LAM"] == UNKNOWN and row["thickness_LAM_m"] == 0.0
    assert row["aquitard_thickness_m"] == 13.0
    assert row["status_aquitard"] == LOWER_BOUND
    assert row["cover_thickness_m"] == 2.0 and row["status_cover"] == FULL
    assert not row["reached_aquifer"]
    assert row["bottom_unit"] == "LMC"
    assert math.isnan(row["depth_to_aquifer_m"])
    assert row["qa_flags"] == ""
    assert row["log"] == "0.0–2.0 SAND; 2.0–9.0 UMC; 9.0–15.0 LMC"


def test_hole_reaching_gravel_without_clay_proves_a_window(tmp_path):
    collars = "borehole_id,x,y,ground_elev_m,total_depth_m\nW1,500000,6600000,30,10\n"
    intervals = "borehole_id,from_m,to_m,unit\nW1,0,3.5,SAND\nW1,3.5,10,GRAV\n"
    row = column_for(tmp_path, collars, intervals).loc["W1"]
    assert row["reached_aquifer"]
    assert row["aquitard_thickness_m"] == 0.0 and row["status_aquitard"] == FULL
    for code in ("UMC", "LMC", "LAM"):
        assert row[f"status_{code}"] == FULL and row[f"thickness_{code}_m"] == 0.0
    assert row["depth_to_aquifer_m"] == 3.5
    assert row["bottom_unit"] == "GRAV"


def test_hole_stopped_in_cover_knows_nothing_of_the_clay(tmp_path):
    collars = "borehole_id,x,y,ground_elev_m,total_depth_m\nS1,500000,6600000,30,4\n"
    intervals = "borehole_id,from_m,to_m,unit\nS1,0,4,SAND\n"
    row = column_for(tmp_path, collars, intervals).loc["S1"]
    assert row["status_SAND"] == LOWER_BOUND and row["status_cover"] == LOWER_BOUND
    assert row["status_UMC"] == UNKNOWN
    assert row["status_aquitard"] == UNKNOWN
    assert row["aquitard_thickness_m"] == 0.0


def test_full_column_sums_every_clay_and_records_the_aquifer_top(tmp_path):
    row = column_for(tmp_path, COLLARS_OK, INTERVALS_OK).loc["BH-A"]
    assert row["thickness_UMC_m"] == pytest.approx(11.9)  # 14.0 - 2.1
    assert row["aquitard_thickness_m"] == pytest.approx(11.9)
    assert row["status_aquitard"] == FULL and row["status_LAM"] == FULL
    assert row["depth_to_aquifer_m"] == 14.0
    assert row["log"] == "0.0–2.1 SAND; 2.1–14.0 UMC; 14.0–20.0 GRAV"


def test_order_break_gap_and_no_interval_flags(tmp_path):
    collars = """borehole_id,x,y,ground_elev_m,total_depth_m
R1,500000,6600000,30,20
G1,500100,6600000,30,20
N1,500200,6600000,30,20
"""
    intervals = """borehole_id,from_m,to_m,unit
R1,0,2,SAND
R1,2,8,LMC
R1,8,12,UMC
R1,12,20,GRAV
G1,1,2,SAND
G1,2,8,UMC
G1,9,15,LMC
"""
    table = column_for(tmp_path, collars, intervals)
    assert table.loc["R1", "qa_flags"] == "unit order breaks the stack"
    assert table.loc["G1", "qa_flags"] == "gap in log; log ends above total depth"
    assert table.loc["N1", "qa_flags"] == "no intervals"
    assert table.loc["N1", "bottom_unit"] == "" and table.loc["N1", "log"] == ""
    assert table.loc["N1", "status_aquitard"] == UNKNOWN
    assert table.loc["N1", "status_cover"] == UNKNOWN


def test_clay_logged_below_the_aquifer_top_is_not_protection(tmp_path):
    collars = "borehole_id,x,y,ground_elev_m,total_depth_m\nL1,500000,6600000,30,20\n"
    intervals = ("borehole_id,from_m,to_m,unit\n"
                 "L1,0,3,UMC\nL1,3,4,GRAV\nL1,4,20,LMC\n")
    row = column_for(tmp_path, collars, intervals).loc["L1"]
    assert row["reached_aquifer"] and row["depth_to_aquifer_m"] == 3.0
    assert row["thickness_LMC_m"] == 0.0
    assert row["aquitard_thickness_m"] == 3.0 and row["status_aquitard"] == FULL
    assert row["bottom_unit"] == "LMC"
    assert row["qa_flags"] == "unit order breaks the stack"


def test_sand_lens_at_the_bottom_does_not_hide_the_clay_above(tmp_path):
    collars = "borehole_id,x,y,ground_elev_m,total_depth_m\nK1,500000,6600000,30,12\n"
    intervals = "borehole_id,from_m,to_m,unit\nK1,0,2,SAND\nK1,2,10,UMC\nK1,10,12,SAND\n"
    row = column_for(tmp_path, collars, intervals).loc["K1"]
    assert row["bottom_unit"] == "SAND"
    assert row["status_UMC"] == LOWER_BOUND and row["thickness_UMC_m"] == 8.0
    assert row["status_LMC"] == UNKNOWN
    assert row["status_aquitard"] == LOWER_BOUND
    assert row["thickness_SAND_m"] == 4.0 and row["status_SAND"] == FULL


def test_excluded_holes_stay_in_the_table_and_unknown_ids_warn(tmp_path):
    project = make_project(tmp_path, extra_toml='\n[qa]\nexclude_boreholes = ["BH-B", "BH-Q"]\n')
    b = read_boreholes(project)
    table = column_table(b, project)
    assert list(table.index) == ["BH-A", "BH-B"]
    assert list(table["excluded"]) == [False, True]
    find(b.warnings, "project.toml", 0, 0, "'BH-Q'")
    assert table["excluded"].dtype == bool and table["reached_aquifer"].dtype == bool


def test_column_table_columns_cover_every_column_unit(tmp_path):
    table = column_for(tmp_path, COLLARS_OK, INTERVALS_OK)
    for code in ("SAND", "UMC", "LMC", "LAM"):
        assert f"thickness_{code}_m" in table.columns and f"status_{code}" in table.columns
    assert "thickness_GRAV_m" not in table.columns
    assert set(table["status_aquitard"]) <= {FULL, LOWER_BOUND, UNKNOWN}
    assert table.loc["BH-B", "status_LMC"] == LOWER_BOUND
    assert table.loc["BH-B", "status_LAM"] == UNKNOWN


def test_lab_k_above_one_metre_per_second_is_refused_with_a_unit_hint(tmp_path):
    # 1 m/s is the top of the clean-gravel range (Freeze & Cherry 1979, Table 2.2, from
    # memory); a larger value means another unit (cm/s, m/day) was written in the m/s column.
    samples = "borehole_id,depth_m,d10_mm,d60_mm,porosity,k_lab_m_s\nBH-A,1.0,,,,5\n"
    p = find(problems_of(make_project(tmp_path, samples=samples)), "samples.csv", 2, 6,
             "k_lab_m_s = 5 is above 1 m/s")
    assert "cm/s" in p.message
