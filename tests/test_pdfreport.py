"""The printable report (aquitardmap.outputs.report): pages rendered and read back by poppler.

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
from mapdata import build_run_folder, indicator_probability, latent_probability, set_probability

from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.calibration import (
    CALIBRATION_HEADING,
    calibration_checks,
    fmt_bin_share,
    fmt_brier,
)
from aquitardmap.outputs.report import write_report

POPPLER = all(shutil.which(t) for t in ("pdftoppm", "pdftotext", "pdfinfo"))
needs_poppler = pytest.mark.skipif(
    not POPPLER, reason="poppler-utils (pdftoppm, pdftotext, pdfinfo) not installed; "
    ".ci/run installs it with apt-get")


def _pages(pdf: Path) -> int:
    info = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, check=True)
    return int(re.search(r"^Pages:\s+(\d+)", info.stdout, re.M).group(1))


def _text(pdf: Path, page: int | None = None, *, layout: bool = True) -> str:
    """What a reader sees, one space between words; without ``layout`` in reading order, so
    the wrapped lines of one table cell stay together."""
    args = ["pdftotext", "-layout"] if layout else ["pdftotext"]
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
    # The method the demo used, and its check at the holes with the summary's numbers.
    assert demo_run.summary["probability"]["method"].startswith("indicator kriging")
    _, methods = _page_with(pdf, "Methods and sources", layout=False)
    assert "Journel 1983" in methods and "Gibbs" not in text
    _, page = _page_with(pdf, CALIBRATION_HEADING)
    for row in _calibration_rows(demo_run.summary):
        assert re.search(row, page), row
    n_zones = sum(demo_run.summary["zones"]["count_by_kind"].values())
    assert re.search(rf"\b{n_zones} (Fast path|Thin clay|Window|Pierced)", text)
    assert not [p for p in demo_run.out_dir.iterdir() if p.name.endswith(".tmp")]


def _page_with(pdf: Path, heading: str, *, layout: bool = True) -> tuple[int, str]:
    """The number and text of the first page whose heading is ``heading``."""
    for page in range(1, _pages(pdf) + 1):
        text = _text(pdf, page, layout=layout)
        if heading in text:
            return page, text
    raise AssertionError(f"no page with {heading!r}")


def _calibration_rows(summary: dict) -> list[str]:
    """What the report's calibration tables must print, row by row, from the summary's
    numbers (Brier scores as stored, four decimals; shares in per cent; – for empty bins)."""
    checks = calibration_checks(summary)
    rows = [rf"{re.escape(c.label)} \(under {c.threshold_m:g} m\) {c.n_holes} {c.n_event} "
            rf"{c.n_blocks} of {c.block_m:.3g} m {re.escape(fmt_brier(c.brier))} "
            rf"{re.escape(fmt_brier(c.brier_reference))} "
            rf"{re.escape(fmt_brier(c.skill_score))}" for c in checks]
    for i, b in enumerate(checks[0].bins):
        cells = [b.label]
        for c in checks:
            cb = c.bins[i]
            cells += ([str(cb.n), fmt_bin_share(cb.mean_p), fmt_bin_share(cb.observed)]
                      if cb.n else ["0", "–", "–"])
        rows.append(" ".join(re.escape(x) for x in cells))
    # pdftotext may close up the space before a per cent sign ("0%").
    return [r.replace(r"\ %", " ?%") for r in rows]


@needs_poppler
def test_report_shows_how_well_the_probabilities_held_up_at_the_holes(tmp_path):
    build_run_folder(tmp_path)
    set_probability(tmp_path, indicator_probability())
    pdf = write_report(tmp_path)
    _, text = _page_with(pdf, CALIBRATION_HEADING)
    summary = json.loads((tmp_path / outputs.SUMMARY).read_text(encoding="utf-8"))
    # Scores as stored in summary.json (invented numbers, tests/mapdata.py): holes scored,
    # holes showing the event, blocks and their size, Brier, constant share, skill.
    assert re.search(r"P\(window\) \(under 0\.5 m\) 120 9 40 of 300 m 0\.0123 0\.0456 "
                     r"0\.7303", text)
    assert re.search(r"P\(thin\) \(under 5 m\) 110 17 40 of 300 m 0\.0789 0\.1306 0\.3959",
                     text)
    # Reliability bins: n, mean P and observed share of each event; empty bins as –.
    assert re.search(r"10–30 ?% 11 21 ?% 18 ?% 21 27 ?% 24 ?%", text)
    assert re.search(r"90–100 ?% 0 – – 0 – –", text)
    for row in _calibration_rows(summary):
        assert re.search(row, text), row
    # How to read it, with the run's own example (the fullest P(thin) bin from 10 %).
    assert "in the 21 holes given about 27 % for P(thin), the clay was thinner than 5 m in " \
           "24 %" in text
    assert "Block cross-validation is a pessimistic check" in text
    assert "not a substitute for site-specific investigation" in text  # the caution


@needs_poppler
def test_methods_page_describes_the_method_the_run_used(tmp_path):
    build_run_folder(tmp_path)
    set_probability(tmp_path, indicator_probability())
    _, text = _page_with(write_report(tmp_path), "Methods and sources", layout=False)
    for words in ("indicator kriging", "Journel 1983", "Goovaerts 1997",
                  "te Stroet & Snepvangers 2005", "ratio 3.5", "within 175 m",
                  "within 25 m of one", "at least 90 %", "3 cutoffs from 0.5 to 40 m"):
        assert words in text, words
    assert "Gibbs" not in text and "window_latent_floor_m" not in text

    set_probability(tmp_path, latent_probability())
    pdf = write_report(tmp_path)
    _, text = _page_with(pdf, "Methods and sources", layout=False)
    assert "latent Gaussian thickness" in text and "Gibbs sampler" in text
    assert "window_latent_floor_m" in text and "Ground as external drift" in text
    assert "not used: RMSE 3.3 m with it" in text  # the run's drift decision
    assert "Journel" not in text and "te Stroet" not in text
    # No check at the holes in this run: no calibration page, nothing invented.
    assert CALIBRATION_HEADING not in _text(pdf)

    set_probability(tmp_path, None)  # a run folder from before either method
    text = _text(write_report(tmp_path))
    assert "Methods and sources" in text and CALIBRATION_HEADING not in text
    assert "Gibbs" not in text and "Journel" not in text


@needs_poppler
def test_long_zone_words_wrap_inside_their_column(demo_run):
    # The pierced kind has the longest words of the report's tables (its threshold on
    # page 1, its name in the flagged-areas table); a cell's text must wrap, not run into
    # the next column or be cut. Read in reading order, the wrapped lines of one cell stay
    # together (pdftotext without -layout).
    pdf = demo_run.out_dir / outputs.REPORT
    n = demo_run.summary["zones"]["count_by_kind"]["pierced"]
    assert n > 0  # the demo has pierced zones
    assert "reach the aquifer through the clay" in _text(pdf, 1, layout=False)
    first = _text(pdf, 1)  # as laid out: the wrapped line stands apart from the count
    assert "through the clay" in first
    assert f"the{n}" not in first and f"the {n} clay" not in first
    rows = 0
    for page in range(1, _pages(pdf) + 1):
        if "Flagged areas" not in _text(pdf, page):
            continue
        lines = subprocess.run(["pdftotext", "-layout", "-f", str(page), "-l", str(page),
                                str(pdf), "-"], capture_output=True, text=True,
                               check=True).stdout.splitlines()
        for i, line in enumerate(lines[:-1]):
            if re.match(r"\s*\d+\s+Pierced by many\s", line):  # a table row
                assert lines[i + 1].split() == ["boreholes"], lines[i:i + 2]
                rows += 1
    assert rows == n
