"""Writing a file so that an interrupted write never leaves it half-written.

:func:`write_atomically` writes a temporary file in the same folder, flushes it to disk, renames it
over the target and flushes the folder, so after a crash the target holds either the old or the
new text. Beyond that it keeps what a user expects of "save":

- the file keeps its permission bits (a new file gets the user's umask, as any program's would);
- a symbolic link stays a link: the file it points to is replaced;
- the temporary file's name is short (``.ll-<key>-<pid>-<random>.tmp``), so a file whose own name
  is near the 255-byte limit can still be saved;
- a temporary file left by a save that was killed (its process is gone) is removed by the next save
  of the same file; ``<key>`` is a checksum (CRC-32) of the target's name that ties the two.
"""
from __future__ import annotations

import os
import time
import zlib
from pathlib import Path

PREFIX, SUFFIX = ".ll-", ".tmp"
STALE_AFTER_S = 24 * 3600  # a temporary file this old is stale whatever its process


def write_atomically(path: str | os.PathLike, data: bytes) -> None:
    """Replace the file at ``path`` (through a symbolic link) with ``data`` atomically; raises
    OSError (and removes its temporary file) when the write fails."""
    target = Path(os.path.realpath(path))
    folder = target.parent
    mode = _mode_for(target)
    key = _key(target.name)
    _remove_stale(folder, key)
    tmp = folder / f"{PREFIX}{key}-{os.getpid()}-{os.urandom(3).hex()}{SUFFIX}"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    try:
        try:
            view = memoryview(data)
            while view:
                view = view[os.write(fd, view):]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    _sync_folder(folder)


def _mode_for(target: Path) -> int:
    """The permission bits of the file being replaced, or those a new file gets under the umask."""
    try:
        return os.stat(target).st_mode & 0o7777
    except FileNotFoundError:
        umask = os.umask(0o022)
        os.umask(umask)
        return 0o666 & ~umask


def _key(name: str) -> str:
    return f"{zlib.crc32(os.fsencode(name)):08x}"


def _remove_stale(folder: Path, key: str) -> None:
    """Remove temporary files of earlier saves of this file whose process is gone (or that are a
    day old); one in use by a running save is left alone."""
    try:
        names = [n for n in os.listdir(folder) if n.startswith(f"{PREFIX}{key}-") and n.endswith(SUFFIX)]
    except OSError:
        return
    for name in names:
        pid = name[len(PREFIX) + len(key) + 1:].split("-")[0]
        try:
            old = time.time() - os.stat(folder / name).st_mtime > STALE_AFTER_S
            if old or not (pid.isascii() and pid.isdigit() and _alive(int(pid))):
                os.unlink(folder / name)
        except OSError:
            pass


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return False  # this process is not saving this file now: a copy left by an earlier failure
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists but belongs to another user
        return True
    return True


def _sync_folder(folder: Path) -> None:
    """Flush the folder's entry for the renamed file (where the system allows opening a folder)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
