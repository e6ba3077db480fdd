"""``aquitardmap suggest PROJECT --holes N``: where to drill next."""

from __future__ import annotations

from pathlib import Path

import click
from rich.table import Table

from aquitardmap.cli._common import console, guarded
from aquitardmap.drilling.suggest import suggest
from aquitardmap.outputs import names as outputs


@click.command("suggest")
@click.argument("project", type=click.Path(path_type=Path))
@click.option("--holes", "n_holes", type=click.IntRange(1, 1000), default=None,
              help="How many new holes to suggest (default: [drilling] holes, 5).")
@click.option("--candidates", "candidates", type=click.Path(path_type=Path), default=None,
              help="GeoJSON or GeoPackage of candidate sites (points, lines or polygons, in "
                   "the project CRS); default: every cell of the study area.")
@click.option("--priority", "priority", type=click.Path(path_type=Path), default=None,
              help="GeoTIFF weighting each cell's area (overrides [drilling] priority_grid).")
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("."),
              show_default=True,
              help="Folder for suggested_holes.gpkg and .csv; if it holds a run's map.html, "
                   "the map is redrawn with the suggestions.")
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def suggest_command(project: Path, n_holes: int | None, candidates: Path | None,
                    priority: Path | None, out_dir: Path, debug: bool) -> None:
    """Rank new borehole sites in PROJECT by how much of the uncertain area (probability
    of thin clay between [drilling] p_low and p_high) each is expected to settle, and pick
    the best holes one after the other."""
    with console.status("Kriging the total aquitard and ranking sites"):
        result, written = guarded(lambda: suggest(project, out_dir, n_holes,
                                                  candidates_path=candidates,
                                                  priority_path=priority), debug)
    st = result.settings
    unit = "weighted m²" if result.weighted else "m²"
    console.print(f"Uncertain area now: {result.uncertain_now_m2 / 1e4:.1f} ha "
                  f"(probability between {st.p_low:g} and {st.p_high:g}; {unit}/10⁴); "
                  f"{result.n_candidates} candidate sites")
    t = Table(title="Suggested holes")
    for col in ("rank", "x", "y", "expected reduction (ha)", "kriged m ± SD"):
        t.add_column(col, justify="right")
    for r in result.holes.itertuples():
        t.add_row(str(r.rank), f"{r.x:.0f}", f"{r.y:.0f}",
                  f"{r.expected_reduction_m2 / 1e4:.1f}", f"{r.thickness_m:.1f} ± {r.sd_m:.1f}")
    console.print(t)
    if len(result.holes) < (n_holes or st.holes):
        console.print(f"Only {len(result.holes)} site(s) could be suggested: no other "
                      f"candidate reduces the uncertain area, or the {st.min_spacing_m:g} m "
                      "spacing leaves none.")
    for p in written:
        console.print(f"Wrote {p}", markup=False)
    if (out_dir / outputs.MAP).exists():
        console.print(f"Map redrawn: {out_dir / outputs.MAP}", markup=False)
    console.print(f"[yellow]Caution:[/] {outputs.CAUTION}")
