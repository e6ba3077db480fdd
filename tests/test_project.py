"""project.toml reading and validation."""

from pathlib import Path

import pytest

from aquitardmap.config.project import read_project
from aquitardmap.errors import InputError

from conftest import MINIMAL_PROJECT_TOML as MINIMAL

DEMO = Path(__file__).resolve().parents[1] / "demo_region"



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


# --- configuration is data only, and its paths stay inside the project folder -------------


def test_symbolic_link_leading_out_of_the_folder_is_refused(tmp_path):
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    (outside / "secret.csv").write_text("borehole_id,x,y,ground_elev_m,total_depth_m\n")
    proj = tmp_path / "proj"
    proj.mkdir()
    (proj / "link.csv").symlink_to(outside / "secret.csv")
    probs = _problems(proj, MINIMAL + '\n[files]\ncollars = "link.csv"\n')
    assert any(p.line == 19 and "outside the project folder through a symbolic link"
               in p.message for p in probs), probs


def test_symbolic_link_that_stays_inside_the_folder_is_followed(tmp_path):
    _project(tmp_path, MINIMAL + '\n[files]\ncollars = "data/c.csv"\n')
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / "c.csv").symlink_to(tmp_path / "collars.csv")
    p = read_project(tmp_path)
    assert p.files["collars"] == (tmp_path / "collars.csv").resolve()


def test_absolute_path_is_accepted_inside_the_folder_and_refused_outside(tmp_path):
    inside = _project(tmp_path, MINIMAL + f'\n[files]\ncollars = "{tmp_path / "collars.csv"}"\n')
    assert read_project(inside).files["collars"] == (tmp_path / "collars.csv").resolve()
    probs = _problems(tmp_path, MINIMAL + '\n[files]\ncollars = "/etc/hostname"\n')
    assert any(p.line == 19 and "outside the project folder" in p.message for p in probs)


@pytest.mark.parametrize("value, words", [
    ('""', "does not name a file"), ('"a\\u0000b"', "does not name a file"),
    ('"."', "is a folder"), ("5", "must be a path")])
def test_file_setting_that_names_no_file_is_refused_at_its_line(tmp_path, value, words):
    probs = _problems(tmp_path, MINIMAL + f"\n[files]\ncollars = {value}\n")
    assert any(p.line == 19 and words in p.message for p in probs), probs


def test_misspelt_key_is_refused_not_replaced_by_its_default(tmp_path):
    text = MINIMAL + "\n[screening]\nthin_thicknes_m = 10.0\n"
    probs = _problems(tmp_path, text)
    assert [(p.line, p.column) for p in probs] == [(19, 1)]
    assert "unknown key 'thin_thicknes_m' in [screening]" in probs[0].message
    assert "thin_thickness_m" in probs[0].message  # the expected keys are listed


def test_misspelt_key_of_a_unit_names_the_unit(tmp_path):
    probs = _problems(tmp_path, MINIMAL.replace('role = "aquitard"',
                                                'role = "aquitard"\nporosity = 0.3'))
    assert probs[0].line == 12 and "[[units]] 1" in probs[0].message


@pytest.mark.parametrize("value", ["nan", "inf", "-inf", '"50"', "true", "[50]",
                                   "1979-05-27"])
def test_cell_size_that_is_not_a_finite_number_is_refused(tmp_path, value):
    probs = _problems(tmp_path, MINIMAL.replace("cell_size_m = 50", f"cell_size_m = {value}"))
    assert any(p.line == 6 and "cell_size_m" in p.message for p in probs), probs


def test_whole_numbers_must_be_whole(tmp_path):
    probs = _problems(tmp_path, MINIMAL + "\n[kriging]\nmax_neighbours = 12.5\n")
    assert probs[0].line == 19 and "whole number" in probs[0].message


def test_section_that_is_not_a_table_is_refused(tmp_path):
    probs = _problems(tmp_path, "kriging = 5\n" + MINIMAL)
    assert any(p.line == 1 and "kriging must be a table" in p.message for p in probs)


def test_byte_order_mark_is_accepted(tmp_path):
    _project(tmp_path, MINIMAL)
    (tmp_path / "project.toml").write_bytes(b"\xef\xbb\xbf" + MINIMAL.encode())
    assert read_project(tmp_path).name == "Test"


