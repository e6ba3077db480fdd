"""Re-grid only what changed: reuse the kriged cells whose neighbours did not change.

With a moving neighbourhood of the ``k`` nearest data (ordinary kriging as in Isaaks &
Srivastava 1989, ch. 12, with the neighbourhood search of their ch. 14), the estimate and
variance at a cell depend only on the variogram model, ``k``, the cell's position and its
``k`` nearest data (with their values). Neighbours are the nearest in the frame where the
variogram is isotropic (rotation and stretch of the minor axis by the anisotropy ratio;
plain distance without anisotropy); all distances below are in that frame. After boreholes
are added, removed or changed, a cell ``c``'s ``k`` nearest data can change only if a
changed datum ``p`` lies within the cell's ``k``-th neighbour distance ``d_k(c)`` (in the
data set that holds that datum: the new one for an added datum, the old one for a removed
datum, either for a changed value).

The grid is cut into *tiles*: squares of ``tile_cells`` × ``tile_cells`` cells on the
absolute lattice of the CRS (so they line up between runs even when the study area grows).
For a tile with centre ``m``, half-diagonal ``h`` and ``r_k = d_k(m)``, every point ``c`` of
the tile has ``d_k(c) <= r_k + h`` (``d_k`` is 1-Lipschitz) and ``|c - p| >= |m - p| - h``;
so if ``|m - p| > r_k + 2h`` no point of the tile has ``p`` among its neighbours.

Which tiles to test: ``g(c) = d_k(c) − |c − p|`` never increases along a ray leaving ``p``
(both terms change at the same rate at most), so the points that can see ``p`` form a region
that is star-shaped about ``p``: the segment from ``p`` to any of them lies in the region.
The tiles that segment crosses all pass the test and follow one another by a side or a
corner, so a flood fill from ``p``'s tile through the tiles that pass the test (their eight
neighbours, inside the grid) finds every tile the region meets. For ``p`` inside the grid
the segment to a grid cell stays in the grid (a rectangle), so the fill need not leave it;
for ``p`` outside the grid every tile of the grid is tested. The work is proportional to the
area a changed hole reaches, not to the grid. Inside a reached tile a cell ``c`` is kept
only when ``|c − p| <= r_k + |c − m|`` (its own ``d_k`` is at most that).

So the cache keeps, per variogram model and ``k``, the data and the kriged grid of the last
run. The next run compares the data (added, removed and changed points), finds the tiles a
changed point can reach, and kriges only their cells and the cells new to the study area —
in one call of the engine with all the data, exactly as a run without cache would krige
them. Every other cell keeps its cached estimate and variance: it has the same neighbours
with the same values, hence the same kriging system (equal to a full re-run to rounding,
e.g. from the centre of the engine's anisotropy frame moving with the data's extent; tested
to 1e-9). A different model or ``k`` never reuses anything.

Entries are folders written under a temporary name and renamed into place (a killed run
leaves no half-written entry). A *full* entry holds the whole grid (``estimate.npy``,
``variance.npy``, ``mask.npy``); when the grid is unchanged an entry is a *patch* of the
entry it was made from: only the cells kriged again (``index.npy`` and their values), so a
run after a few new holes writes that small part, not the whole grid. A patch is read by reading
its chain back to a full entry; after :data:`MAX_CHAIN` patches, or when a patch would hold
more than :data:`PATCH_FRACTION` of the cells, a full entry is written instead.
:meth:`TileCache.prune` removes the entries a successful run neither wrote nor builds on.
"""

from __future__ import annotations

import hashlib
import json
import math
import shutil
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

from aquitardmap.files import replace_atomically
from aquitardmap.geostat.variogram import VariogramModel, anisotropy_matrix
from aquitardmap.grid import Grid

#: Version of the entry format (change it when the kriging itself changes).
CACHE_FORMAT = "regrid-v3"
#: Default tile side (grid cells).
TILE_CELLS = 6
#: Longest chain of patch entries before a full entry is written.
MAX_CHAIN = 8
#: A patch holding more than this fraction of the grid's cells is written as a full entry.
PATCH_FRACTION = 0.25
#: Relative and absolute (m) slack of the reach test (ties, rounding, the engine's frame).
_REL_SLACK = 1e-9
_ABS_SLACK = 1e-6

_META = "meta.json"

