"""One writer per project: a lock file beside the database naming the process that holds it.

`reval.duckdb.lock` holds the writer's pid, command and start time as JSON. It is written whole to a
temporary file, which the writer locks (flock) and then hard-links into place: the link fails when a lock
file exists, so exactly one process gets it, and a reader of the file never sees half of it. The kernel
drops the flock when its process ends however it ends, so a lock file left by a killed process is
recognised as stale (the next writer can lock it), reported with the dead process's pid and removed.
The writer removes its lock file when it closes the database. Within one process the lock is re-entrant.

A second writer (and a reader that finds DuckDB's own file lock taken) waits up to `wait_seconds()`
(environment variable REVAL_WAIT, default 10 s) and then raises ProjectInUse, naming the holder.
POSIX only (flock).
"""
from __future__ import annotations

import fcntl
import json
import logging
import os
import sys
import threading
import time
from pathlib import Path
from typing import Any

from reval.clock import utc_now
from reval.errors import UserError

WAIT_ENV = "REVAL_WAIT"
DEFAULT_WAIT = 10.0
POLL = 0.05
log = logging.getLogger("reval")

_held: dict[Path, list[int]] = {}   # lock path -> [file descriptor, depth], for re-entry in this process
_guard = threading.Lock()


class ProjectInUse(UserError):
    """Another process holds the project; the message names it and says to try again."""


def wait_seconds() -> float:
    """How long a command waits for another process's hold on the project (REVAL_WAIT, default 10 s)."""
    raw = os.environ.get(WAIT_ENV, "")
    try:
        value = float(raw) if raw else DEFAULT_WAIT
    except ValueError:
        raise UserError(f"{WAIT_ENV}={raw!r}: expected a number of seconds") from None
    if not 0 <= value < 86_400:
        raise UserError(f"{WAIT_ENV}={raw!r}: expected a number of seconds from 0 to 86400")
    return value


def lock_path(database: Path) -> Path:
    """reval.duckdb -> reval.duckdb.lock."""
    return database.with_name(database.name + ".lock")


def this_command() -> str:
    """The running command as a person would type it (reval fit, reval tui, ...), at most 200 characters."""
    program = Path(sys.argv[0]).name if sys.argv and sys.argv[0] else "python"
    if program in ("__main__.py", "-m"):
        program = "reval"
    return " ".join([program, *sys.argv[1:]])[:200]


def holder(database: Path) -> dict[str, Any] | None:
    """The pid, command and start time recorded in the lock file, or None when there is none (or unreadable)."""
    return _record(lock_path(database))


def _record(path: Path) -> dict[str, Any] | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


def in_use(database: Path, waited: float) -> ProjectInUse:
    """The message for a project another process holds, naming that process when its lock file says."""
    who = holder(database)
    if who is None:
        by = "another process"
    else:
        by = f"process {who.get('pid')} ({who.get('command')}) since {who.get('since')} UTC"
    return ProjectInUse(f"{database.parent}: project in use by {by}; waited {waited:g} s, try again when it has "
                        f"finished (or set {WAIT_ENV} to wait longer).")


def acquire(database: Path, wait: float) -> None:
    """Take the project's writer lock, waiting up to `wait` seconds; re-entrant within this process."""
    path = lock_path(database)
    with _guard:
        if path in _held:
            _held[path][1] += 1
            return
    deadline = time.monotonic() + wait
    while True:
        fd = _try_lock(path)
        if fd is not None:
            with _guard:
                _held[path] = [fd, 1]
            return
        if time.monotonic() >= deadline:
            raise in_use(database, wait)
        time.sleep(POLL)


def release(database: Path) -> None:
    """Give the lock back; the outermost release removes the lock file."""
    path = lock_path(database)
    with _guard:
        entry = _held.get(path)
        if entry is None:
            return
        entry[1] -= 1
        if entry[1] > 0:
            return
        del _held[path]
    fd = entry[0]
    try:
        if _same_file(fd, path):
            path.unlink()
    finally:
        os.close(fd)


def _try_lock(path: Path) -> int | None:
    """One attempt: our locked file linked into place (its descriptor), or None while someone holds it.
    A stale lock file (its flock free: the process is gone) is removed on the way."""
    record = json.dumps({"pid": os.getpid(), "command": this_command(),
                         "since": utc_now().isoformat(timespec="seconds")}).encode()
    tmp = path.with_name(f".{path.name}.{os.getpid()}.{threading.get_ident()}")
    fd = os.open(tmp, os.O_RDWR | os.O_CREAT | os.O_TRUNC, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)   # a new file: nobody else can hold it
        os.write(fd, record)
        os.fsync(fd)
        os.link(tmp, path)
    except FileExistsError:
        os.close(fd)
        _remove_if_stale(path)
        return None
    except BaseException:
        os.close(fd)
        raise
    finally:
        tmp.unlink(missing_ok=True)
    return fd


def _remove_if_stale(path: Path) -> None:
    """Remove the lock file when no process holds its flock any more, saying whose it was."""
    try:
        fd = os.open(path, os.O_RDONLY)
    except FileNotFoundError:
        return
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            return                                          # held by a live process
        if not _same_file(fd, path):
            return                                          # replaced meanwhile: look again
        who = _record(path)
        path.unlink()
        log.warning("%s: removed a stale lock left by process %s (%s), which is no longer running.",
                    path.parent, (who or {}).get("pid", "?"), (who or {}).get("command", "unknown command"))
    finally:
        os.close(fd)


def _same_file(fd: int, path: Path) -> bool:
    try:
        return os.path.samestat(os.fstat(fd), os.stat(path))
    except FileNotFoundError:
        return False
