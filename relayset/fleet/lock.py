"""One batch per output folder: a lock file that names its holder.

A batch holds ``OUT/.relayset-batch.lock`` for its whole run: an operating-system lock on the
open file (``flock`` on POSIX, a byte-range lock on Windows), which the system drops however
the holder ends, so a killed batch never blocks the folder. The file's text names the holder
(process id, host, start time) for the message a second batch prints. A lock file left by a
holder that is gone (killed) is taken over with a note. Where the file system offers no lock,
the holder's process id is checked instead (same host only).
"""

from __future__ import annotations

import json
import os
import socket
import time
from dataclasses import dataclass
from pathlib import Path

from relayset.errors import InputError

LOCK_NAME = ".relayset-batch.lock"
#: Where the Windows byte-range lock sits: past any text the file holds [byte].
_WIN_LOCK_OFFSET = 1 << 30


def _process_start(pid: int) -> str | None:
    """When process ``pid`` started (Linux: clock ticks since boot), to tell a reused process
    id from the holder; None where unknown."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    return stat.rsplit(")", 1)[1].split()[19]  # field 22, after the command name


def _me() -> dict[str, object]:
    pid = os.getpid()
    return {"pid": pid, "host": socket.gethostname(), "process_start": _process_start(pid),
            "since": time.strftime("%Y-%m-%dT%H:%M:%S%z")}


def holder_alive(holder: dict) -> bool | None:
    """Whether the holder named in a lock file still runs: None when it cannot be known
    (another host, or no way to ask this system)."""
    pid = holder.get("pid")
    if holder.get("host") != socket.gethostname() or not isinstance(pid, int) or pid <= 0:
        return None
    if os.name == "nt":  # os.kill(pid, 0) would end the process there
        return None
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # alive, another user's
        pass
    start = holder.get("process_start")
    now = _process_start(pid)
    if start is not None and now is not None and now != start:
        return False  # the process id was reused by another process
    return True


def _try_lock(fd: int) -> bool | None:
    """Lock the open file without waiting: True, False (held elsewhere), or None when this
    system or file system offers no lock."""
    try:
        import fcntl
    except ImportError:
        fcntl = None
    if fcntl is not None:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            return True
        except (BlockingIOError, PermissionError):
            return False
        except OSError:  # e.g. ENOLCK on a file system without locks
            return None
    try:
        import msvcrt
    except ImportError:
        return None
    try:
        os.lseek(fd, _WIN_LOCK_OFFSET, os.SEEK_SET)
        msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
        return True
    except OSError:
        return False
    finally:
        os.lseek(fd, 0, os.SEEK_SET)


def _read(fd: int) -> str:
    os.lseek(fd, 0, os.SEEK_SET)
    chunks = []
    while chunk := os.read(fd, 4096):
        chunks.append(chunk)
        if sum(map(len, chunks)) > 65536:
            break
    return b"".join(chunks).decode("utf-8", "replace")


def _holder(text: str) -> dict | None:
    try:
        d = json.loads(text)
    except ValueError:
        return None
    return d if isinstance(d, dict) else None


def describe(holder: dict | None) -> str:
    if not holder:
        return "an unknown process"
    return f"process {holder.get('pid')} on {holder.get('host')}"


@dataclass
class FolderLock:
    """The lock a batch holds on its output folder."""

    path: Path
    fd: int
    note: str | None = None  #: what was taken over, if anything

    def release(self) -> None:
        """Remove the lock file and drop the lock (once)."""
        if self.fd < 0:
            return
        fd, self.fd = self.fd, -1
        if os.name == "nt":  # an open file cannot be removed there
            os.close(fd)
            self.path.unlink(missing_ok=True)
            return
        try:
            if os.stat(self.path).st_ino == os.fstat(fd).st_ino:
                self.path.unlink()
        except OSError:
            pass
        finally:
            os.close(fd)


def lock_folder(out: Path) -> FolderLock:
    """Take the output folder ``out`` for this batch.

    Raises
    ------
    InputError
        Another batch is writing into ``out`` (its process and host named), or the lock file
        cannot be made.
    """
    path = out / LOCK_NAME
    for _ in range(10):
        try:
            fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o666)  # the umask applies
        except OSError as exc:
            raise InputError(f"cannot create the lock file {LOCK_NAME} "
                             f"({exc.strerror or exc})", field="-o", value=str(out),
                             source="command line") from None
        try:
            locked = _try_lock(fd)
            old = _read(fd)
            holder = _holder(old)
            if locked is False or (holder is not None and holder_alive(holder) is True) or (
                    locked is None and holder is not None and holder_alive(holder) is None):
                raise InputError(
                    f"is in use by another batch ({describe(holder)}, since "
                    f"{(holder or {}).get('since', 'unknown')}); wait for it to finish or "
                    f"choose another output folder (if no batch runs, delete {LOCK_NAME})",
                    field="-o", value=str(out), source="command line")
            try:
                same = os.stat(path).st_ino == os.fstat(fd).st_ino
            except FileNotFoundError:
                same = False
            if not same:  # the holder removed it as we opened it: take the new one
                os.close(fd)
                continue
            note = None
            if old.strip():
                note = (f"relayset: note: {out} was locked by {describe(holder)}, which is no "
                        "longer running; lock taken over")
            text = json.dumps(_me()).encode("utf-8")
            os.ftruncate(fd, 0)
            os.lseek(fd, 0, os.SEEK_SET)
            os.write(fd, text + b"\n")
            return FolderLock(path, fd, note)
        except BaseException:
            if fd >= 0:
                try:
                    os.close(fd)
                except OSError:
                    pass
            raise
    raise InputError(f"the lock file {LOCK_NAME} keeps changing; is another batch starting?",
                     field="-o", value=str(out), source="command line")
