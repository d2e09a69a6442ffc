"""Publishing a file with its companion (a value roll and its manifest) so that the files and the database
agree whatever moment a crash strikes, and a reader never sees the file without its own companion.

1. `begin` commits a 'writing' row naming both files' final and temporary paths (in the target's folder);
2. the caller writes and fsyncs both temporary files;
3. the caller's transaction that records what the files mean (the export event, the batch states) calls
   `commit`, which marks the row 'committed': that commit is the moment the export happens;
4. `finish` removes a target being overwritten, renames the companion into place, then the target, fsyncs
   the folder and deletes the row.
A crash before 3 leaves the database as it was and temporary files that `recover` removes; a crash after 3
leaves renames that `recover` completes. `recover` runs whenever a process opens the project for writing
(reval.data.store.Store) and logs what it did. Because the target is removed before its companion is
replaced and renamed after it, a reader who finds the target finds its own companion beside it (the
manifest also carries the roll's sha256, so a reader can check the pair).
"""
from __future__ import annotations

import logging
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

from reval.clock import utc_now
from reval.errors import UserError

if TYPE_CHECKING:
    from reval.data.store import Store

log = logging.getLogger("reval")


def begin(store: Store, target: Path, target_tmp: Path, companion: Path, companion_tmp: Path,
          overwrite: bool) -> int:
    """Record the publication before its temporary files exist; returns its id."""
    with store.transaction():
        row = store.run("publication_begin", {
            "target": str(target), "target_tmp": str(target_tmp), "companion": str(companion),
            "companion_tmp": str(companion_tmp), "overwrite": overwrite, "at": utc_now()}).fetchone()
    assert row is not None
    return int(row[0])


def commit(store: Store, publication_id: int) -> None:
    """Mark the publication committed; call inside the transaction that records what the files mean."""
    store.run("publication_commit", {"id": publication_id})


def finish(store: Store, publication_id: int) -> None:
    """Put both files in place (companion first, target last) and forget the publication."""
    row = next(r for r in _pending(store) if r["publication_id"] == publication_id)
    _rename(row)
    with store.transaction():
        store.run("publication_done", {"id": publication_id})


def abandon(store: Store, publication_id: int) -> None:
    """Remove the temporary files of a publication that will not be committed, and forget it."""
    for row in _pending(store):
        if row["publication_id"] == publication_id:
            _clean(store, row)


def recover(store: Store) -> list[str]:
    """Finish every committed publication and clean every unfinished one; returns (and logs) what was done."""
    done = []
    for row in _pending(store):
        if row["state"] == "committed":
            _rename(row)
            with store.transaction():
                store.run("publication_done", {"id": row["publication_id"]})
            done.append(f"finished an interrupted export: {row['target']} and its manifest are now in place")
        else:
            _clean(store, row)
            done.append(f"cleaned up an export to {row['target']} that was interrupted before it was recorded; "
                        "nothing was exported")
    for text in done:
        log.warning(text)
    return done


def _pending(store: Store) -> list[dict[str, Any]]:
    return store.records("publication_pending")


def _rename(row: dict[str, Any]) -> None:
    target, target_tmp = Path(row["target"]), Path(row["target_tmp"])
    companion, companion_tmp = Path(row["companion"]), Path(row["companion_tmp"])
    if not target_tmp.exists():
        if not target.exists():
            log.warning("the files of the export to %s are missing (removed after it was recorded); the "
                        "database holds its batches as exported: export again to write them", target)
        return                                             # renamed before the interruption
    if not row["overwrite"]:                               # a file that appeared since the export began
        foreign = [p for p, tmp in ((target, target_tmp), (companion, companion_tmp)) if p.exists() and tmp.exists()]
        if foreign:
            raise UserError(f"Cannot finish the export to {target}: {foreign[0]} appeared after the export began "
                            "and the export was not asked to overwrite it. Move it away and run the command again.")
    target.unlink(missing_ok=True)                         # never a target beside a companion not its own
    if companion_tmp.exists():
        os.replace(companion_tmp, companion)
    os.replace(target_tmp, target)
    _fsync_folder(target.parent)


def _clean(store: Store, row: dict[str, Any]) -> None:
    for name in ("target_tmp", "companion_tmp"):
        Path(row[name]).unlink(missing_ok=True)
    with store.transaction():
        store.run("publication_done", {"id": row["publication_id"]})


def _fsync_folder(folder: Path) -> None:
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)
