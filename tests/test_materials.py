"""Free-text logs: ``material`` words mapped to unit codes by ``[[materials]]`` rules.

Matching rules are ours (documented in aquitardmap/materials.py); the regular-expression
semantics are Python's ``re`` (case-insensitive search), the reference the rules name.
"""

from __future__ import annotations

import re

import pytest
from test_logs import PROJECT_TOML

from aquitardmap.config.materials import MaterialRule, match_material
from aquitardmap.config.project import read_project
from aquitardmap.errors import InputError
from aquitardmap.inputs.columns import column_table
from aquitardmap.inputs.logs import read_boreholes

RULES = """
[[materials]]
unit = "LAM"
pattern = "varv|laminat"

[[materials]]
unit = "SAND"
words = ["sand", "fill", "topsoil"]

[[materials]]
unit = "UMC"
words = ["clay", "silty clay"]

[[materials]]
unit = "GRAV"
words = ["gravel"]
"""


def _project(tmp_path, rules=RULES, intervals=None):
    (tmp_path / "project.toml").write_text(PROJECT_TOML + rules)
    (tmp_path / "collars.csv").write_text(
        "borehole_id,x,y,ground_elev_m,total_depth_m\n"
        "WW-1,500000,6700000,50,30\nWW-2,500300,6700000,52,30\n")
    (tmp_path / "intervals.csv").write_text(intervals or (
        "borehole_id,from_m,to_m,material\n"
        "WW-1,0,2,Brown SAND & fill\n"
        "WW-1,2,18,grey  silty\tclay\n"
        "WW-1,18,25,Varved clay\n"
        "WW-1,25,30,\"GRAVEL, water bearing\"\n"
        "WW-2,0,3,topsoil\n"
        "WW-2,3,30,clay\n"))
    return read_project(tmp_path)


def test_rules_match_whole_words_in_order_ignoring_case():
    rules = [MaterialRule("LAM", pattern="varv|laminat"),
             MaterialRule("SAND", words=("sand",)),
             MaterialRule("UMC", words=("silty clay", "clay"))]
    assert match_material("Grey LAMINATED clay", rules) == "LAM"  # first rule wins
    assert match_material("sandy clay", rules) == "UMC"  # "sandy" is not the word "sand"
    assert match_material("silty   clay, stiff", rules) == "UMC"  # any run of spaces
    assert match_material("hardpan", rules) is None
    # Python re semantics: the pattern is searched, not anchored
    assert re.search("varv", "well-varved", re.IGNORECASE) and match_material(
        "well-varved silt", rules) == "LAM"


def test_material_column_is_mapped_to_units_and_kept(tmp_path):
    p = _project(tmp_path)
    b = read_boreholes(p)
    ww1 = b.intervals[b.intervals["borehole_id"] == "WW-1"]
    assert list(ww1["unit"]) == ["SAND", "UMC", "LAM", "GRAV"]
    assert list(ww1["material"])[1] == "grey silty clay"  # whitespace normalised
    c = column_table(b, p)
    assert c.loc["WW-1", "aquitard_thickness_m"] == 23.0
    assert c.loc["WW-1", "status_aquitard"] == "full"


def test_unmapped_descriptions_are_reported_with_counts_never_guessed(tmp_path):
    p = _project(tmp_path, intervals=(
        "borehole_id,from_m,to_m,material\n"
        "WW-1,0,2,hardpan\n"
        "WW-1,2,18,clay\n"
        "WW-1,18,30,Hardpan\n"
        "WW-2,0,3,boulders\n"
        "WW-2,3,30,HARDPAN\n"))
    with pytest.raises(InputError) as err:
        read_boreholes(p)
    msgs = [(x.file, x.line, x.column, x.message) for x in err.value.problems]
    assert msgs[0][:3] == ("intervals.csv", 2, 4)
    assert "'hardpan' matches no [[materials]] rule: 3 intervals (lines 2, 4, 6)" in msgs[0][3]
    assert msgs[1][:3] == ("intervals.csv", 5, 4) and "'boulders'" in msgs[1][3]
    assert "1 interval (lines 5)" in msgs[1][3]
    assert len(msgs) == 2


def test_unit_column_wins_and_blank_unit_falls_back_to_material(tmp_path):
    p = _project(tmp_path, intervals=(
        "borehole_id,from_m,to_m,unit,material\n"
        "WW-1,0,2,SAND,clay\n"
        "WW-1,2,30,,clay\n"
        "WW-2,0,30,,\n"))
    with pytest.raises(InputError) as err:
        read_boreholes(p)
    (prob,) = err.value.problems
    assert (prob.line, prob.column) == (4, 4) and "unit and material are both blank" in \
        prob.message


def test_materials_without_rules_and_bad_rules_are_reported(tmp_path):
    p = _project(tmp_path, rules="")
    with pytest.raises(InputError) as err:
        read_boreholes(p)
    assert any("no [[materials]] rules" in x.message for x in err.value.problems)
    with pytest.raises(InputError) as err:
        _project(tmp_path, rules='[[materials]]\nunit = "XX"\nwords = ["a"]\n'
                 '[[materials]]\nunit = "UMC"\npattern = "(clay"\n')
    lines = sorted((x.line, x.message) for x in err.value.problems)
    assert "unit must be a unit code of the stack" in lines[0][1]
    assert "not a valid regular expression" in lines[1][1]
    assert lines[0][0] > 0 and lines[1][0] > lines[0][0]
