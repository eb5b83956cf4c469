"""A lock on a run folder, so two runs writing the same folder cannot collide.

The lock is a small file beside the run folder, ``.{name}.lock``, created
with ``O_CREAT | O_EXCL`` (only one process can create it) and holding the
owner's process id, host name and start time as JSON. While a run holds the
lock it also keeps an exclusive :func:`fcntl.flock` on the file, which the
operating system drops the moment the process ends, however it ends.

A lock file left behind by a killed run is *stale*; it is detected and
removed by the next run:

- on a system with ``flock``, a lock file nobody holds the ``flock`` on is
  stale (unless it is empty and younger than a few seconds: its owner may be
  between creating it and locking it);
- without ``flock`` (or on a file system that ignores it), a lock file
  whose owner ran on this host under a process id that no longer exists is
  stale.

A lock held by a live run is never removed: the second run waits for it (up
to ``wait_s``) or fails at once with :class:`RunLockedError`.

Examples
--------
>>> import tempfile, pathlib
>>> out = pathlib.Path(tempfile.mkdtemp()) / "run1"
>>> with RunLock(out) as lock:
...     lock.path.name
'.run1.lock'
>>> (out.parent / ".run1.lock").exists()
False
"""

from __future__ import annotations

import contextlib
import json
import os
import socket
import time
from pathlib import Path
from types import TracebackType
from typing import Any

from hubnet.errors import EXIT_OUTPUT_EXISTS, HubnetError

try:  # POSIX only; elsewhere the process-id check alone finds stale locks
    import fcntl
except ImportError:  # pragma: no cover - not on Linux or macOS
    fcntl = None  # type: ignore[assignment]

#: An empty lock file younger than this (seconds) is taken as being set up.
FRESH_EMPTY_LOCK_S = 5.0


class RunLockedError(HubnetError):
    """Another live run holds the lock of the run folder.

    Exits with the same code as an existing run folder
    (:data:`hubnet.errors.EXIT_OUTPUT_EXISTS`): the folder is not free.
    """

    exit_code = EXIT_OUTPUT_EXISTS


def lock_path(out_dir: str | Path) -> Path:
    """The lock file of a run folder: ``.{name}.lock`` in the same parent folder."""
    out = Path(out_dir).absolute()
    return out.parent / f".{out.name}.lock"


def _pid_alive(pid: int) -> bool:
    """True when a process with this id runs (a zombie, killed but not yet reaped, does not)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by another user
        pass
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:  # no /proc (macOS): trust the signal check
        return True
    return stat.rsplit(")", 1)[-1].split()[:1] != ["Z"]


def _read_owner(path: Path) -> dict[str, Any] | None:
    try:
        text = path.read_text(encoding="utf-8")
    except OSError:
        return None
    try:
        owner = json.loads(text)
    except ValueError:
        return None
    return owner if isinstance(owner, dict) else None


class RunLock:
    """Exclusive lock on one run folder (a context manager).

    Parameters
    ----------
    out_dir
        The run folder to protect (it need not exist).
    wait_s
        How long to wait for a live lock to be released, seconds; ``0``
        fails at once.
    poll_s
        Pause between two attempts while waiting, seconds.

    Raises
    ------
    RunLockedError
        On entering, when a live run holds the lock after ``wait_s``.
    """

    def __init__(self, out_dir: str | Path, *, wait_s: float = 0.0, poll_s: float = 0.2):
        self.out_dir = Path(out_dir)
        self.path = lock_path(out_dir)
        self.wait_s = wait_s
        self.poll_s = poll_s
        self._fd: int | None = None
        self._made: list[Path] = []

    # -- public -----------------------------------------------------------

    def acquire(self) -> None:
        """Take the lock, removing a stale one, waiting for a live one up to ``wait_s``."""
        deadline = time.monotonic() + self.wait_s
        missing = []
        folder = self.path.parent
        while not folder.exists():
            missing.append(folder)
            folder = folder.parent
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._made = missing  # removed again on release when still empty
        while True:
            if self._try_create():
                return
            owner = self._break_if_stale()
            if owner is None:  # it was stale and is gone: try again at once
                continue
            if time.monotonic() >= deadline:
                raise RunLockedError(
                    f"run folder {str(self.out_dir)!r} is being written by another run "
                    f"(process {owner.get('pid', '?')} on {owner.get('host', '?')}, "
                    f"since {owner.get('started', '?')}); lock file {str(self.path)!r}"
                )
            time.sleep(self.poll_s)

    def release(self) -> None:
        """Remove the lock file and drop the ``flock`` (safe to call twice)."""
        if self._fd is None:
            return
        with contextlib.suppress(FileNotFoundError):
            self.path.unlink()
        os.close(self._fd)
        self._fd = None
        for folder in self._made:  # deepest first; a folder the run filled stays
            with contextlib.suppress(OSError):
                folder.rmdir()
        self._made = []

    def __enter__(self) -> RunLock:
        self.acquire()
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.release()

    # -- internals --------------------------------------------------------

    def _try_create(self) -> bool:
        try:
            fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except FileExistsError:
            return False
        if fcntl is not None:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)  # ours: just created
        owner = {
            "pid": os.getpid(),
            "host": socket.gethostname(),
            "started": time.strftime("%Y-%m-%dT%H:%M:%S%z"),
        }
        os.write(fd, json.dumps(owner).encode())
        os.fsync(fd)
        self._fd = fd
        return True

    def _break_if_stale(self) -> dict[str, Any] | None:
        """Remove the lock file when stale and return None; else return its owner."""
        try:
            fd = os.open(self.path, os.O_RDONLY)
        except FileNotFoundError:
            return None
        try:
            owner = _read_owner(self.path) or {}
            if not self._is_stale(fd, owner):
                return owner or {"pid": "?", "host": "?"}
            # Still the same file we judged? (Another run may have replaced it.)
            try:
                same = os.stat(self.path).st_ino == os.fstat(fd).st_ino
            except FileNotFoundError:
                return None
            if same:
                with contextlib.suppress(FileNotFoundError):
                    self.path.unlink()
            return None
        finally:
            os.close(fd)  # also drops any flock taken on it

    def _is_stale(self, fd: int, owner: dict[str, Any]) -> bool:
        pid: Any = owner.get("pid")
        here = owner.get("host") == socket.gethostname() and isinstance(pid, int)
        if fcntl is not None:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                return False  # a live process holds it
            if not owner:  # empty or unreadable: maybe being set up right now
                return time.time() - os.fstat(fd).st_mtime > FRESH_EMPTY_LOCK_S
            # Nobody holds the flock, so the owner has ended; unless it is a live
            # process on this host (a file system that ignores flock): then wait.
            return not (here and _pid_alive(int(pid)))
        return here and not _pid_alive(int(pid))