def test_zone_tiers_have_documented_defaults_and_are_read(tmp_path):
    p = read_project(_project(tmp_path, MINIMAL))
    s = p.screening
    assert (s.p_window_threshold, s.p_thin_threshold) == (0.5, 0.5)
    assert (s.p_window_possible_threshold, s.p_thin_possible_threshold) == (0.2, 0.2)
    p = read_project(_project(tmp_path, MINIMAL + "\n[screening]\np_window_threshold = 0.6\n"
                              "p_window_possible_threshold = 0.6\n"
                              "p_thin_possible_threshold = 0.05\n"))
    s = p.screening
    assert (s.p_window_possible_threshold, s.p_thin_possible_threshold) == (0.6, 0.05)


@pytest.mark.parametrize(("lines", "line", "words"), [
    # possible above likely: pointed at the possible threshold's line (line 20 here)
    ("p_window_threshold = 0.4\np_window_possible_threshold = 0.5\n", 20,
     "[screening] p_window_possible_threshold (0.5, the possible tier) must be <= "
     "p_window_threshold (0.4, the likely tier)"),
    # only the likely threshold set, below the default possible one: pointed at it
    ("p_thin_threshold = 0.1\n", 19,
     "[screening] p_thin_possible_threshold (0.2, the possible tier) must be <= "
     "p_thin_threshold (0.1, the likely tier)"),
    ("p_thin_possible_threshold = 0\n", 19, "[screening] p_thin_possible_threshold must be > 0"),
    ("p_window_possible_threshold = 1.2\n", 19,
     "[screening] p_window_possible_threshold must be <= 1.0"),
    ('p_window_possible_threshold = "low"\n', 19,
     "[screening] p_window_possible_threshold must be a number"),
])
def test_zone_tier_thresholds_are_checked_at_their_line(tmp_path, lines, line, words):
    probs = _problems(tmp_path, MINIMAL + "\n[screening]\n" + lines)
    assert any(p.file == "project.toml" and p.line == line and p.column == 1
               and words in p.message for p in probs), probs


@pytest.mark.parametrize(("lines", "words"), [
    ('probability_method = "kriging"\n',
     "[screening] probability_method must be one of indicator, latent_gaussian, got "
     "'kriging'"),
    ("continuity_ratio = 0.5\n", "[screening] continuity_ratio must be >= 1"),
    ("chain_corridor_m = -5\n", "[screening] chain_corridor_m must be >= 0"),
    ('location_sd_m = "20 m"\n', "[screening] location_sd_m must be a number"),
])
def test_indicator_settings_are_checked_at_their_line(tmp_path, lines, words):
    # Bad settings of the indicator method name project.toml, the setting's line (19: the
    # first line after [screening]) and column 1.
    probs = _problems(tmp_path, MINIMAL + "\n[screening]\n" + lines)
    assert any(p.file == "project.toml" and p.line == 19 and p.column == 1
               and words in p.message for p in probs), probs


def test_indicator_settings_have_documented_defaults(tmp_path):
    s = read_project(_project(tmp_path, MINIMAL)).screening
    assert (s.probability_method, s.continuity_ratio, s.chain_corridor_m,
            s.location_sd_m) == ("indicator", 4.0, 150.0, 20.0)


def test_map_background_is_read_and_defaults_to_the_kind_of_map(tmp_path):
    from aquitardmap.outputs.webmap.build import resolve_background

    assert read_project(DEMO).map.background == "relief"  # the demo: arbitrary coordinates
    unset = read_project(_project(tmp_path, MINIMAL)).map.background
    assert unset is None
    # not set: tiles for a map that fetches its library, the DEM relief offline
    assert resolve_background(unset, self_contained=False) == "tiles"
    assert resolve_background(unset, self_contained=True) == "relief"
    assert resolve_background("tiles", self_contained=True) == "relief"  # never fetches
    assert resolve_background("none", self_contained=True) == "none"
    for value in ("tiles", "none", "relief"):
        p = read_project(_project(tmp_path, MINIMAL + f'\n[map]\nbackground = "{value}"\n'))
        assert p.map.background == value


@pytest.mark.parametrize("lines,line,words", [
    ('[map]\nbackground = "satellite"\n', 19, "[map] background must be one of tiles, none, "
     "relief, got 'satellite'"),
    ("[map]\nbackground = 3\n", 19, "[map] background must be one of"),
    ('[map]\nbackgroud = "none"\n', 19, "unknown key 'backgroud' in [map]"),
])
def test_map_background_is_checked_at_its_line(tmp_path, lines, line, words):
    probs = _problems(tmp_path, MINIMAL + "\n" + lines)
    assert any(p.line == line and words in p.message and p.column >= 1 for p in probs), probs
