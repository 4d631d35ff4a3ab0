"""The output folder of a run: checked first, locked, written aside, swapped in whole.

A run owns its ``--out`` folder. Before any work :func:`check_out_folder`
refuses a folder that cannot serve (an empty name, a file, a folder that
holds something other than an earlier run, no write permission, too little
room). :func:`run_folder` then

1. takes an exclusive lock on ``.NAME.lock`` beside the folder
   (``fcntl.flock``), so a second run into the same folder is refused
   rather than mixed in;
2. removes what a killed run left beside the folder (hidden
   ``.NAME.*.tmp`` folders);
3. hands out a fresh hidden folder ``.NAME.new-XXXX.tmp`` beside it, in
   which the whole run is written;
4. on success swaps it in place of the folder in one step (Linux
   ``renameat2(RENAME_EXCHANGE)``; elsewhere two renames, which the next
   run repairs if it is killed between them) and deletes the previous run;
   on any failure deletes it, leaving the previous run whole.

So the folder always holds exactly one complete run: a second run with fewer
alerts leaves no page of the first one behind.
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import fcntl
import os
import shutil
import tempfile
from collections.abc import Iterator, Sequence
from pathlib import Path

from harbourwatch.errors import InputError, OutputError
from harbourwatch.io.atomic import output_error

__all__ = ["MIN_FREE_BYTES", "check_out_folder", "run_folder", "leftovers"]

#: Room a run wants on the output filesystem before it starts. The demo's
#: outputs take about 14 MiB; four times that leaves room for longer shifts.
MIN_FREE_BYTES = 64 * 2**20
#: The file a run marks its folder with (written last): only such a folder is replaced.
RUN_MARKER = "run.json"

_AT_FDCWD = -100
_RENAME_EXCHANGE = 2


def _refuse(message: str) -> InputError:
    return InputError(message, field="--out")


def check_out_folder(out: str | os.PathLike[str], *, inputs: Sequence[str | os.PathLike[str]] = (),
                     min_free_bytes: int = MIN_FREE_BYTES) -> Path:
    """The absolute output folder, or an :class:`InputError` (field ``--out``) saying why not.

    Nothing is created or changed. ``inputs`` are the run's input files:
    none may lie inside the folder, which the run replaces.
    """
    if not str(out).strip():
        raise _refuse("an empty folder name; give the folder to write the run into")
    target = Path(os.path.abspath(out))
    with contextlib.suppress(OSError):
        target = target.resolve()
    if target == Path(target.anchor):
        raise _refuse(f"{target} is a filesystem root; give a folder of its own for the run")
    if target.exists() and not target.is_dir():
        raise _refuse(f"{out} is a file, not a folder")
    if target.is_dir():
        try:
            names = os.listdir(target)
        except OSError as exc:
            raise _refuse(f"cannot read the folder {out}: {exc.strerror}") from None
        if names and RUN_MARKER not in names:
            raise _refuse(f"{out} holds files that are not a harbourwatch run (no {RUN_MARKER}); "
                          "a run replaces its folder whole: give a new or empty folder")
        cwd = Path.cwd().resolve()
        if cwd == target or target in cwd.parents:
            raise _refuse(f"{out} holds the current folder; give another folder for the run")
    for f in inputs:
        fp = Path(os.path.abspath(f))
        with contextlib.suppress(OSError):
            fp = fp.resolve()
        if target in fp.parents:
            raise _refuse(f"the input {f} is inside {out}, which the run replaces; "
                          "move it or write the run elsewhere")
    base = target
    while not base.exists():
        base = base.parent
    if not base.is_dir():
        raise _refuse(f"cannot create {out}: {base} is a file, not a folder")
    if not os.access(base, os.W_OK | os.X_OK):
        raise _refuse(f"cannot write into {base} (no write permission or a read-only filesystem)")
    st = os.statvfs(base)
    free = st.f_bavail * st.f_frsize
    if free < min_free_bytes:
        raise _refuse(f"only {free / 2**20:.1f} MiB free on the filesystem of {base}; a run "
                      f"needs at least {min_free_bytes / 2**20:.0f} MiB")
    return target


def leftovers(target: Path) -> list[Path]:
    """What runs into ``target`` left beside it: hidden ``.NAME.*.tmp`` entries."""
    prefix = f".{target.name}."
    try:
        names = os.listdir(target.parent)
    except FileNotFoundError:
        return []
    return sorted(target.parent / n for n in names if n.startswith(prefix) and n.endswith(".tmp"))


def _remove(path: Path) -> None:
    if path.is_dir() and not path.is_symlink():
        shutil.rmtree(path, ignore_errors=True)
    else:
        with contextlib.suppress(FileNotFoundError):
            path.unlink()


def _clean_leftovers(target: Path) -> None:
    """Repair a swap cut short (the previous run back in place), then remove the leftovers."""
    left = leftovers(target)
    old = [p for p in left if p.name.startswith(f".{target.name}.old-") and p.is_dir()]
    if old and not target.exists():
        newest = max(old, key=lambda p: p.stat().st_mtime)
        os.rename(newest, target)
        left.remove(newest)
    for p in left:
        _remove(p)


def _exchange(a: Path, b: Path) -> bool:
    """Swap two existing paths in one step (Linux ``renameat2``); False where not supported."""
    try:
        fn = ctypes.CDLL(None, use_errno=True).renameat2
    except (OSError, AttributeError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    fn.restype = ctypes.c_int
    if fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP):
        return False
    raise OSError(err, os.strerror(err), str(b))


def _swap_in(stage: Path, target: Path) -> None:
    """Put ``stage`` in place of ``target`` and delete the previous run."""
    if not target.exists():
        os.rename(stage, target)
        return
    if _exchange(stage, target):
        shutil.rmtree(stage, ignore_errors=True)  # now holds the previous run
        return
    old = Path(tempfile.mkdtemp(prefix=f".{target.name}.old-", suffix=".tmp", dir=target.parent))
    os.rmdir(old)
    os.rename(target, old)
    os.rename(stage, target)
    shutil.rmtree(old, ignore_errors=True)


@contextlib.contextmanager
def run_folder(target: Path) -> Iterator[Path]:
    """Lock ``target``, yield a fresh folder beside it to write the run into, swap it in.

    ``target`` comes from :func:`check_out_folder`. An exception inside the
    block deletes the new folder and leaves ``target`` as it was; an
    ``OSError`` there comes out as an :class:`OutputError` naming the file
    by its place in ``target``.

    Raises
    ------
    InputError
        Another run holds the lock, or the folder beside ``target`` cannot
        be created.
    """
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        lock_fd = os.open(target.parent / f".{target.name}.lock", os.O_RDWR | os.O_CREAT, 0o666)
    except OSError as exc:
        raise _refuse(f"cannot create {target}: {exc.strerror}") from None
    try:
        try:
            fcntl.flock(lock_fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise _refuse(f"another run is writing into {target} (it holds "
                          f".{target.name}.lock beside it); wait for it to end") from None
        _clean_leftovers(target)
        try:
            stage = Path(tempfile.mkdtemp(prefix=f".{target.name}.new-", suffix=".tmp",
                                          dir=target.parent))
        except OSError as exc:
            raise _refuse(f"cannot create a folder beside {target}: {exc.strerror}") from None
        try:
            mask = os.umask(0)
            os.umask(mask)
            os.chmod(stage, 0o777 & ~mask)  # mkdtemp makes 0700; give the usual folder mode
            yield stage
            _swap_in(stage, target)
        except OutputError as exc:
            shutil.rmtree(stage, ignore_errors=True)
            raise OutputError(exc.reason, path=_shown(Path(exc.path), stage, target)) from None
        except OSError as exc:
            shutil.rmtree(stage, ignore_errors=True)
            where = _shown(Path(exc.filename), stage, target) if exc.filename else target
            raise output_error(exc, where) from None
        except BaseException:
            shutil.rmtree(stage, ignore_errors=True)
            raise
    finally:
        os.close(lock_fd)  # releases the lock


def _shown(path: Path, stage: Path, target: Path) -> Path:
    """``path`` inside the new folder, named by its place in ``target``."""
    try:
        return target / path.relative_to(stage)
    except ValueError:
        return path
