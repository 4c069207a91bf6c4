"""One run per output folder: a lock file that a second run finds and refuses on.

The lock is a file created with ``O_EXCL`` (atomic on local file systems) holding the owner's
process id, host and start time. A lock left by a run that no longer exists on this host (a
killed process) is taken over; on another host, or where the owner cannot be checked, the
second run refuses and says which file to remove once no run is active.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import socket
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from ..errors import OutputError

LOCK_NAME = ".rasterbudget.lock"


def _alive(pid: int) -> bool | None:
    """Whether a process of this host is running; None where it cannot be checked safely."""
    if os.name != "posix":  # os.kill would end the process on Windows
        return None
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


@contextmanager
def output_lock(out_dir: Path) -> Iterator[Path]:
    """Hold ``out_dir``'s lock for the duration of the block; refuse if another run holds it."""
    path = Path(out_dir) / LOCK_NAME
    mine = {
        "pid": os.getpid(),
        "host": socket.gethostname(),
        "started_utc": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
    }
    for _ in range(2):
        try:
            fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except FileExistsError:
            owner = _owner(path)
            same_host = owner.get("host") == mine["host"]
            alive = _alive(int(owner.get("pid", -1))) if same_host else None
            if alive is False:  # left by a run that was killed: take it over
                path.unlink(missing_ok=True)
                continue
            raise OutputError(
                f"another rasterbudget run (process {owner.get('pid', '?')} on "
                f"{owner.get('host', '?')}, started {owner.get('started_utc', '?')}) is writing "
                f"into {out_dir}; wait for it, or choose another --out (if no run is active, "
                f"remove {path})."
            ) from None
        except OSError as err:
            raise OutputError(
                f"cannot create the lock {path} ({err.strerror}); check write permission on "
                f"{out_dir}."
            ) from None
        with os.fdopen(fd, "w") as f:
            json.dump(mine, f)
        break
    try:
        yield path
    finally:
        path.unlink(missing_ok=True)


def _owner(path: Path) -> dict:
    try:
        return json.loads(path.read_text())
    except (OSError, ValueError):
        return {}
