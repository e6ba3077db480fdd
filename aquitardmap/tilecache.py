"""Re-grid only what changed: a cache of kriged grid tiles keyed by the data that decide them.

With a moving neighbourhood of the ``k`` nearest data (ordinary kriging as in Isaaks &
Srivastava 1989, ch. 12, with the neighbourhood search of their ch. 14), the estimate and
variance at a cell depend only on the variogram model, ``k``, the cell's position and its
``k`` nearest data. Which data can be among the ``k`` nearest of any cell of a rectangular
tile is bounded by the triangle inequality: if ``r_k`` is the distance from the centre of a
square to its ``k``-th nearest datum and ``h`` the square's half-diagonal, every cell's
``k`` nearest data lie within ``r_k + h`` of the cell, hence within ``R = r_k + h`` of the
square. Taking that bound over small *probe* squares of the tile (4 × 4 cells by default),
the data within their grown squares (the tile's *region*) decide the tile completely: a
cell's ``k`` nearest among all data are its ``k`` nearest among the region's. (With
geometric anisotropy the neighbours are the nearest after a rotation and a stretch of one
axis by the ratio ``a``; distances then change by a factor between
``min(1, a)`` and ``max(1, a)``, and ``R`` is widened by those factors, whatever the
rotation convention of the engine.)

So a tile's cache key is a SHA-256 of the model, ``k``, the tile's cells and mask, and the
region's data (coordinates and values, sorted). After boreholes are added, only tiles
whose region holds a changed datum get a new key and are kriged again; every other tile is
read from the cache. Because a tile is always kriged from its region's data in sorted
order, a tile computed in a later run is bit-for-bit what a run with an empty cache would
compute; and the region contains every cell's neighbours, so the tiles equal kriging with
all data (to rounding; tested to 1e-9).

Tiles sit on a lattice of ``tile_cells`` × ``tile_cells`` grid cells anchored at the CRS
origin, so they line up between runs even when the study area (and the grid extent) grows.
Entries are small binary files written under a temporary name and renamed into place (a killed
run leaves no half-written entry); :meth:`TileCache.prune` removes entries a successful run
did not use.
"""

from __future__ import annotations

import contextlib
import contextvars
import hashlib
import json
import math
import os
import tempfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

from aquitardmap.grid import Grid
from aquitardmap.variogram import VariogramModel

#: Version of the key and entry format (change it when the kriging itself changes).
CACHE_FORMAT = "tiles-v1"
#: File suffix of a cache entry (raw little-endian float64: estimates, then variances).
SUFFIX = ".tile"
#: Default tile side (grid cells): one kriging call per tile that changed.
TILE_CELLS = 16
#: Side (grid cells) of the squares over which the neighbour bound is taken within a tile.
PROBE_CELLS = 4

#: ``krige(x, y, values, model, xt, yt, max_neighbours) -> (estimate, variance)``
KrigeFn = Callable[..., tuple[np.ndarray, np.ndarray]]

_CURRENT: contextvars.ContextVar[TileCache | None] = contextvars.ContextVar(
    "aquitardmap_tile_cache", default=None)


@dataclass
class TileStats:
    """Tiles read from the cache and tiles kriged, since the cache was opened."""

    reused: int = 0
    computed: int = 0
    cells_reused: int = 0
    cells_computed: int = 0

    def as_dict(self) -> dict[str, int]:
        return {"tiles_reused": self.reused, "tiles_computed": self.computed,
                "cells_reused": self.cells_reused, "cells_computed": self.cells_computed}


