"""Output folders that are replaced whole or not at all.

A run writes every output into a hidden *partial* folder next to the output folder; only when
all of it is written (and flushed to disk) does the partial folder take the output folder's
place, in one atomic swap where the system offers it (Linux ``renameat2`` with
``RENAME_EXCHANGE``). A run that fails, or is killed at any moment (even by SIGKILL, which no
program can catch), therefore leaves the previous outputs whole and readable, and a reader
never sees half a result. What a killed run leaves behind (its partial folder) is only ever
a hidden ``.<name>.partial-<pid>-...`` folder, never read as a result, and the next run into
the same folder removes it once its process is gone.
"""

from __future__ import annotations

import ctypes
import errno
import os
import re
import secrets
import shutil
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from aquitardmap.errors import InputError, Problem
from aquitardmap.outputs import names as outputs

#: Hidden folders next to an output folder ``out``: ``.out.partial-<pid>-<random>`` is a run
#: being written (or one that was killed while writing), ``.out.old-<pid>-<ns>`` a previous
#: run being moved aside where folders cannot be swapped atomically.
PARTIAL_TAG = "partial"
OLD_TAG = "old"

_RENAME_EXCHANGE = 2  # linux/fs.h
_AT_FDCWD = -100
_libc = None


def _exchange(a: Path, b: Path) -> bool:
    """Swap the folders ``a`` and ``b`` in one atomic step (Linux ``renameat2`` with
    ``RENAME_EXCHANGE``). Returns False where the system or file system cannot."""
    global _libc
    if sys.platform != "linux":
        return False
    if _libc is None:
        try:
            _libc = ctypes.CDLL(None, use_errno=True)
        except OSError:
            _libc = False
    fn = getattr(_libc, "renameat2", None) if _libc else None
    if fn is None:
        return False
    rc = fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE)
    if rc == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.EOPNOTSUPP, errno.ENOTSUP, errno.EPERM):
        return False
    raise OSError(err, os.strerror(err), str(a), None, str(b))


def _pid_alive(pid: int) -> bool:
    """Whether process ``pid`` exists (True when that cannot be told)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True
    return True


def _side_folders(out: Path, tag: str) -> list[tuple[Path, int | None]]:
    """Hidden ``.<name>.<tag>-<pid>-...`` folders next to ``out``, with their owner's pid
    (None for a name this version did not write)."""
    prefix = f".{out.name}.{tag}-"
    found = []
    try:
        entries = list(out.parent.iterdir())
    except OSError:
        return []
    for p in entries:
        if not p.name.startswith(prefix) or p.is_symlink() or not p.is_dir():
            continue
        m = re.match(r"(\d+)-", p.name[len(prefix):])
        found.append((p, int(m.group(1)) if m else None))
    return found


def tidy_output_dir(out_dir: str | Path, marker: str = outputs.SUMMARY) -> list[str]:
    """Recover from runs killed while writing to ``out_dir``; returns what was done.

    * Where ``out_dir`` is missing but a previous run was moved aside by a run that was
      killed before moving its own result in (possible only where folders cannot be swapped
      atomically), that previous run is moved back.
    * Partial and moved-aside folders of runs whose process no longer exists are removed.
      Folders of live runs, and folders whose owner cannot be told, are left alone: a
      partial folder is never read as a run (only ``out_dir`` itself is one).
    """
    out = Path(out_dir).resolve()
    done = []
    stale_old = [(p, pid) for p, pid in _side_folders(out, OLD_TAG)
                 if pid is not None and not _pid_alive(pid)]
    if not out.exists():
        runs = [p for p, _ in stale_old if (p / marker).is_file()]
        if runs:
            newest = max(runs, key=lambda p: p.stat().st_mtime_ns)
            os.rename(newest, out)
            done.append(f"restored the previous run from {newest.name}")
    for p, pid in [*stale_old, *_side_folders(out, PARTIAL_TAG)]:
        if pid is not None and not _pid_alive(pid) and p.exists():
            shutil.rmtree(p, ignore_errors=True)
            done.append(f"removed {p.name}, left by a run that was stopped")
    return done


def _new_partial(out: Path) -> Path:
    """A new, empty partial folder next to ``out``, readable as the umask allows (unlike
    :func:`tempfile.mkdtemp`, whose 0700 folder would become an output nobody else can
    read)."""
    for _ in range(100):
        p = out.parent / f".{out.name}.{PARTIAL_TAG}-{os.getpid()}-{secrets.token_hex(4)}"
        try:
            os.mkdir(p)
        except FileExistsError:
            continue
        return p
    raise FileExistsError(f"cannot create a partial folder next to {out}")


def _sync_tree(folder: Path) -> None:
    """Flush every file of ``folder`` and the folder itself to disk, so that after a power
    cut the renamed folder holds the written bytes, not empty files."""
    for f in folder.rglob("*"):
        if f.is_file():
            fd = os.open(f, os.O_RDONLY)
            try:
                os.fsync(fd)
            finally:
                os.close(fd)
    _sync_dir(folder)


def _sync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return  # folders cannot be opened for syncing on every system
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextmanager
def staged_output_dir(out_dir: str | Path, *, marker: str = outputs.SUMMARY,
                      what: str = "aquitardmap run") -> Iterator[Path]:
    """Yield a fresh partial folder next to ``out_dir``; on success it takes the place of
    ``out_dir``, on any failure it is removed and ``out_dir`` is untouched.

    The replacement is one atomic swap of the two folders where the system offers it
    (Linux ``renameat2``): a reader, or a run killed at any moment, sees either the whole
    previous run or the whole new one. Elsewhere it takes two renames, and a run killed
    between them leaves the previous run moved aside, which the next run moves back
    (:func:`tidy_output_dir`). Partial folders of killed runs are removed by the next run.

    An existing ``out_dir`` is replaced only if it is empty or holds a previous result (its
    ``marker`` file, ``summary.json`` for a run); anything else is refused, so a mistyped
    path cannot wipe a folder.

    Raises:
        InputError: ``out_dir`` exists and holds something else (nothing is written).
    """
    out = Path(out_dir).resolve()
    tidy_output_dir(out, marker)
    if out.exists() and (not out.is_dir() or (any(out.iterdir())
                                             and not (out / marker).exists())):
        raise InputError([Problem(str(out), 0, 0, "output folder exists and does not hold a "
                                  f"previous {what}; choose another --out")])
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = _new_partial(out)
    try:
        yield tmp
        _sync_tree(tmp)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if out.exists() and _exchange(tmp, out):
        shutil.rmtree(tmp, ignore_errors=True)  # tmp now holds the previous run
    elif out.exists():
        old = out.parent / f".{out.name}.{OLD_TAG}-{os.getpid()}-{time.time_ns()}"
        os.replace(out, old)
        os.replace(tmp, out)
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, out)
    _sync_dir(out.parent)


__all__ = ["staged_output_dir", "tidy_output_dir"]
