"""Write outputs so that nothing half-written is ever left behind.

A file is written under a temporary name in the same folder and renamed onto its final name
only when the writer finished without error (a rename within one file system is atomic on
POSIX and Windows). A folder of outputs is built in a staging folder next to it and swapped in
only on success.
"""

from __future__ import annotations

import contextlib
import logging
import os
import shutil
import tempfile
import time
from collections.abc import Callable, Iterator
from pathlib import Path

from geo3d.errors import OutputExistsError

__all__ = ["atomic_file", "output_folder", "STAGING_PREFIX", "OLD_PREFIX"]

#: Name prefix of the staging folder built beside an output folder; the process id and start
#: time follow (``.geo3d-staging-<pid>-<YYYYmmddTHHMMSS>-...``), so a folder left by a killed
#: run can be recognised and removed by the next run (:mod:`geo3d.io.outdir`).
STAGING_PREFIX = ".geo3d-staging-"
#: Name prefix of the previous output folder while it is being replaced.
OLD_PREFIX = ".geo3d-old-"

logger = logging.getLogger(__name__)


@contextlib.contextmanager
def atomic_file(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path that is renamed onto ``path`` when the block succeeds.

    Parameters
    ----------
    path
        Final file name. Its folder is created if needed.

    Yields
    ------
    pathlib.Path
        A path in the same folder with the same suffix; write the whole file there.

    Notes
    -----
    If the block raises, the temporary file is removed and ``path`` is left as it was.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_file(folder / "a.txt") as tmp:
    ...     _ = tmp.write_text("done")
    >>> (folder / "a.txt").read_text()
    'done'
    """
    final = Path(path)
    final.parent.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(
        prefix=f".{final.stem}.", suffix=f".tmp{final.suffix}", dir=final.parent
    )
    os.close(fd)
    tmp = Path(name)
    # mkstemp makes a private (0600) file; the output gets the usual mode for new files.
    os.chmod(tmp, _default_mode(0o666))
    try:
        yield tmp
        if not tmp.exists():
            msg = f"nothing was written to the temporary file for {final}"
            raise FileNotFoundError(msg)
        os.replace(tmp, final)
        logger.debug("wrote %s", final)
    except BaseException:
        with contextlib.suppress(OSError):
            if tmp.is_dir():
                shutil.rmtree(tmp)
            else:
                tmp.unlink()
        raise


def _default_mode(base: int) -> int:
    """Return ``base`` less the process umask, the mode a new file or folder would get."""
    mask = os.umask(0)
    os.umask(mask)
    return base & ~mask


def _stamp() -> str:
    """Return ``<pid>-<UTC time>-``, the part of a staging name after its prefix."""
    return f"{os.getpid()}-{time.strftime('%Y%m%dT%H%M%S', time.gmtime())}-"


@contextlib.contextmanager
def output_folder(
    path: str | os.PathLike,
    *,
    overwrite: bool = False,
    before_replace: Callable[[], None] | None = None,
) -> Iterator[Path]:
    """Yield a staging folder that replaces ``path`` only when the block succeeds.

    Parameters
    ----------
    path
        Final output folder.
    overwrite
        Replace ``path`` if it exists and is not empty. Without it such a folder is an error.
    before_replace
        Called once the block succeeded, just before ``path`` is replaced; an exception it
        raises removes the staging folder and leaves ``path`` untouched.

    Yields
    ------
    pathlib.Path
        An empty staging folder beside ``path``; write every output there.

    Raises
    ------
    OutputExistsError
        If ``path`` exists, is not empty (or is a file) and ``overwrite`` is false.

    Notes
    -----
    On error the staging folder is removed and ``path`` is untouched. On success the old
    folder (if any) is moved aside, the staging folder renamed onto ``path``, and the old one
    removed.
    """
    final = Path(path)
    if final.exists() and not overwrite:
        if final.is_file() or any(final.iterdir()):
            msg = (
                f"{final}: output folder exists and is not empty; expected a new or empty "
                "folder (use overwrite to replace it)"
            )
            raise OutputExistsError(msg)
    final.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=STAGING_PREFIX + _stamp(), dir=final.parent))
    # mkdtemp makes a private (0700) folder; the output gets the usual mode for new folders.
    os.chmod(staging, _default_mode(0o777))
    try:
        yield staging
        if before_replace is not None:
            before_replace()
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    old = None
    if final.exists():
        old = Path(tempfile.mkdtemp(prefix=OLD_PREFIX + _stamp(), dir=final.parent))
        old.rmdir()
        os.replace(final, old)
    try:
        os.replace(staging, final)
    except BaseException:
        if old is not None:
            os.replace(old, final)
        shutil.rmtree(staging, ignore_errors=True)
        raise
    if old is not None:
        if old.is_dir():
            shutil.rmtree(old, ignore_errors=True)
        else:
            old.unlink(missing_ok=True)
    logger.debug("wrote folder %s", final)
