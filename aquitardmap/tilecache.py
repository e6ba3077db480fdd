"""Re-grid only what changed: reuse the kriged cells whose neighbours did not change.

With a moving neighbourhood of the ``k`` nearest data (ordinary kriging as in Isaaks &
Srivastava 1989, ch. 12, with the neighbourhood search of their ch. 14), the estimate and
variance at a cell depend only on the variogram model, ``k``, the cell's position and its
``k`` nearest data (with their values). After boreholes are added, removed or changed, a
cell's ``k`` nearest data can change only if a changed datum lies within the cell's
``k``-th neighbour distance ``d_k`` (in the data set that holds that datum: the new one for
an added datum, the old one for a removed datum, either for a changed value).

The grid is cut into *tiles*: squares of ``tile_cells`` × ``tile_cells`` cells on the
absolute lattice of the CRS (so they line up between runs even when the study area grows).
``d_k`` of every cell of a tile is bounded by the triangle inequality: with ``r_k`` the
``k``-th neighbour distance at the tile centre and ``h`` its half-diagonal,
``d_k(c) <= r_k + h`` for every cell ``c`` of the tile, and ``|c - centre| <= h``; so if no
changed datum lies within ``r_k + 2h`` of the centre, no cell of the tile changed. (With
geometric anisotropy the neighbours are the nearest after a rotation and a stretch of one
axis by the ratio ``a``; distances then change by a factor between ``min(1, a)`` and
``max(1, a)``, and the bound is widened by those factors, whatever the rotation convention
of the engine.)

So the cache keeps, per variogram model and ``k``, the data and the kriged grid of the last
run. The next run compares the data (added, removed and changed points), marks the tiles
that a changed point can reach, and kriges only their cells and the cells new to the study
area — in one call of the engine with all the data, exactly as a run without cache would
krige them. Every other cell keeps its cached estimate and variance: it has the same
neighbours with the same values, hence the same kriging system (equal to a full re-run to
rounding, e.g. from the centre of the engine's anisotropy frame moving with the data's
extent; tested to 1e-9). A different model or ``k`` never reuses anything.

Entries are folders of ``.npy`` arrays written under a temporary name and renamed into
place (a killed run leaves no half-written entry); :meth:`TileCache.prune` removes entries
a successful run did not write.
"""

from __future__ import annotations

import contextlib
import contextvars
import hashlib
import json
import os
import shutil
import tempfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

from aquitardmap.grid import Grid
from aquitardmap.variogram import VariogramModel

#: Version of the entry format (change it when the kriging itself changes).
CACHE_FORMAT = "regrid-v2"
#: Default tile side (grid cells).
TILE_CELLS = 4
#: Every COARSE-th tile (in each direction) gets an exact k-th neighbour distance first.
COARSE = 4

_ENTRY_ARRAYS = ("x", "y", "z", "estimate", "variance", "mask", "origin")

#: ``krige(x, y, values, model, xt, yt, max_neighbours=k) -> (estimate, variance)``
KrigeFn = Callable[..., tuple[np.ndarray, np.ndarray]]

_CURRENT: contextvars.ContextVar[TileCache | None] = contextvars.ContextVar(
    "aquitardmap_tile_cache", default=None)


@dataclass
class TileStats:
    """Cells reused from the cache and cells kriged, since the cache was opened."""

    cells_reused: int = 0
    cells_computed: int = 0
    surfaces_reused: int = 0

    def as_dict(self) -> dict[str, int]:
        return {"cells_reused": self.cells_reused, "cells_computed": self.cells_computed,
                "grids_with_reuse": self.surfaces_reused}


