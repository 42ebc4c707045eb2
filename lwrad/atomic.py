"""Atomic file output: a file appears under its final name complete or not at all.

Everything lwrad writes for the user (results, trajectories, estimate tables,
figures) goes through here: the data are written to a hidden temporary file in
the target directory, flushed to disk, then linked to the final name. An
existing file is never replaced unless ``overwrite`` is given; a full,
read-only or forbidden target gives an :class:`~lwrad.errors.InputError` that
names the file.
"""

from __future__ import annotations

import contextlib
import errno
import os
import tempfile
from collections.abc import Callable
from pathlib import Path

from lwrad.errors import InputError

__all__ = ["atomic_output", "atomic_write"]

_DISK_ERRNOS = {errno.ENOSPC, errno.EDQUOT, errno.EROFS, errno.EACCES, errno.EPERM}


@contextlib.contextmanager
def atomic_output(path, *, overwrite: bool = False, suffix: str = ""):
    """Yield a temporary path in ``path``'s directory; on success move it to ``path``.

    Use as ``with atomic_output(path) as tmp: write(tmp)``. On an exception the
    temporary file is removed and ``path`` is untouched.

    The temporary name starts with a dot and ends in ``.tmp`` so it never looks
    like a result (``suffix`` is appended for libraries that pick the format by the
    file ending). Without ``overwrite`` the move is a hard link (fails if the
    target appeared meanwhile), so an existing file is never replaced.
    """
    path = Path(path)
    # mkstemp creates the file private (0600); give it the mode a plain open() would
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp" + suffix, dir=path.parent)
    except OSError as exc:
        raise _disk_error(exc, path) from None
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        try:
            yield tmp_path
            with open(tmp_path, "rb+") as fh:
                os.fsync(fh.fileno())
        except OSError as exc:
            if exc.errno not in _DISK_ERRNOS:
                raise
            raise _disk_error(exc, path) from None
        os.chmod(tmp_path, 0o666 & ~_umask())
        if overwrite:
            os.replace(tmp_path, path)
        else:
            try:
                os.link(tmp_path, path)
            except FileExistsError:
                raise InputError(
                    "output file exists; not overwritten (use --force to replace it)",
                    source=str(path),
                ) from None
            except OSError:  # file systems without hard links: check, then rename
                if path.exists():
                    raise InputError(
                        "output file exists; not overwritten", source=str(path)
                    ) from None
                os.replace(tmp_path, path)
        _fsync_dir(path.parent)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp_path.unlink()


def _disk_error(exc: OSError, path: Path) -> InputError:
    """A clear message for a full, read-only or forbidden target (the file is not written)."""
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        what = "no space left on the device (or quota exceeded)"
    elif exc.errno == errno.EROFS:
        what = "the file system is read-only"
    else:
        what = f"cannot write there ({os.strerror(exc.errno) if exc.errno else exc})"
    return InputError(
        f"{what}; nothing was written under this name (a run's checkpoint, if any, is kept: "
        "free space, then continue with --resume)",
        source=str(path),
    )


def _umask() -> int:
    try:  # Linux reports it without changing it (os.umask would, process-wide)
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    return 0o022  # common practice default where the process's umask cannot be read


def _fsync_dir(directory: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(directory, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def atomic_write(
    path, write: Callable[[str], None], *, overwrite: bool = False, suffix: str = ""
) -> str:
    """Call ``write(temp_path)`` and move the complete file to ``path`` atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Target file; its directory must exist.
    write : callable
        Writes the whole file at the temporary path it is given.
    overwrite : bool
        Replace an existing ``path``.
    suffix : str
        Ending of the temporary name (some libraries pick the format by it).

    Returns
    -------
    str
        The absolute path written.
    """
    target = Path(os.path.abspath(os.fspath(path)))
    if not target.parent.is_dir():
        raise InputError("the directory does not exist", source=str(target.parent))
    if target.exists() and not overwrite:
        raise InputError(
            "the file exists; not overwritten (pass overwrite=True or --force)", source=str(target)
        )
    with atomic_output(target, overwrite=overwrite, suffix=suffix) as tmp:
        write(str(tmp))
    return str(target)
