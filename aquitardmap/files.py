"""Files on disk: the one way a run writes a file whole or not at all, and file hashes.

Every writer of a finished file (grids aside, which the run's staged folder protects) goes
through :func:`replace_atomically`: the content is written under a hidden temporary name
beside the target and renamed into place, so a reader sees the old file or the new one,
never half of one, and a failed write leaves no litter.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import uuid
from collections.abc import Callable
from pathlib import Path


def temporary_sibling(target: str | Path) -> Path:
    """A hidden, unique name in ``target``'s folder that keeps its suffix (drivers such as
    GDAL's choose the format from it): ``.<stem>.<pid>.<random>.tmp<suffix>``."""
    target = Path(target)
    return target.parent / f".{target.stem}.{os.getpid()}.{uuid.uuid4().hex}.tmp{target.suffix}"


def _remove(path: Path) -> None:
    if path.is_dir() and not path.is_symlink():
        shutil.rmtree(path, ignore_errors=True)
    else:
        path.unlink(missing_ok=True)


def replace_atomically(target: str | Path, write: Callable[[Path], object], *,
                       fsync: bool = False) -> Path:
    """Make ``target`` by calling ``write(tmp)`` on a temporary sibling, then renaming it.

    Args:
        target: the file (or folder) to make; its parent folder must exist.
        write: writes the whole content at the path it is given (a file, or a folder it
            creates).
        fsync: flush a written file to disk before the rename (for a store that must
            survive a power cut).

    Returns:
        ``target`` as a :class:`~pathlib.Path`.

    On any error (or interruption) the temporary file is removed and ``target`` is left as
    it was. A folder replaces a previous folder of the same name.
    """
    target = Path(target)
    tmp = temporary_sibling(target)
    try:
        write(tmp)
        if fsync and tmp.is_file():
            with open(tmp, "rb") as f:
                os.fsync(f.fileno())
        if tmp.is_dir() and target.is_dir():
            shutil.rmtree(target, ignore_errors=True)
        os.replace(tmp, target)
    except BaseException:
        _remove(tmp)
        raise
    return target


def write_text_atomically(target: str | Path, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``target`` through :func:`replace_atomically`."""
    def write(tmp: Path) -> None:
        with open(tmp, "x", encoding="utf-8") as f:  # "x": a fresh file; the umask applies
            f.write(text)
    return replace_atomically(target, write)


def remove_leftovers(target: str | Path) -> int:
    """Remove the temporary siblings of ``target`` that killed writers left behind (names of
    :func:`temporary_sibling`); returns how many."""
    target = Path(target)
    n = 0
    for left in target.parent.glob(f".{target.stem}.*.tmp{target.suffix}"):
        _remove(left)
        n += 1
    return n


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes, hex."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


__all__ = ["file_sha256", "remove_leftovers", "replace_atomically", "temporary_sibling",
           "write_text_atomically"]