#: ``krige(x, y, values, model, xt, yt, max_neighbours=k) -> (estimate, variance)``
KrigeFn = Callable[..., tuple[np.ndarray, np.ndarray]]

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


def _differ(new: np.ndarray, old: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Which items of ``new`` are not in ``old``, and which of ``old`` are not in ``new``
    (rows of :func:`_rows`)."""
    a, b = new.tolist(), old.tolist()
    in_a, in_b = set(a), set(b)
    return (np.fromiter((r not in in_b for r in a), dtype=bool, count=len(a)),
            np.fromiter((r not in in_a for r in b), dtype=bool, count=len(b)))


@dataclass(frozen=True)
class _Lattice:
    """The tiles of a grid: absolute tile indices (row ``i`` down, column ``j``) of tiles of
    ``side`` cells, the range of them that meets the grid, and their geometry relative to
    the grid's top-left corner (for precision)."""

    grid: Grid
    side: int

    @property
    def cell(self) -> float:
        return float(self.grid.transform.a)

    @property
    def row0(self) -> int:
        return int(round(-self.grid.transform.f / self.cell))

    @property
    def col0(self) -> int:
        return int(round(self.grid.transform.c / self.cell))

    @property
    def tile_range(self) -> tuple[int, int, int, int]:
        """(first i, last i, first j, last j) of the tiles that meet the grid."""
        g, s = self.grid, self.side
        return (self.row0 // s, (self.row0 + g.height - 1) // s,
                self.col0 // s, (self.col0 + g.width - 1) // s)

    def centres(self, i: np.ndarray, j: np.ndarray) -> np.ndarray:
        """Tile centres (n, 2), m east and north of the grid's top-left corner."""
        s, cell = self.side, self.cell
        return np.column_stack([((j * s + s / 2.0) - self.col0) * cell,
                                -((i * s + s / 2.0) - self.row0) * cell])

    def tile_of(self, xy: np.ndarray) -> tuple[int, int]:
        """Tile holding the point ``xy`` (project CRS)."""
        cell = self.cell
        return (int(math.floor(-xy[1] / cell / self.side)),
                int(math.floor(xy[0] / cell / self.side)))

    def inside(self, xy: np.ndarray) -> bool:
        """True when the point lies inside the grid's rectangle (not on its edge)."""
        t, g = self.grid.transform, self.grid
        return (t.c < xy[0] < t.c + g.width * self.cell
                and t.f - g.height * self.cell < xy[1] < t.f)

    def cells(self, i: np.ndarray, j: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Rows and columns of the grid cells of tiles (i, j) inside the grid, and the
        position in (i, j) of each cell's tile."""
        s = self.side
        off = np.arange(s)
        rr = (i[:, None] * s - self.row0 + off[None, :])[:, :, None]
        cc = (j[:, None] * s - self.col0 + off[None, :])[:, None, :]
        which = np.broadcast_to(np.arange(i.size)[:, None, None], (i.size, s, s)).ravel()
        rr, cc = np.broadcast_arrays(rr, cc)
        rr, cc = rr.ravel(), cc.ravel()
        ok = (rr >= 0) & (rr < self.grid.height) & (cc >= 0) & (cc < self.grid.width)
        return rr[ok], cc[ok], which[ok]


def reached_cells(lattice: _Lattice, k: int, model: VariogramModel, data_xy: np.ndarray,
                  points_xy: np.ndarray) -> np.ndarray:
    """Flat indices (row * width + column, sorted) of the grid cells that may have one of
    ``points_xy`` among their ``k`` nearest of ``data_xy`` (which holds those points).

    Tiles are found by the flood fill of the module docstring, for all points at once;
    inside a reached tile with centre ``m`` a cell ``c`` is kept when ``|c − p| <= r_k +
    |c − m|`` (its own ``d_k`` is at most that), which needs no further neighbour search.
    """
    points = np.asarray(points_xy, float).reshape(-1, 2)
    if len(points) == 0:
        return np.empty(0, dtype=np.int64)
    i0, i1, j0, j1 = lattice.tile_range
    ni, nj = i1 - i0 + 1, j1 - j0 + 1
    t = lattice.grid.transform
    ref = np.array([t.c, t.f])
    a = anisotropy_matrix(model.anisotropy_ratio, model.anisotropy_angle_deg)
    half = lattice.side * lattice.cell / 2.0
    h = max(float(np.hypot(*(a @ [half, half]))), float(np.hypot(*(a @ [half, -half]))))
    tree = cKDTree((np.asarray(data_xy, float) - ref) @ a.T)
    kk = int(min(k, len(data_xy)))
    r_k = np.full(ni * nj, np.nan)  # at tile centres (local index i * nj + j), as needed
    pa = (points - ref) @ a.T

    def reach(tile: np.ndarray, point: np.ndarray) -> np.ndarray:
        """The tile test for (local tile index, point index) pairs."""
        li, lj = np.divmod(tile, nj)
        centres = lattice.centres(li + i0, lj + j0) @ a.T
        need = np.flatnonzero(np.isnan(r_k[tile]))
        if need.size:
            d, _ = tree.query(centres[need], k=kk)
            r_k[tile[need]] = d[:, -1] if d.ndim == 2 else d
        dist = np.hypot(*(centres - pa[point]).T)
        return _within(dist, r_k[tile] + 2.0 * h)

    # points outside the grid: rays from them may enter it anywhere, so every tile
    outside = np.array([not lattice.inside(p) for p in points])
    every = np.arange(ni * nj)
    pairs_t = [np.tile(every, int(outside.sum()))]
    pairs_p = [np.repeat(np.flatnonzero(outside), every.size)]
    hits_t = [pairs_t[0][reach(pairs_t[0], pairs_p[0])]] if outside.any() else []
    hits_p = [pairs_p[0][reach(pairs_t[0], pairs_p[0])]] if outside.any() else []
    # points inside: flood from each point's tile through reached tiles (8 neighbours)
    inner = np.flatnonzero(~outside)
    start = np.array([lattice.tile_of(p) for p in points[inner]], dtype=np.int64
                     ).reshape(-1, 2)
    key_t = (start[:, 0] - i0) * nj + (start[:, 1] - j0)
    key_p = inner
    seen = np.sort(key_p * (ni * nj) + key_t)
    steps = np.array([(di, dj) for di in (-1, 0, 1) for dj in (-1, 0, 1) if di or dj])
    while key_t.size:
        got = reach(key_t, key_p)
        key_t, key_p = key_t[got], key_p[got]
        hits_t.append(key_t)
        hits_p.append(key_p)
        li, lj = np.divmod(key_t, nj)
        ni_ = (li[:, None] + steps[:, 0]).ravel()
        nj_ = (lj[:, None] + steps[:, 1]).ravel()
        pp = np.repeat(key_p, len(steps))
        ok = (ni_ >= 0) & (ni_ < ni) & (nj_ >= 0) & (nj_ < nj)
        key = _unique(pp[ok] * (ni * nj) + ni_[ok] * nj + nj_[ok])
        pos = np.searchsorted(seen, key)
        new = key[(pos >= seen.size) | (seen[np.minimum(pos, seen.size - 1)] != key)]
        seen = _unique(np.concatenate([seen, new]))
        key_p, key_t = np.divmod(new, ni * nj)
    tile = np.concatenate(hits_t)
    point = np.concatenate(hits_p)
    # the cells of the reached tiles, each tested against its tile's r_k
    li, lj = np.divmod(tile, nj)
    centres = lattice.centres(li + i0, lj + j0) @ a.T
    rr, cc, which = lattice.cells(li + i0, lj + j0)
    ca = np.column_stack([(cc + 0.5) * lattice.cell, -(rr + 0.5) * lattice.cell]) @ a.T
    keep = _within(np.hypot(*(ca - pa[point[which]]).T),
                   r_k[tile[which]] + np.hypot(*(ca - centres[which]).T))
    return _unique(rr[keep].astype(np.int64) * lattice.grid.width + cc[keep])


def _within(dist: np.ndarray, bound: np.ndarray) -> np.ndarray:
    """``dist <= bound`` with room for ties and rounding."""
    return dist <= bound * (1.0 + _REL_SLACK) + _ABS_SLACK


def _unique(a: np.ndarray) -> np.ndarray:
    """Sorted distinct values of an integer array."""
    a = np.sort(a)
    return a[np.r_[True, a[1:] != a[:-1]]] if a.size else a


@dataclass
class TileCache:
    """A folder of kriged grids, one chain of entries per variogram model and ``k`` (see the
    module docstring)."""

    folder: Path
    tile_cells: int = TILE_CELLS
    stats: TileStats = field(default_factory=TileStats)
    written: set[str] = field(default_factory=set)

    def __post_init__(self) -> None:
        self.folder = Path(self.folder)
        self.folder.mkdir(parents=True, exist_ok=True)

    # --------------------------------------------------------------------------- entries
    def _meta(self, name: str) -> dict | None:
        try:
            meta = json.loads((self.folder / name / _META).read_text())
        except (OSError, ValueError):
            return None
        return meta if isinstance(meta, dict) and meta.get("format") == CACHE_FORMAT else None

    def _chain(self, name: str) -> list[tuple[str, dict]] | None:
        """The entry and the entries it builds on, down to a full one (None if broken)."""
        out: list[tuple[str, dict]] = []
        while len(out) <= MAX_CHAIN + 1:
            meta = self._meta(name)
            if meta is None:
                return None
            out.append((name, meta))
            if meta["kind"] == "full":
                return out
            name = meta["base"]
        return None

    def _grids(self, chain: list[tuple[str, dict]]
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
        """Estimate, variance and mask of an entry (its chain applied in order)."""
        try:
            full = self.folder / chain[-1][0]
            est = np.load(full / "estimate.npy")
            var = np.load(full / "variance.npy")
            mask = np.load(full / "mask.npy")
            for name, _ in reversed(chain[:-1]):
                idx = np.load(self.folder / name / "index.npy")
                est.flat[idx] = np.load(self.folder / name / "estimate.npy")
                var.flat[idx] = np.load(self.folder / name / "variance.npy")
        except (OSError, ValueError, IndexError):
            return None
        return est, var, mask

    def _best(self, model_key: str, rows: np.ndarray):
        """The entry of this model whose data differ least from ``rows``: (name, chain,
        its x, y, z, which of ``rows`` it lacks, which of its rows ``rows`` lacks)."""
        best, best_diff = None, None
        chains = {}
        for path in sorted(self.folder.glob(f"{model_key}-*")):
            if path.name in self.written or not path.is_dir():
                continue  # another grid of this run, same model: not ours
            chain = self._chain(path.name)
            if chain is not None:
                chains[path.name] = chain
        # the last entries of chains (the entries they build on hold older data)
        bases = {meta.get("base") for chain in chains.values() for _, meta in chain[:1]}
        for name, chain in chains.items():
            if name in bases:
                continue
            path = self.folder / name
            try:
                x, y, z = (np.load(path / f"{a}.npy") for a in ("x", "y", "z"))
                old = _rows(x, y, z)
            except (OSError, ValueError):
                continue
            added, removed = _differ(rows, old)
            diff = int(added.sum()) + int(removed.sum())
            if best_diff is None or diff < best_diff:
                best_diff, best = diff, (path.name, chain, x, y, z, added, removed)
        return best

    def _save(self, name: str, meta: dict, arrays: dict[str, np.ndarray]) -> None:
        """Write an entry folder under a temporary name and rename it into place."""
        self.written.add(name)
        target = self.folder / name
        if target.is_dir() and self._chain(name) is not None:
            return  # the same data on the same grid: the same numbers are there already
        def write(tmp: Path) -> None:
            tmp.mkdir()
            for key, arr in arrays.items():
                np.save(tmp / f"{key}.npy", np.ascontiguousarray(arr))
            (tmp / _META).write_text(json.dumps({"format": CACHE_FORMAT, **meta}))

        replace_atomically(target, write)

    def prune(self) -> int:
        """Delete the entries this cache neither wrote since it was opened nor builds on
        (and leftovers of killed runs); returns how many."""
        keep = set()
        for name in self.written:
            for base, _ in self._chain(name) or [(name, {})]:
                keep.add(base)
        n = 0
        for p in self.folder.iterdir():
            if p.name not in keep:
                if p.is_dir():
                    shutil.rmtree(p, ignore_errors=True)
                else:
                    p.unlink(missing_ok=True)
                n += 1
        return n

    # --------------------------------------------------------------------------- kriging
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
        if x.size == 0:
            raise ValueError("no data to krige")
        k = int(min(max_neighbours, x.size))
        t = grid.transform
        cell = float(t.a)
        origin = [float(t.c), float(t.f)]
        model_key = hashlib.sha256(json.dumps(
            [CACHE_FORMAT, model.as_dict(), k, cell, self.tile_cells], sort_keys=True,
            default=str).encode()).hexdigest()[:16]
        rows = _rows(x, y, z)
        mask = grid.mask
        old = self._best(model_key, rows)
        grids = self._grids(old[1]) if old is not None else None
        base = None  # the entry this run's entry can be a patch of
        if old is None or grids is None:
            est = np.full(mask.shape, np.nan)
            var = np.full(mask.shape, np.nan)
            rr, cc = np.nonzero(mask)
        else:
            name, chain, ox, oy, oz, added, removed = old
            old_est, old_var, old_mask = grids
            lattice = _Lattice(grid, self.tile_cells)
            reached = _unique(np.concatenate([
                reached_cells(lattice, k, model, np.column_stack([x, y]),
                              np.column_stack([x[added], y[added]])),
                reached_cells(lattice, k, model, np.column_stack([ox, oy]),
                              np.column_stack([ox[removed], oy[removed]]))]))
            meta = chain[0][1]
            if (meta["origin"] == origin and tuple(meta["shape"]) == mask.shape
                    and np.array_equal(old_mask, mask)):
                # the same grid: start from the cached one, krige the reached cells
                est, var = old_est, old_var
                reached = reached[mask.flat[reached]]
                rr, cc = np.divmod(reached, mask.shape[1])
                if len(chain) <= MAX_CHAIN:
                    base = name
            else:
                est, var, (rr, cc) = self._shifted(grid, reached, old_est, old_var,
                                                   old_mask, meta)
            n_keep = int(mask.sum()) - rr.size
            self.stats.cells_reused += n_keep
            self.stats.surfaces_reused += int(n_keep > 0)
        if rr.size:
            e, v = krige(x, y, z, model, t.c + cell * (cc + 0.5), t.f - cell * (rr + 0.5),
                         max_neighbours=k)
            est[rr, cc] = np.asarray(e, dtype=float)
            var[rr, cc] = np.asarray(v, dtype=float)
            self.stats.cells_computed += int(rr.size)
        data_key = hashlib.sha256(rows.tobytes() + np.packbits(mask).tobytes()
                                  + np.asarray(origin).tobytes()).hexdigest()[:24]
        meta = {"origin": origin, "shape": list(mask.shape)}
        arrays = {"x": x, "y": y, "z": z}
        if base is not None and rr.size <= PATCH_FRACTION * mask.size:
            index = (rr.astype(np.int64) * mask.shape[1] + cc).astype(np.int64)
            arrays.update(index=index, estimate=est.flat[index], variance=var.flat[index])
            meta.update(kind="patch", base=base)
        else:
            arrays.update(estimate=est, variance=var, mask=mask)
            meta.update(kind="full")
        self._save(f"{model_key}-{data_key}", meta, arrays)
        return est, var

    @staticmethod
    def _shifted(grid: Grid, reached: np.ndarray, old_est: np.ndarray, old_var: np.ndarray,
                 old_mask: np.ndarray, meta: dict):
        """A grid whose extent or mask changed: the cached cells it shares with the old
        grid, other than the ``reached`` ones (flat indices), are kept; returns (estimate,
        variance, (rows, columns) of the cells to krige)."""
        mask = grid.mask
        changed = np.zeros(mask.shape, dtype=bool)
        changed.flat[reached] = True
        t = grid.transform
        cell = float(t.a)
        est = np.full(mask.shape, np.nan)
        var = np.full(mask.shape, np.nan)
        todo = mask.copy()
        dr = (t.f - float(meta["origin"][1])) / cell  # new row = old row + dr
        dc = (float(meta["origin"][0]) - t.c) / cell  # new col = old col + dc
        if abs(dr - round(dr)) < 1e-6 and abs(dc - round(dc)) < 1e-6:
            dr, dc = int(round(dr)), int(round(dc))
            r1, r2 = max(dr, 0), min(dr + old_mask.shape[0], grid.height)
            c1, c2 = max(dc, 0), min(dc + old_mask.shape[1], grid.width)
            if r1 < r2 and c1 < c2:
                window = (slice(r1, r2), slice(c1, c2))
                sl_old = (slice(r1 - dr, r2 - dr), slice(c1 - dc, c2 - dc))
                keep = mask[window] & old_mask[sl_old] & ~changed[window]
                est[window][keep] = old_est[sl_old][keep]
                var[window][keep] = old_var[sl_old][keep]
                todo[window] &= ~keep
        return est, var, np.nonzero(todo)


__all__ = ["CACHE_FORMAT", "TILE_CELLS", "TileCache", "TileStats", "reached_cells"]
