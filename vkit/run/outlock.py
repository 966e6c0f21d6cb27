"""One run per output folder: a lock file that the run writing the folder holds until it ends.

The lock is an ``fcntl`` lock on ``OUT/.vkit-run.lock``, so it goes with the process that holds it,
however that process ends (even SIGKILL): no stale lock to clean up. The file says who holds it
(pid and start time) for the message a second run prints. The file itself stays in the folder.
"""

from __future__ import annotations

import fcntl
import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import IO

from vkit.core.errors import ConfigError

__all__ = ["LOCK_NAME", "OutLock", "lock_out_dir"]

LOCK_NAME = ".vkit-run.lock"
"""The lock file's name inside the output folder."""
_MAX_SIBLINGS = 100
"""Siblings (``out-2`` .. ``out-100``) tried for a new folder before giving up."""


@dataclass
class OutLock:
    """A held output folder: ``out_dir`` (maybe a sibling of the one asked for) and the open lock file."""

    out_dir: Path
    handle: IO[str]
    note: str | None = None
    """One line for the user when the folder is not the one asked for, else None."""

    def release(self) -> None:
        """Let go of the folder (closing the file drops the lock)."""
        if not self.handle.closed:
            self.handle.close()

    def __enter__(self) -> OutLock:
        return self

    def __exit__(self, *exc: object) -> None:
        self.release()


def _try_lock(out: Path) -> tuple[IO[str] | None, str]:
    """The locked, rewritten lock file of ``out`` and "", or None and who holds it."""
    try:
        out.mkdir(parents=True, exist_ok=True)
        handle = open(out / LOCK_NAME, "a+", encoding="utf-8")  # noqa: SIM115 - held for the run
    except OSError as exc:
        why = exc.strerror or type(exc).__name__
        raise ConfigError(f"output folder {out} cannot be written ({why}); pick a writable folder with --out "
                          "or [run] out_dir") from None
    try:
        fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        handle.seek(0)
        holder = " ".join(handle.read().split()) or "pid unknown"
        handle.close()
        return None, holder
    handle.seek(0)
    handle.truncate()
    handle.write(f"pid {os.getpid()}, started {time.strftime('%Y-%m-%d %H:%M:%S')}\n")
    handle.flush()
    return handle, ""


def lock_out_dir(out: Path, *, new_out: bool = False) -> OutLock:
    """Lock ``out`` for this run, or (``new_out``) the first free sibling ``out-2``, ``out-3``, ...

    Raises:
        ConfigError: ``out`` is being written by another run (and ``new_out`` is off), or cannot be written.
    """
    handle, holder = _try_lock(out)
    if handle is not None:
        return OutLock(out, handle)
    if not new_out:
        raise ConfigError(f"output folder {out} is being written by another vkit run ({holder}); wait for it to "
                          "end, give another --out, or add --new-out to write a sibling folder")
    for k in range(2, _MAX_SIBLINGS + 1):
        sibling = out.with_name(f"{out.name}-{k}")
        handle, _ = _try_lock(sibling)
        if handle is not None:
            return OutLock(sibling, handle, f"output folder {out} is being written by another vkit run ({holder}); "
                                            f"writing to {sibling}")
    raise ConfigError(f"output folder {out} and its siblings up to {out.name}-{_MAX_SIBLINGS} are all being "
                      "written by other vkit runs; give another --out")