@dataclass
class TileCache:
    """A folder of kriged tiles (see the module docstring)."""

    folder: Path
    tile_cells: int = TILE_CELLS
    probe_cells: int = PROBE_CELLS
    stats: TileStats = field(default_factory=TileStats)
    used: set[str] = field(default_factory=set)

    def __post_init__(self) -> None:
        if self.tile_cells % self.probe_cells:
            raise ValueError("tile_cells must be a multiple of probe_cells")
        self.folder = Path(self.folder)
        self.folder.mkdir(parents=True, exist_ok=True)

    # ---------------------------------------------------------------------------------------
    def _load(self, key: str, n_cells: int) -> tuple[np.ndarray, np.ndarray] | None:
        """Estimate and variance of a tile: ``2 * n_cells`` little-endian float64."""
        try:
            arr = np.fromfile(self.folder / f"{key}{SUFFIX}", dtype="<f8")
        except OSError:
            return None
        if arr.size != 2 * n_cells:
            return None
        return arr[:n_cells], arr[n_cells:]

    def _save(self, key: str, est: np.ndarray, var: np.ndarray) -> None:
        fd, tmp = tempfile.mkstemp(prefix=".tile-", suffix=SUFFIX, dir=self.folder)
        try:
            with os.fdopen(fd, "wb") as f:
                f.write(np.concatenate([est, var]).astype("<f8").tobytes())
            os.replace(tmp, self.folder / f"{key}{SUFFIX}")
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise

    def prune(self) -> int:
        """Delete the entries not used since the cache was opened; returns how many."""
        n = 0
        for p in self.folder.glob(f"*{SUFFIX}"):
            if p.stem not in self.used:
                p.unlink(missing_ok=True)
                n += 1
        for p in self.folder.glob(".tile-*"):
            p.unlink(missing_ok=True)
        return n

    # ---------------------------------------------------------------------------------------
    def _probe_regions(self, tree: cKDTree, k: int, grid: Grid, row0: int, col0: int,
                       s_lo: float, s_hi: float) -> tuple[np.ndarray, int, int]:
        """Data near each *probe* square of the grid (one batched pass).

        Probe squares of ``probe_cells`` cells sit on the absolute lattice (clipped to the
        grid). Every cell of a probe with centre ``p``, half-diagonal ``h`` and k-th
        neighbour distance ``r_k`` at ``p`` has its neighbours within ``r_k + h`` of itself
        (triangle inequality), so within ``(s_hi / s_lo) * (r_k + h) + h`` of ``p``.

        Returns an object array (probe rows, probe columns) of index arrays (None for a
        probe with no cell in the mask) and the global index of the first probe row and
        column.
        """
        t = grid.transform
        cell = float(t.a)
        size = self.probe_cells
        pr0, pc0 = math.floor(row0 / size), math.floor(col0 / size)
        prs = np.arange(pr0, math.floor((row0 + grid.height - 1) / size) + 1)
        pcs = np.arange(pc0, math.floor((col0 + grid.width - 1) / size) + 1)
        ra = np.clip(prs * size - row0, 0, grid.height)
        rb = np.clip((prs + 1) * size - row0, 0, grid.height)
        ca = np.clip(pcs * size - col0, 0, grid.width)
        cb = np.clip((pcs + 1) * size - col0, 0, grid.width)
        any_mask = np.array([[grid.mask[r1:r2, c1:c2].any() for c1, c2 in zip(ca, cb,
                                                                              strict=True)]
                             for r1, r2 in zip(ra, rb, strict=True)], dtype=bool)
        cy = t.f - cell * (ra + rb) / 2.0
        cx = t.c + cell * (ca + cb) / 2.0
        hy, hx = cell * (rb - ra) / 2.0, cell * (cb - ca) / 2.0
        ii, jj = np.nonzero(any_mask)
        centres = np.column_stack([cx[jj], cy[ii]])
        h = np.hypot(hx[jj], hy[ii])
        out = np.empty(any_mask.shape, dtype=object)
        if len(centres):
            d, _ = tree.query(centres, k=k)
            r_k = d[:, -1] if d.ndim == 2 else d
            reach = s_hi * (r_k + h) / s_lo + h
            reach = reach * (1.0 + 1e-9) + 1e-6  # ties and rounding
            lists = tree.query_ball_point(centres, reach)
            for i, j, v in zip(ii, jj, lists, strict=True):
                out[i, j] = np.asarray(v, dtype=np.int64)
        return out, pr0, pc0

    def krige_grid(self, x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                   model: VariogramModel, grid: Grid, max_neighbours: int,
                   krige: KrigeFn) -> tuple[np.ndarray, np.ndarray]:
        """Kriging estimate and variance on the cells of ``grid`` inside its mask, tile by
        tile, reusing every tile whose deciding data are unchanged.

        ``krige`` kriges targets from data with the nearest ``max_neighbours``; it is called
        once per tile that is not in the cache, with that tile's region data.

        Returns (height, width) arrays, NaN outside the mask.
        """
        x, y, z = (np.asarray(a, dtype=float).ravel() for a in (x_m, y_m, values))
        est = np.full(grid.mask.shape, np.nan)
        var = np.full(grid.mask.shape, np.nan)
        n = x.size
        if n == 0:
            raise ValueError("no data to krige")
        k = int(min(max_neighbours, n))
        tree = cKDTree(np.column_stack([x, y]))
        t = grid.transform
        cell = float(t.a)
        side = self.tile_cells
        model_text = json.dumps(model.as_dict(), sort_keys=True, default=float)
        ratio = float(model.anisotropy_ratio)
        s_lo, s_hi = min(1.0, ratio), max(1.0, ratio)
        # absolute tile lattice: tile (i, j) covers cells whose global index // side == (i, j)
        col0 = int(round(t.c / cell))  # global column of the grid's first column
        row0 = int(round(-t.f / cell))  # global row (from y = 0, southward) of the first row
        per = side // self.probe_cells
        if n > k:
            probes, pr0, pc0 = self._probe_regions(tree, k, grid, row0, col0, s_lo, s_hi)
        for gr in range(math.floor(row0 / side), math.floor((row0 + grid.height - 1) / side) + 1):
            r_a, r_b = max(gr * side - row0, 0), min((gr + 1) * side - row0, grid.height)
            for gc in range(math.floor(col0 / side),
                            math.floor((col0 + grid.width - 1) / side) + 1):
                c_a, c_b = max(gc * side - col0, 0), min((gc + 1) * side - col0, grid.width)
                mask = grid.mask[r_a:r_b, c_a:c_b]
                if not mask.any():
                    continue
                xmin, ymax = t.c + cell * c_a, t.f - cell * r_a
                if n <= k:
                    region = np.arange(n)
                else:
                    block = probes[max(gr * per - pr0, 0):(gr + 1) * per - pr0,
                                   max(gc * per - pc0, 0):(gc + 1) * per - pc0].ravel()
                    region = np.unique(np.concatenate([b for b in block if b is not None]))
                order = np.lexsort((z[region], y[region], x[region]))
                region = region[order]
                rx, ry, rz = x[region], y[region], z[region]
                h = hashlib.sha256()
                h.update(CACHE_FORMAT.encode())
                h.update(model_text.encode())
                h.update(np.array([k, side, gr, gc], dtype=np.int64).tobytes())
                h.update(np.array([cell, xmin, ymax], dtype=np.float64).tobytes())
                h.update(np.packbits(mask).tobytes() + np.array(mask.shape).tobytes())
                for arr in (rx, ry, rz):
                    h.update(np.ascontiguousarray(arr, dtype=np.float64).tobytes())
                key = h.hexdigest()
                rows, cols = np.nonzero(mask)
                n_cells = rows.size
                hit = self._load(key, n_cells)
                if hit is None:
                    xt = t.c + cell * (cols + c_a + 0.5)
                    yt = t.f - cell * (rows + r_a + 0.5)
                    e, v = krige(rx, ry, rz, model, xt, yt, max_neighbours=k)
                    e, v = np.asarray(e, float), np.asarray(v, float)
                    self._save(key, e, v)
                    self.stats.computed += 1
                    self.stats.cells_computed += n_cells
                else:
                    e, v = hit
                    self.stats.reused += 1
                    self.stats.cells_reused += n_cells
                self.used.add(key)
                est[r_a:r_b, c_a:c_b][mask] = e
                var[r_a:r_b, c_a:c_b][mask] = v
        return est, var


def current_tile_cache() -> TileCache | None:
    """The cache opened by :func:`tile_cache` in this context, if any."""
    return _CURRENT.get()


@contextlib.contextmanager
def tile_cache(folder: str | Path, *, tile_cells: int = TILE_CELLS,
               probe_cells: int = PROBE_CELLS) -> Iterator[TileCache]:
    """Use a tile cache in ``folder`` for every grid kriging inside the ``with`` block."""
    cache = TileCache(Path(folder), tile_cells, probe_cells)
    token = _CURRENT.set(cache)
    try:
        yield cache
    finally:
        _CURRENT.reset(token)


__all__ = ["CACHE_FORMAT", "TILE_CELLS", "TileCache", "TileStats", "current_tile_cache",
           "tile_cache"]
