"""Output-folder safety: a run never deletes or replaces an input or a file geo3d did not write.

:func:`safe_output_folder` wraps :func:`geo3d.io.atomic.output_folder` with the checks a run
needs before it writes anything:

- the output folder may not be, contain, or lie inside the site folder or the folder of any
  input file named in ``site.toml``;
- an existing, non-empty output folder is replaced (``overwrite``) only when it holds a
  ``run.json`` written by geo3d and nothing but the files that run lists;
- just before the final rename the output folder is looked at again: a folder that appeared
  during the run, or one whose contents changed, is not replaced;
- staging folders left beside the output by a killed run (``.geo3d-staging-<pid>-<time>-...``,
  whose process is gone) are removed by the next run into the same parent folder.
"""

from __future__ import annotations

import calendar
import contextlib
import glob
import json
import logging
import os
import re
import shutil
import time
import warnings
from collections.abc import Iterator
from os import PathLike
from pathlib import Path

from geo3d.config import load_config
from geo3d.errors import Geo3dWarning, OutputExistsError
from geo3d.io.atomic import output_folder

__all__ = [
    "UnsafeOutputError",
    "input_folders",
    "check_output_path",
    "foreign_files",
    "remove_stale_staging",
    "safe_output_folder",
]

logger = logging.getLogger(__name__)

_LEFTOVER = re.compile(r"^\.geo3d-(staging|old)-(\d+)-(\d{8}T\d{6})-")


class UnsafeOutputError(OutputExistsError):
    """The output folder would delete or replace an input or a file geo3d did not write."""


def _glob_root(pattern: str) -> str:
    """Return the part of a glob pattern before its first wildcard component."""
    parts = Path(pattern).parts
    kept = []
    for part in parts:
        if glob.has_magic(part):
            break
        kept.append(part)
    return str(Path(*kept)) if kept else "."


def input_folders(site_path: str | PathLike) -> list[Path]:
    """Return the site folder and the folder of every input file named in ``site.toml``.

    Parameters
    ----------
    site_path
        The site folder or its ``site.toml``.

    Returns
    -------
    list of pathlib.Path
        Resolved folders, without duplicates. When ``site.toml`` cannot be read only the site
        folder is returned (the run then stops in its check stage, before writing anything).
    """
    given = Path(site_path)
    root = (given.parent if given.is_file() else given).resolve()
    folders = [root]
    try:
        files = load_config(given).files
    except Exception:  # a broken site file is reported by the check stage
        return folders
    names = [files.borings, files.dissipation, files.slug_tests, files.sensor_checks]
    names += [files.boundary, files.zones, files.dem]
    logs = [files.logs] if isinstance(files.logs, str) else list(files.logs)
    candidates = [(root / n).parent for n in names if n and n.strip()]
    candidates += [root / _glob_root(p) for p in logs if p and p.strip()]
    for candidate in candidates:
        folder = candidate.resolve()
        if folder not in folders:
            folders.append(folder)
    return folders


def _relation(out: Path, folder: Path) -> str | None:
    if out == folder:
        return "is"
    if out in folder.parents:
        return "contains"
    if folder in out.parents:
        return "lies inside"
    return None


