"""Write a run folder atomically: all files appear together, or none do.

A run folder holds ``summary.json``, the tables as CSV (``hubs.csv``,
``legs.csv``, ``routes.csv``, ``hierarchy.csv``, ``rank_size.csv``), a copy
of the scenario config (``config.toml``) when given, and any extra files a
caller adds (an HTML map, for example).

Everything is first written into a hidden sibling folder
``.{name}.tmp-XXXXXXXX`` in the same parent folder, each file flushed to
disk, and the folder is then renamed to its final name. When an earlier run
folder is being replaced, it is first renamed aside to
``.{name}.old-XXXXXXXX``, the new folder is renamed in, and only then is
the old one deleted: at every instant one complete run folder exists under
one of those names, so a crash (power cut, killed process) never loses both.
On any error while writing, the temporary folder is deleted and the error
re-raised; an earlier run folder is left exactly as it was.
"""

from __future__ import annotations

import os
import secrets
import shutil
import warnings
from collections.abc import Mapping
from pathlib import Path, PurePosixPath
from typing import Any

from hubnet.errors import HubnetError, OutputExistsError
from hubnet.report.summary import summary_dict, summary_json
from hubnet.report.tables import all_tables
from hubnet.solution import Solution

SUMMARY_FILE = "summary.json"
CONFIG_FILE = "config.toml"

#: Files every run folder holds (``config.toml`` only when a config is given).
TABLE_FILES: tuple[str, ...] = (
    "hubs.csv",
    "legs.csv",
    "routes.csv",
    "hierarchy.csv",
    "rank_size.csv",
)
STANDARD_FILES: tuple[str, ...] = (SUMMARY_FILE, *TABLE_FILES, CONFIG_FILE)


def preflight(
    out_dir: str | Path,
    force: bool = False,
    *,
    kind: str = "run folder",
    marker: str = SUMMARY_FILE,
) -> Path:
    """Check that a run folder (or another hubnet output folder) can be written.

    ``kind`` names the folder in messages and ``marker`` is the file that
    makes an existing folder one of hubnet's own, which ``force`` may
    replace (``summary.json`` for run folders).

    Call this before solving, so a user learns at once that the folder
    exists (or cannot be written) rather than after the solve.
    :func:`write_run` runs the same checks again before writing.

    Parameters
    ----------
    out_dir
        The run folder to create.
    force
        Whether an existing run folder may be replaced.

    Returns
    -------
    pathlib.Path
        ``out_dir`` as a path.

    Raises
    ------
    OutputExistsError
        When ``out_dir`` exists and ``force`` is false; or, even with
        ``force``, when it is a file, a symbolic link, or a non-empty
        folder without ``summary.json`` (hubnet replaces only folders that
        look like its own run folders, so a mistyped path never deletes a
        folder of other work).
    HubnetError
        When ``out_dir`` names no folder (``.``, ``..``, a root), the folder
        would be created under a file, or the nearest existing parent
        folder is not writable.
    """
    out_dir = Path(out_dir)
    if out_dir.name in ("", ".", ".."):
        raise HubnetError(f"{kind} {str(out_dir)!r}: give the path of a folder to create")
    if os.path.lexists(out_dir):
        if not force:
            raise OutputExistsError(
                f"{kind} {str(out_dir)!r} already exists: choose another folder, "
                "or replace it (--force on the command line, force=True from Python)"
            )
        if out_dir.is_symlink() or not out_dir.is_dir():
            raise OutputExistsError(
                f"{str(out_dir)!r} exists and is not a folder (or is a link): "
                "hubnet will not replace it"
            )
        if not (out_dir / marker).is_file() and any(out_dir.iterdir()):
            raise OutputExistsError(
                f"{str(out_dir)!r} exists and does not look like a hubnet {kind} "
                f"(no {marker}): hubnet will not replace it; remove it yourself "
                "or choose another folder"
            )
    ancestor = out_dir.absolute().parent
    while not ancestor.exists():
        ancestor = ancestor.parent
    if not ancestor.is_dir():
        raise HubnetError(f"cannot create {kind} {str(out_dir)!r}: {ancestor} is a file")
    if not os.access(ancestor, os.W_OK | os.X_OK):
        raise HubnetError(
            f"cannot create {kind} {str(out_dir)!r}: folder {str(ancestor)!r} is not writable"
        )
    return out_dir


def render_run(
    sol: Solution,
    *,
    extra_files: Mapping[str, bytes | str] | None = None,
    config_text: str | None = None,
    summary: Mapping[str, Any] | None = None,
) -> dict[str, bytes]:
    """The contents of every file of a run folder, in memory.

    Parameters
    ----------
    sol, extra_files, config_text, summary
        As for :func:`write_run`.

    Returns
    -------
    dict
        Relative file name (``/``-separated) to the bytes to write. Text is
        UTF-8 with LF line ends.

    Raises
    ------
    ValueError
        When an extra file name is absolute, climbs out of the folder
        (``..``), is empty, or repeats a standard file name.
    """
    files: dict[str, bytes] = {
        SUMMARY_FILE: summary_json(summary if summary is not None else summary_dict(sol)).encode()
    }
    for name, table in all_tables(sol).items():
        files[f"{name}.csv"] = table.to_csv(index=False, lineterminator="\n").encode()
    if config_text is not None:
        files[CONFIG_FILE] = config_text.encode()
    for name, content in (extra_files or {}).items():
        key = _checked_extra_name(name)
        if key in files or key in STANDARD_FILES:
            raise ValueError(f"extra file {name!r} would replace a standard run file")
        files[key] = content.encode() if isinstance(content, str) else bytes(content)
    return files


