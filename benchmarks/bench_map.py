"""Benchmark: the planners' map at regional scale, its size and its cost in a browser.

Builds the 20,000-hole synthetic region (``make_synthetic_region``: invented data from a
known truth, 40 km x 28 km, cells of 25 m), runs it once (``aquitardmap.run``, the map with
its default background) and the demo region, then opens each ``map.html`` in headless
Chromium (Debian's ``/usr/bin/chromium`` through playwright; Leaflet served from the
package's copy, background tiles answered with a blank tile, anything else refused) and
prints the file size (MB), the seconds from opening the page until its script has wired
every layer, the script heap in use (Chrome DevTools Protocol ``Runtime.getHeapUsage``),
and the console errors. Not a test: it never asserts on time.

    python benchmarks/bench_map.py                      # the 20,000-hole region and the demo
    python benchmarks/bench_map.py --holes 2000         # a smaller region
    python benchmarks/bench_map.py --measure A.html ... # only measure maps already written
"""

from __future__ import annotations

import argparse
import io
import re
import tempfile
import time
from pathlib import Path

import numpy as np

import aquitardmap
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.outputs.webmap.assets import PACKAGE_ASSET_DIRS

CHROMIUM = "/usr/bin/chromium"
DEMO = Path(__file__).resolve().parents[1] / "demo_region"
LEAFLET_URL = re.compile(r"/npm/leaflet@[\d.]+/dist/(.+)$")
TILE_HOSTS = ("tile.openstreetmap.org",)


def _blank_tile() -> bytes:
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(np.full((256, 256, 3), 237, np.uint8)).save(buf, format="PNG")
    return buf.getvalue()


def _measure_one(browser, path: Path, leaflet: Path, tile: bytes) -> dict:
    context = browser.new_context(viewport={"width": 1400, "height": 900})
    page = context.new_page()
    errors: list[str] = []
    refused: list[str] = []

    def handle(route) -> None:
        url = route.request.url
        m = LEAFLET_URL.search(url)
        if url.startswith(("file:", "data:")):
            route.continue_()
        elif m and (leaflet / m.group(1)).is_file():
            route.fulfill(path=str(leaflet / m.group(1)))
        elif any(h in url for h in TILE_HOSTS):
            route.fulfill(body=tile, content_type="image/png")
        else:
            refused.append(url)
            route.abort()

    page.route("**/*", handle)
    page.on("console", lambda msg: msg.type == "error" and errors.append(msg.text))
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    t0 = time.perf_counter()
    page.goto(path.resolve().as_uri(), wait_until="load", timeout=300_000)
    try:
        page.wait_for_function("() => window.aqm !== undefined", timeout=120_000)
    except Exception:  # noqa: BLE001 - report what the page said, not a stack trace
        errors.append("the page never became ready")
    seconds = time.perf_counter() - t0
    page.wait_for_timeout(500)
    heap = context.new_cdp_session(page).send("Runtime.getHeapUsage")
    context.close()
    return {"map": str(path), "size_mb": path.stat().st_size / 1e6, "ready_s": seconds,
            "heap_mb": heap["usedSize"] / 1e6, "errors": errors, "refused": len(refused)}


def measure(paths: list[Path]) -> list[dict]:
    """Size, time to ready, script heap and console errors of each map in Chromium."""
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM,
                                     args=["--headless", "--no-sandbox", "--disable-gpu"])
        out = [_measure_one(browser, path, PACKAGE_ASSET_DIRS[0], _blank_tile())
               for path in paths]
        browser.close()
    return out


def _print(label: str, rows: list[dict]) -> None:
    for r in rows:
        print(f"{label}: map.html {r['size_mb']:.1f} MB, ready {r['ready_s']:.2f} s, "
              f"script heap {r['heap_mb']:.0f} MB, console errors {len(r['errors'])} "
              f"{r['errors'][:3]}, "
              f"refused requests {r['refused']}  ({r['map']})", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--holes", type=int, default=20_000)
    ap.add_argument("--folder", type=Path, default=None,
                    help="work folder (default: a temporary one)")
    ap.add_argument("--measure", type=Path, nargs="+", default=None,
                    help="only measure these map.html files")
    args = ap.parse_args()
    if args.measure:
        _print("map", measure(args.measure))
        return
    with tempfile.TemporaryDirectory() as tmp:
        folder = args.folder or Path(tmp)
        region = folder / "region"
        t0 = time.perf_counter()
        make_synthetic_region(region, seed=5, n_holes=args.holes, extent_m=(40_000, 28_000),
                              cell_size_m=25, write_project_toml=True)
        result = aquitardmap.run(region, folder / "region_out", tile_cache=False)
        cells = result.inputs.grid.width * result.inputs.grid.height
        print(f"region: {args.holes} holes, {cells} cells, generated and run in "
              f"{time.perf_counter() - t0:.0f} s", flush=True)
        aquitardmap.run(DEMO, folder / "demo_out", tile_cache=False)
        rows = measure([folder / "region_out" / "map.html", folder / "demo_out" / "map.html"])
        _print(f"{args.holes} holes", rows[:1])
        _print("demo", rows[1:])


if __name__ == "__main__":
    main()
