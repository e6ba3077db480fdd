"""What a run lends its kriging: where tiles run and what it remembers from the last run.

One small value, passed explicitly from the run down to every function that kriges a grid
or fits a variogram, so a kriging call behaves the same wherever it is made: with the
default context it runs in this process, kriges every tile and uses every fresh fit.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from aquitardmap.geostat.cache.tiles import TileCache
from aquitardmap.geostat.cache.variograms import VariogramBook
from aquitardmap.geostat.compute import Runner, SerialRunner


@dataclass(frozen=True)
class KrigingContext:
    """How a run kriges.

    Attributes:
        runner: where the kriging tiles run (:mod:`aquitardmap.geostat.compute`); in this
            process by default.
        tiles: the kriged-tile cache (:mod:`aquitardmap.geostat.cache.tiles`); ``None``
            kriges every tile.
        variograms: the book of kept variograms (:mod:`aquitardmap.geostat.cache.variograms`);
            ``None`` uses every fresh fit and records nothing.
    """

    runner: Runner = field(default_factory=SerialRunner)
    tiles: TileCache | None = None
    variograms: VariogramBook | None = None


#: The context of a call that is given none: this process, no cache, fresh fits.
DEFAULT_CONTEXT = KrigingContext()

__all__ = ["DEFAULT_CONTEXT", "KrigingContext"]