def _run_listing(out: Path) -> tuple[set[str] | None, str]:
    """Return the files a geo3d run.json in ``out`` lists (None if there is none of ours)."""
    marker = out / "run.json"
    try:
        data = json.loads(marker.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None, "it has no run.json written by geo3d"
    if not isinstance(data, dict) or "geo3d_version" not in data:
        return None, "its run.json was not written by geo3d"
    outputs = data.get("outputs", [])
    if not isinstance(outputs, list):
        return None, "its run.json was not written by geo3d"
    return {str(Path(p)) for p in outputs} | {"run.json", "run.log"}, ""


def foreign_files(out: Path) -> tuple[list[str], str]:
    """Return the files in ``out`` that no geo3d run wrote, and why (empty when all are ours)."""
    listed, reason = _run_listing(out)
    if listed is None:
        # not ours: name a few entries without walking what may be a large folder
        names = sorted(p.name for _, p in zip(range(6), out.iterdir(), strict=False))
        return names or [str(out)], reason
    present = sorted(
        str(p.relative_to(out)) for p in out.rglob("*") if p.is_file() or p.is_symlink()
    )
    foreign = [p for p in present if p not in listed]
    return foreign, "not listed in its run.json" if foreign else ""


def _snapshot(out: Path) -> tuple[bool, tuple[tuple[str, int, int], ...]]:
    if not out.exists():
        return False, ()
    if out.is_file():
        return True, ((".", out.stat().st_size, out.stat().st_mtime_ns),)
    entries = []
    for p in sorted(out.rglob("*")):
        with contextlib.suppress(OSError):
            stat = p.lstat()
            entries.append((str(p.relative_to(out)), stat.st_size, stat.st_mtime_ns))
    return True, tuple(entries)


def check_output_path(
    out_dir: str | PathLike, *, site_path: str | PathLike, overwrite: bool
) -> None:
    """Refuse an output folder that could delete an input or a file geo3d did not write.

    Parameters
    ----------
    out_dir
        The output folder asked for.
    site_path
        The site folder (or its ``site.toml``).
    overwrite
        Whether replacing an existing output folder was asked for.

    Raises
    ------
    UnsafeOutputError
        ``out_dir`` is, contains or lies inside the site folder or an input file's folder; is
        a file; or holds files not listed in a geo3d ``run.json`` and ``overwrite`` is set.
    OutputExistsError
        ``out_dir`` is not empty and ``overwrite`` is not set.
    """
    given = Path(out_dir)
    out = given.resolve()
    for folder in input_folders(site_path):
        relation = _relation(out, folder)
        if relation is not None:
            msg = (
                f"{given}: the output folder {relation} the input folder {folder}; a run "
                "replaces its output folder, so expected a folder outside the site folder and "
                "the folders of its input files (choose another -o)"
            )
            raise UnsafeOutputError(msg)
    if not out.exists():
        return
    if not out.is_dir():
        msg = f"{given}: exists and is a file; expected a new or empty folder (choose another -o)"
        raise UnsafeOutputError(msg)
    if not any(out.iterdir()):
        return
    if not overwrite:
        msg = (
            f"{given}: output folder exists and is not empty; expected a new or empty folder "
            "(use --overwrite to replace the results of an earlier geo3d run)"
        )
        raise OutputExistsError(msg)
    foreign, reason = foreign_files(out)
    if foreign:
        more = f" and {len(foreign) - 5} more" if len(foreign) > 5 else ""
        shown = ", ".join(foreign[:5]) + more
        msg = (
            f"{given}: holds files geo3d did not write ({shown}; {reason}); --overwrite only "
            "replaces the results of an earlier geo3d run, so expected a new folder, an empty "
            "one, or one made by geo3d (move those files away or choose another -o)"
        )
        raise UnsafeOutputError(msg)


def _process_started(pid: int) -> float | None:
    """Return the start time (epoch s) of process ``pid``, or None if it is not running."""
    import psutil

    try:
        return psutil.Process(pid).create_time()
    except (psutil.NoSuchProcess, psutil.ZombieProcess):
        return None
    except psutil.AccessDenied:
        return 0.0  # running, owned by someone else: treat as alive


def _is_stale(name: str) -> bool:
    match = _LEFTOVER.match(name)
    if match is None:
        return False
    pid = int(match.group(2))
    if pid == os.getpid():
        return False
    started = _process_started(pid)
    if started is None:
        return True
    stamp = calendar.timegm(time.strptime(match.group(3), "%Y%m%dT%H%M%S"))
    # a process started after the folder was named reuses the pid of the one that made it
    return started > stamp + 2.0


def remove_stale_staging(parent: str | PathLike) -> list[Path]:
    """Remove staging folders left in ``parent`` by geo3d runs that were killed.

    Parameters
    ----------
    parent
        The folder that holds the output folder.

    Returns
    -------
    list of pathlib.Path
        The staging folders removed. A left-over previous output (``.geo3d-old-...``, only
        possible when a run was killed while swapping folders) is not removed but reported
        with a :class:`~geo3d.errors.Geo3dWarning`, since it holds earlier results.
    """
    folder = Path(parent)
    removed: list[Path] = []
    if not folder.is_dir():
        return removed
    for entry in sorted(folder.iterdir()):
        if not entry.is_dir() or entry.is_symlink() or not _is_stale(entry.name):
            continue
        if entry.name.startswith(".geo3d-old-"):
            msg = (
                f"{entry}: earlier results left by a geo3d run that was stopped while replacing "
                "its output folder; look through them and remove the folder"
            )
            warnings.warn(msg, Geo3dWarning, stacklevel=2)
            continue
        shutil.rmtree(entry, ignore_errors=True)
        logger.warning("removed %s, left by a geo3d run that was stopped", entry)
        removed.append(entry)
    return removed


@contextlib.contextmanager
def safe_output_folder(
    out_dir: str | PathLike, *, site_path: str | PathLike, overwrite: bool = False
) -> Iterator[Path]:
    """Yield a staging folder that safely replaces ``out_dir`` when the block succeeds.

    Parameters
    ----------
    out_dir
        The output folder.
    site_path
        The site folder (or its ``site.toml``), whose inputs must never be replaced.
    overwrite
        Replace an earlier geo3d output folder.

    Yields
    ------
    pathlib.Path
        The staging folder (``.geo3d-staging-<pid>-<time>-...`` beside ``out_dir``).

    Raises
    ------
    UnsafeOutputError, OutputExistsError
        Before any work (see :func:`check_output_path`), or at the end when ``out_dir``
        appeared or changed during the run; the staging folder is then removed and
        ``out_dir`` left as it is.
    """
    final = Path(out_dir)
    check_output_path(final, site_path=site_path, overwrite=overwrite)
    remove_stale_staging(final.resolve().parent)
    before = _snapshot(final)

    def recheck() -> None:
        now = _snapshot(final)
        if now == before:
            return
        what = "appeared" if not before[0] else "changed"
        msg = (
            f"{final}: the output folder {what} while the run was going (another run or "
            "program wrote it); nothing was replaced and the new results were discarded; "
            "expected the output folder to stay as it was (rerun with another -o)"
        )
        raise UnsafeOutputError(msg)

    with output_folder(final, overwrite=overwrite, before_replace=recheck) as staging:
        yield staging
