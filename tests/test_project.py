"""project.toml reading and validation."""

from pathlib import Path

import pytest

from aquitardmap.errors import InputError
from aquitardmap.project import read_project

DEMO = Path(__file__).resolve().parents[1] / "demo_region"

MINIMAL = """\
[project]
name = "Test"
crs = "EPSG:32632"

[grid]
cell_size_m = 50

[[units]]
code = "CLAY"
name = "Clay"
role = "aquitard"

[[units]]
code = "GRAV"
name = "Gravel"
role = "aquifer"
"""


def _project(tmp_path: Path, text: str) -> Path:
    (tmp_path / "project.toml").write_text(text, encoding="utf-8")
    (tmp_path / "collars.csv").write_text("borehole_id,x,y,ground_elev_m,total_depth_m\n")
    (tmp_path / "intervals.csv").write_text("borehole_id,from_m,to_m,unit\n")
    return tmp_path


def _problems(tmp_path, text):
    with pytest.raises(InputError) as exc:
        read_project(_project(tmp_path, text))
    return exc.value.problems


def test_demo_project_reads_with_documented_defaults():
    p = read_project(DEMO)
    assert [u.code for u in p.aquitard_units] == ["UMC", "LMC", "LAM"]
    assert p.aquifer_unit.code == "GRAV"
    assert p.crs.to_epsg() == 32632
    assert p.screening.thin_thickness_m == 5.0


def test_minimal_project_gets_defaults(tmp_path):
    p = read_project(_project(tmp_path, MINIMAL))
    assert p.hydraulics.vertical_gradient == 1.0
    assert p.screening.window_thickness_m == 1.0
    assert p.unit("CLAY").anisotropy_kh_kv == 1.0


def test_toml_syntax_error_names_line_and_column(tmp_path):
    probs = _problems(tmp_path, MINIMAL.replace('name = "Test"', 'name = "Test'))
    assert probs[0].file == "project.toml" and probs[0].line == 2 and probs[0].column > 0


def test_geographic_crs_is_refused(tmp_path):
    probs = _problems(tmp_path, MINIMAL.replace("EPSG:32632", "EPSG:4326"))
    assert any("projected CRS in metres" in p.message and p.line == 3 for p in probs)


def test_bad_role_and_missing_aquifer_are_all_reported(tmp_path):
    text = MINIMAL.replace('role = "aquifer"', 'role = "bedrock"')
    probs = _problems(tmp_path, text)
    msgs = " | ".join(p.message for p in probs)
    assert "role must be one of" in msgs and "aquifer" in msgs
    assert any(p.line == 16 for p in probs)


def test_negative_cell_size_points_at_its_line(tmp_path):
    probs = _problems(tmp_path, MINIMAL.replace("cell_size_m = 50", "cell_size_m = -5"))
    assert probs[0].line == 6 and "cell_size_m" in probs[0].message


def test_path_escaping_the_project_folder_is_refused(tmp_path):
    probs = _problems(tmp_path, MINIMAL + '\n[files]\ncollars = "../../etc/passwd"\n')
    assert any("outside the project folder" in p.message for p in probs)


def test_configuration_is_never_evaluated(tmp_path):
    # A value that would run code if evaluated is just an unknown string here.
    probs = _problems(tmp_path, MINIMAL.replace("EPSG:32632", "__import__('os').getcwd()"))
    assert any("not a known CRS" in p.message for p in probs)


def test_hydraulic_extensions_have_documented_defaults(tmp_path):
    p = read_project(_project(tmp_path, MINIMAL))
    h = p.hydraulics
    assert (h.crust_depth_m, h.crust_k_factor, h.crust_treatment) == (3.0, 100.0, "raise_k")
    assert h.effective_diffusion_m2_s == 5e-10 and h.terzaghi_c == 10.7e-3
    assert p.unit("CLAY").secondary_k_factor == 1.0
    assert (p.screening.piercing_radius_m, p.screening.piercing_flag_per_km2) == (500.0, 10.0)


def test_hydraulic_extensions_are_checked(tmp_path):
    text = MINIMAL.replace('role = "aquitard"', 'role = "aquitard"\nsecondary_k_factor = 0.5\n'
                           'k_method = "beyer"') + (
        '\n[hydraulics]\ncrust_treatment = "ignore"\ncrust_depth_m = -1\n'
        'effective_diffusion_m2_s = 0\nterzaghi_c = 0.02\n'
        '\n[screening]\npiercing_radius_m = 0\n')
    msgs = [p.message for p in _problems(tmp_path, text)]
    assert any("secondary_k_factor must be >= 1.0" in m for m in msgs)
    assert any("crust_treatment must be one of raise_k, not_protective" in m for m in msgs)
    assert any("crust_depth_m must be >= 0" in m for m in msgs)
    assert any("effective_diffusion_m2_s must be > 0" in m for m in msgs)
    assert any("terzaghi_c must be <= 0.0107" in m for m in msgs)
    assert any("piercing_radius_m must be > 0" in m for m in msgs)
    assert not any("k_method" in m for m in msgs)       # "beyer" is a known method
