"""The printable report (aquitardmap.pdfreport): pages rendered and read back by poppler.

poppler-utils (Debian) is the outside reference: ``pdftoppm`` renders each page to PNG,
``pdftotext`` extracts what a reader sees, ``pdfinfo`` counts pages. The tiny run folder is
invented test data (tests/mapdata.py); the demo run is the bundled invented region.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

import matplotlib.image
import pytest
from mapdata import build_run_folder

from aquitardmap import outputs
from aquitardmap.pdfreport import write_report

POPPLER = all(shutil.which(t) for t in ("pdftoppm", "pdftotext", "pdfinfo"))
needs_poppler = pytest.mark.skipif(
    not POPPLER, reason="poppler-utils (pdftoppm, pdftotext, pdfinfo) not installed; "
    ".ci/run installs it with apt-get")


def _pages(pdf: Path) -> int:
    info = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, check=True)
    return int(re.search(r"^Pages:\s+(\d+)", info.stdout, re.M).group(1))


def _text(pdf: Path, page: int | None = None) -> str:
    args = ["pdftotext", "-layout"]
    if page is not None:
        args += ["-f", str(page), "-l", str(page)]
    out = subprocess.run([*args, str(pdf), "-"], capture_output=True, text=True, check=True)
    return " ".join(out.stdout.split())  # one space between words, whatever the layout


@pytest.fixture(scope="module")
def tiny_report(tmp_path_factory) -> Path:
    run_dir = tmp_path_factory.mktemp("tiny")
    build_run_folder(run_dir)
    return write_report(run_dir)


@needs_poppler
def test_every_page_renders_and_is_not_blank(tiny_report, tmp_path):
    n = _pages(tiny_report)
    assert n >= 6
    subprocess.run(["pdftoppm", "-r", "40", "-png", str(tiny_report), str(tmp_path / "p")],
                   check=True)
    pngs = sorted(tmp_path.glob("p-*.png"))
    assert len(pngs) == n
    for png in pngs:
        img = matplotlib.image.imread(png)[..., :3]
        ink = (img.mean(axis=2) < 0.9).mean()  # share of pixels that are not paper
        assert ink > 0.005, png.name
    # The map pages hold colour (the grids), not only black text on white.
    maps = matplotlib.image.imread(pngs[1])[..., :3]
    saturation = maps.max(axis=2) - maps.min(axis=2)
    assert (saturation > 0.25).mean() > 0.05


@needs_poppler
def test_report_has_every_section_and_the_caution_on_every_page(tiny_report):
    text = _text(tiny_report)
    for heading in ("Aquitard screening report", "The job", "Data used", "Thresholds and "
                    "results", "Maps", "Total clay (aquitard) thickness",
                    "Chance the clay is thinner than 5 m (approximate)",
                    "Travel time down to the aquifer", "Aquifer vulnerability class (AVI)",
                    "Variogram and cross-validation", "Leave-one-out cross-validation",
                    "Flagged areas", "Parameters and their sources",
                    "Units of the stack and their hydraulic conductivity", "Settings",
                    "Methods and sources", "Van Stempvoort, Ewert & Wassenaar"):
        assert heading in text, heading
    assert "Ostrel Valley & <test>" in text  # user text printed as it is
    assert "ab" * 32 in text  # the input file's SHA-256
    caution = " ".join(outputs.CAUTION.split())
    assert caution in text
    for page in range(1, _pages(tiny_report) + 1):
        assert "not a substitute for site-specific investigation" in _text(tiny_report, page)


@needs_poppler
def test_flagged_area_table_lists_each_zone(tiny_report):
    text = _text(tiny_report)
    table = text[text.index("Flagged areas"):]
    # Window 25 000 m² = 2.5 ha, thin 1 250 000 m² = 1.25 km², fast 7 500 m² = 0.75 ha,
    # printed to one decimal (1 ha = 10⁴ m², 1 km² = 10⁶ m²); P(thin) 0.93 -> 93 %.
    # No tier in this run folder ("—"); the chance falls back to the mean P(thin).
    assert re.search(r"1 Window — 2\.5 ha 0\.40 0 1\.1 93 % under 1 day 1", table)
    assert re.search(r"2 Thin clay — 1\.25 km² 3\.2 2\.0 1\.4 61 % 2\.5 years 0", table)
    assert re.search(r"3 Fast path — 0\.8 ha 6\.0 5\.5 2\.0 20 % 30 years 0", table)


@needs_poppler
def test_report_shows_the_zone_tiers(tmp_path):
    build_run_folder(tmp_path, tiers=True)
    text = _text(write_report(tmp_path))
    results = text[text.index("Thresholds and results"):text.index("Caution")]
    # Areas by kind (all tiers) and by tier: 25 000 m² = 2.5 ha, 1 250 000 m² = 1.25 km².
    assert re.search(r"Window: clay absent \(under 0\.5 m\), all tiers 1 2\.5 ha "
                     r"likely \(chance at least 50 %\) 1 2\.5 ha "
                     r"possible: cannot be ruled out \(chance at least 15 %\) 0 0\.0 ha", results)
    assert re.search(r"possible: cannot be ruled out \(chance at least 20 %\) 1 1\.25 km²",
                     results)
    assert "Window and thin zones come in two tiers" in results
    table = text[text.index("Flagged areas"):]
    # Tier, chance (mean, highest) and the count of proving holes of each zone.
    assert re.search(r"1 Window likely 2\.5 ha 0\.40 0 1\.1 80 % 97 % under 1 day 1 1", table)
    assert re.search(r"2 Thin clay possible 1\.25 km² 3\.2 2\.0 1\.4 61 % 80 % 2\.5 years 0 2",
                     table)
    assert "Zone tiers" in text and "p_window_possible_threshold" in text


@needs_poppler
def test_too_few_full_holes_says_so_instead_of_a_variogram(tiny_report):
    # The tiny run has one hole that reached the aquifer.
    assert "Too few holes reached the aquifer to draw a variogram." in _text(tiny_report)


@needs_poppler
def test_better_probability_grid_is_mapped_when_present(tmp_path):
    build_run_folder(tmp_path)
    shutil.copy(tmp_path / outputs.P_THIN, tmp_path / "p_thin.tif")
    text = _text(write_report(tmp_path))
    assert "Chance the clay is thinner than 5 m" in text
    assert "(approximate)" not in text


def test_user_text_with_mathtext_characters_is_printed(tmp_path):
    build_run_folder(tmp_path)
    summary = json.loads((tmp_path / outputs.SUMMARY).read_text(encoding="utf-8"))
    summary["project"]["name"] = "Site $x^2$ <b>{{ 7*7 }}</b>"
    (tmp_path / outputs.SUMMARY).write_text(json.dumps(summary), encoding="utf-8")
    pdf = write_report(tmp_path)
    assert pdf.stat().st_size > 10_000
    if POPPLER:
        assert "Site $x^2$ <b>{{ 7*7 }}</b>" in _text(pdf, 1)


def test_missing_folder_is_refused(tmp_path):
    with pytest.raises(NotADirectoryError):
        write_report(tmp_path / "nope")


@needs_poppler
def test_pipeline_writes_the_report_with_the_demo_variogram(demo_run):
    pdf = demo_run.out_dir / outputs.REPORT
    assert outputs.REPORT in demo_run.summary["outputs"] and pdf.is_file()
    text = _text(pdf)
    n_full = demo_run.summary["counts"]["reached_aquifer"]
    assert f"Total clay thickness: {n_full} holes that reached the aquifer" in text
    assert "fitted spherical" in text
    n_zones = sum(demo_run.summary["zones"]["count_by_kind"].values())
    assert re.search(rf"\b{n_zones} (Fast path|Thin clay|Window|Pierced)", text)
    assert not [p for p in demo_run.out_dir.iterdir() if p.name.endswith(".tmp")]