def write_run(
    out_dir: str | Path,
    sol: Solution,
    *,
    force: bool = False,
    extra_files: Mapping[str, bytes | str] | None = None,
    config_text: str | None = None,
    summary: Mapping[str, Any] | None = None,
) -> Path:
    """Write the run folder of a plan atomically.

    Parameters
    ----------
    out_dir
        The run folder. Its parent folders are created when missing.
    sol
        The plan.
    force
        Replace an existing run folder. The new folder is written in full
        first; the old one is deleted only once the new one is in place.
    extra_files
        More files to add, by relative name (``"map.html"``, or
        ``"maps/trunk.html"`` with a subfolder); ``str`` content is written
        as UTF-8.
    config_text
        The scenario config's TOML text, copied to ``config.toml``.
    summary
        The summary to write as ``summary.json``, for example one built by
        :func:`~hubnet.report.summary.summary_dict` with the config; by
        default ``summary_dict(sol)``.

    Returns
    -------
    pathlib.Path
        ``out_dir``.

    Raises
    ------
    OutputExistsError
        When ``out_dir`` exists and ``force`` is false (nothing is
        written), or it cannot be replaced (see :func:`preflight`).
    HubnetError
        When the parent folder cannot be written.
    ValueError
        When an extra file name is not a plain relative name.
    OSError
        When the disk fails (full, permissions); the temporary folder is
        removed and an earlier ``out_dir`` is untouched.
    """
    out_dir = preflight(out_dir, force)
    files = render_run(sol, extra_files=extra_files, config_text=config_text, summary=summary)
    parent = out_dir.absolute().parent
    parent.mkdir(parents=True, exist_ok=True)
    tmp = _make_sibling_dir(out_dir, "tmp")
    try:
        for name, data in files.items():
            _write_file(tmp / name, data)
        for folder in sorted({p.parent for p in tmp.rglob("*")}, key=lambda p: -len(p.parts)):
            _fsync_dir(folder)
        _move_into_place(tmp, out_dir, force)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out_dir


def _checked_extra_name(name: str) -> str:
    """Normalise an extra file name; refuse names that leave the run folder."""
    path = PurePosixPath(name.replace("\\", "/"))
    if (
        str(path) in ("", ".")
        or path.is_absolute()
        or ".." in path.parts
        or ":" in path.parts[0]  # a Windows drive such as C:
    ):
        raise ValueError(f"extra file name {name!r} must be a relative name inside the run folder")
    return str(path)


def _make_sibling_dir(out_dir: Path, kind: str) -> Path:
    """Create a hidden, unused folder ``.{name}.{kind}-XXXXXXXX`` beside ``out_dir``.

    Made with :func:`os.mkdir` so it gets the user's usual permissions
    (after the rename it is the run folder).
    """
    while True:
        candidate = _sibling_name(out_dir, kind)
        try:
            candidate.mkdir()
        except FileExistsError:
            continue
        return candidate


def _sibling_name(out_dir: Path, kind: str) -> Path:
    """An unused hidden name ``.{name}.{kind}-XXXXXXXX`` beside ``out_dir``."""
    parent = out_dir.absolute().parent
    while True:
        candidate = parent / f".{out_dir.name}.{kind}-{secrets.token_hex(4)}"
        if not candidate.exists():
            return candidate


def _write_file(path: Path, data: bytes) -> None:
    """Write bytes to a new file and flush them to disk."""
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "xb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())


def _fsync_dir(folder: Path) -> None:
    """Flush a folder's entries to disk, where the system supports it (best effort)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:  # Windows cannot open a folder
        return
    try:
        os.fsync(fd)
    except OSError:  # some file systems refuse fsync on a folder
        pass
    finally:
        os.close(fd)


def _move_into_place(tmp: Path, out_dir: Path, force: bool) -> None:
    """Rename the finished folder ``tmp`` to ``out_dir``, replacing an old one if forced."""
    preflight(out_dir, force)  # again: the folder may have appeared during the writing
    parent = tmp.parent
    if not os.path.lexists(out_dir):
        os.rename(tmp, out_dir)
        _fsync_dir(parent)
        return
    aside = _sibling_name(out_dir, "old")
    os.rename(out_dir, aside)
    try:
        os.rename(tmp, out_dir)
    except BaseException:
        os.rename(aside, out_dir)
        raise
    _fsync_dir(parent)
    try:
        shutil.rmtree(aside)
    except OSError as err:
        warnings.warn(
            f"run folder {str(out_dir)!r} was replaced, but the previous copy "
            f"{str(aside)!r} could not be deleted ({err}); delete it yourself",
            stacklevel=3,
        )
