"""Where a project keeps what one run leaves for the next: the kriged tiles
(:mod:`aquitardmap.geostat.cache.tiles`) and, beside them, the kept variograms
(:mod:`aquitardmap.geostat.cache.variograms`)."""

from __future__ import annotations

from pathlib import Path

from aquitardmap.config.project import Project
from aquitardmap.geostat.cache import tiles as tilecache
from aquitardmap.geostat.cache import variograms as variogramreuse
from aquitardmap.inputs.store import has_store

#: Folder of the kriged-tile cache inside a project that has a store.
TILE_CACHE_DIR = ".aquitardmap-cache/tiles"


def tile_folder(project: Project, setting: str | Path | bool | None) -> Path | None:
    """The tile cache folder of this run: ``setting`` ``None`` (default) is
    ``PROJECT/.aquitardmap-cache/tiles`` when the project has a store, ``False`` none, a
    path that folder. The kept variograms live beside it."""
    if setting is False or (setting is None and not has_store(project)):
        return None
    return project.root / TILE_CACHE_DIR if setting in (None, True) else Path(setting)


def open_tile_cache(folder: Path | None) -> tilecache.TileCache | None:
    """The tile cache in ``folder`` for the grid kriging of a run (none without)."""
    return tilecache.TileCache(folder) if folder is not None else None


def variogram_book(project: Project, folder: Path | None, refit: bool
                    ) -> variogramreuse.VariogramBook:
    """The book of variograms kept beside the tile folder (without a cache it keeps
    nothing: every surface is fitted afresh, and the decisions are still recorded)."""
    k = project.kriging
    return variogramreuse.open_variogram_book(
        folder.parent / variogramreuse.KEPT_FILE if folder is not None else None,
        within=k.reuse_variogram_within, angle_deg=k.reuse_variogram_angle_deg, refit=refit)


def kept_variograms(project: Project) -> variogramreuse.VariogramBook:
    """The variograms ``project``'s last run kept, under the same reuse rule as ``run``
    (:mod:`aquitardmap.geostat.cache.variograms`), for stages outside ``run`` (e.g.
    ``suggest``) that must krige with the run's models: pass it in a
    :class:`~aquitardmap.geostat.context.KrigingContext`. Nothing is written. Without a
    project cache every surface is fitted afresh."""
    return variogram_book(project, tile_folder(project, None), False)