def _rows(x: np.ndarray, y: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Each datum (x, y, value) as one comparable item (raw bytes of three float64)."""
    a = np.ascontiguousarray(np.column_stack([x, y, z]), dtype=np.float64)
    return a.view(np.dtype((np.void, 24))).ravel()


@dataclass
class TileCache:
    """A folder of kriged grids, one per variogram model and ``k`` (see the module
    docstring)."""

    folder: Path
    tile_cells: int = TILE_CELLS
    stats: TileStats = field(default_factory=TileStats)
    written: set[str] = field(default_factory=set)

    def __post_init__(self) -> None:
        self.folder = Path(self.folder)
        self.folder.mkdir(parents=True, exist_ok=True)

    # ---------------------------------------------------------------------------------------
    def _entries(self, model_key: str) -> list[Path]:
        return sorted(p for p in self.folder.glob(f"{model_key}-*") if p.is_dir())

    def _best(self, model_key: str, rows: np.ndarray) -> dict | None:
        """The entry of this model whose data differ least from ``rows`` (its grids are
        memory-mapped, read only where reused)."""
        best, best_diff = None, None
        for path in self._entries(model_key):
            if path.name in self.written:
                continue  # another grid of this run, same model: not ours
            try:
                entry = {name: np.load(path / f"{name}.npy", mmap_mode="r")
                         for name in _ENTRY_ARRAYS}
                old = _rows(entry["x"], entry["y"], entry["z"])
            except (OSError, ValueError):
                continue
            diff = old.size + rows.size - 2 * int(np.isin(old, rows).sum())
            if best_diff is None or diff < best_diff:
                best_diff, best = diff, entry
        return best

    def _save(self, model_key: str, **arrays: np.ndarray) -> None:
        """Write an entry folder under a temporary name and rename it into place."""
        data_key = hashlib.sha256(_rows(arrays["x"], arrays["y"], arrays["z"]).tobytes()
                                  + np.packbits(arrays["mask"]).tobytes()
                                  + np.asarray(arrays["origin"]).tobytes()).hexdigest()[:24]
        name = f"{model_key}-{data_key}"
        self.written.add(name)
        target = self.folder / name
        if target.is_dir():
            return  # the same data on the same grid: the same numbers are there already
        tmp = Path(tempfile.mkdtemp(prefix=".entry-", dir=self.folder))
        try:
            for key, arr in arrays.items():
                np.save(tmp / f"{key}.npy", np.ascontiguousarray(arr))
            os.replace(tmp, target)
        except BaseException:
            shutil.rmtree(tmp, ignore_errors=True)
            raise

    def prune(self) -> int:
        """Delete the entries this cache did not write since it was opened (and leftovers
        of killed runs); returns how many."""
        n = 0
        for p in self.folder.iterdir():
            if p.name not in self.written:
                if p.is_dir():
                    shutil.rmtree(p, ignore_errors=True)
                else:
                    p.unlink(missing_ok=True)
                n += 1
        return n

    # ---------------------------------------------------------------------------------------
    def _changed_tiles(self, grid: Grid, k: int, ratio: float, new_xy: np.ndarray,
                       old_xy: np.ndarray, added: np.ndarray, removed: np.ndarray
                       ) -> np.ndarray:
        """Boolean (height, width): cells of tiles that a changed datum can reach."""
        t = grid.transform
        cell = float(t.a)
        side = self.tile_cells
        col0 = int(round(t.c / cell))
        row0 = int(round(-t.f / cell))
        pr0, pc0 = row0 // side, col0 // side
        prs = np.arange(pr0, (row0 + grid.height - 1) // side + 1)
        pcs = np.arange(pc0, (col0 + grid.width - 1) // side + 1)
        ra = np.clip(prs * side - row0, 0, grid.height)
        rb = np.clip((prs + 1) * side - row0, 0, grid.height)
        ca = np.clip(pcs * side - col0, 0, grid.width)
        cb = np.clip((pcs + 1) * side - col0, 0, grid.width)
        cy = t.f - cell * (ra + rb) / 2.0
        cx = t.c + cell * (ca + cb) / 2.0
        hy, hx = cell * (rb - ra) / 2.0, cell * (cb - ca) / 2.0
        centres = np.column_stack([np.tile(cx, cy.size), np.repeat(cy, cx.size)])
        h = np.hypot(np.tile(hx, hy.size), np.repeat(hy, hx.size))
        s_lo, s_hi = min(1.0, ratio), max(1.0, ratio)
        hit = np.zeros(len(centres), dtype=bool)
        # r_k at every COARSE-th tile centre bounds it everywhere (r_k is 1-Lipschitz), which
        # picks the few candidate tiles whose exact r_k is then needed
        ny, nx = cy.size, cx.size
        iy, ix = np.divmod(np.arange(ny * nx), nx)
        qy = np.minimum((iy // COARSE) * COARSE + COARSE // 2, ny - 1)
        qx = np.minimum((ix // COARSE) * COARSE + COARSE // 2, nx - 1)
        q = qy * nx + qx
        coarse = (np.unique(qy[::nx])[:, None] * nx + np.unique(qx[:nx])[None, :]).ravel()
        for pts, data_xy in ((added, new_xy), (removed, old_xy)):
            if pts.size == 0:
                continue
            d_near, _ = cKDTree(pts).query(centres, k=1)
            kk = min(k, len(data_xy))
            tree = cKDTree(data_xy)

            def kth(idx: np.ndarray, tree: cKDTree = tree, kk: int = kk) -> np.ndarray:
                d, _ = tree.query(centres[idx], k=kk)
                return d[:, -1] if d.ndim == 2 else d

            r_q = np.empty(len(centres))
            r_q[coarse] = kth(coarse)
            upper = r_q[q] + np.hypot(*(centres - centres[q]).T)
            cand = np.nonzero(d_near <= (s_hi * (upper + h) / s_lo + h) * (1.0 + 1e-9)
                              + 1e-6)[0]
            if cand.size:
                reach = s_hi * (kth(cand) + h[cand]) / s_lo + h[cand]
                hit[cand] |= d_near[cand] <= reach * (1.0 + 1e-9) + 1e-6  # ties, rounding
        hit = hit.reshape(cy.size, cx.size)
        full = np.repeat(np.repeat(hit, side, axis=0), side, axis=1)
        r_off, c_off = row0 - pr0 * side, col0 - pc0 * side
        return full[r_off:r_off + grid.height, c_off:c_off + grid.width]

    def krige_grid(self, x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                   model: VariogramModel, grid: Grid, max_neighbours: int,
                   krige: KrigeFn) -> tuple[np.ndarray, np.ndarray]:
        """Kriging estimate and variance on the cells of ``grid`` inside its mask, reusing
        every cached cell whose neighbours did not change.

        ``krige`` kriges targets from data with the nearest ``max_neighbours``; it is called
        at most once, with all the data and the cells to krige.

        Returns (height, width) arrays, NaN outside the mask.
        """
        x, y, z = (np.asarray(a, dtype=float).ravel() for a in (x_m, y_m, values))
        n = x.size
        if n == 0:
            raise ValueError("no data to krige")
        k = int(min(max_neighbours, n))
        t = grid.transform
        cell = float(t.a)
        model_key = hashlib.sha256(json.dumps(
            [CACHE_FORMAT, model.as_dict(), k, cell, self.tile_cells], sort_keys=True,
            default=str).encode()).hexdigest()[:16]
        rows = _rows(x, y, z)
        est = np.full(grid.mask.shape, np.nan)
        var = np.full(grid.mask.shape, np.nan)
        todo = grid.mask.copy()
        old = self._best(model_key, rows)
        if old is not None:
            dr = (t.f - float(old["origin"][1])) / cell  # new row = old row + dr
            dc = (float(old["origin"][0]) - t.c) / cell  # new col = old col + dc
            if abs(dr - round(dr)) < 1e-6 and abs(dc - round(dc)) < 1e-6:
                dr, dc = int(round(dr)), int(round(dc))
                old_mask = old["mask"]
                # overlap of the old grid, shifted by (dr, dc), with the new one
                r1, r2 = max(dr, 0), min(dr + old_mask.shape[0], grid.height)
                c1, c2 = max(dc, 0), min(dc + old_mask.shape[1], grid.width)
                window = (slice(r1, r2), slice(c1, c2))
                sl_old = (slice(r1 - dr, r2 - dr), slice(c1 - dc, c2 - dc))
                old_rows = _rows(old["x"], old["y"], old["z"])
                added = ~np.isin(rows, old_rows)
                removed = ~np.isin(old_rows, rows)
                changed = self._changed_tiles(
                    grid, k, float(model.anisotropy_ratio), np.column_stack([x, y]),
                    np.column_stack([old["x"], old["y"]]),
                    np.column_stack([x[added], y[added]]),
                    np.column_stack([old["x"][removed], old["y"][removed]]))
                n_keep = 0
                if r1 < r2 and c1 < c2:
                    keep = grid.mask[window] & old_mask[sl_old] & ~changed[window]
                    est[window][keep] = old["estimate"][sl_old][keep]
                    var[window][keep] = old["variance"][sl_old][keep]
                    todo[window] &= ~keep
                    n_keep = int(keep.sum())
                self.stats.cells_reused += n_keep
                self.stats.surfaces_reused += int(n_keep > 0)
        if todo.any():
            rr, cc = np.nonzero(todo)
            e, v = krige(x, y, z, model, t.c + cell * (cc + 0.5), t.f - cell * (rr + 0.5),
                         max_neighbours=k)
            est[todo] = np.asarray(e, dtype=float)
            var[todo] = np.asarray(v, dtype=float)
            self.stats.cells_computed += int(todo.sum())
        self._save(model_key, x=x, y=y, z=z, estimate=est, variance=var, mask=grid.mask,
                   origin=np.array([t.c, t.f]))
        return est, var


def current_tile_cache() -> TileCache | None:
    """The cache opened by :func:`tile_cache` in this context, if any."""
    return _CURRENT.get()


@contextlib.contextmanager
def tile_cache(folder: str | Path, *, tile_cells: int = TILE_CELLS) -> Iterator[TileCache]:
    """Use a cache in ``folder`` for every grid kriging inside the ``with`` block."""
    cache = TileCache(Path(folder), tile_cells)
    token = _CURRENT.set(cache)
    try:
        yield cache
    finally:
        _CURRENT.reset(token)


__all__ = ["CACHE_FORMAT", "TILE_CELLS", "TileCache", "TileStats", "current_tile_cache",
           "tile_cache"]
