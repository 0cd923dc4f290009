"""Replacing a workbook file safely: a spreadsheet program's lock file stops us, the new version is written
beside the old one and renamed over it only when complete, and the previous version is kept as a backup.

A crash, SIGINT or SIGKILL at any moment leaves the original as it was: until ``os.replace`` (atomic on POSIX and
on Windows within one volume) only a temp file named ``<name>.leakbudget-<pid>.tmp`` exists, which an interrupted
run removes itself and a killed run's successor removes on its next start.
"""

from __future__ import annotations

import os
import shutil
import stat
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Generic, TypeVar

from leakbudget.errors import WriteBackError

BACKUP_MARK = ".before-leakbudget"  # panel.xlsx -> panel.before-leakbudget.xlsx, then panel.before-leakbudget-2.xlsx …
BACKUP_GENERATIONS = 5  # numbered backups kept beside the first one (the version before leakbudget's first write)
TEMP_MARK = ".leakbudget-"  # panel.xlsx -> panel.xlsx.leakbudget-<pid>.tmp while writing
STALE_TEMP_AGE_S = 24 * 3600  # a temp file older than this is left over from a crash, whatever its pid
COPY_CHUNK_BYTES = 1 << 20

_T = TypeVar("_T")


def backup_path(source: Path) -> Path:
    """Where the version before leakbudget's first write is kept: ``<stem>.before-leakbudget<suffix>`` beside it."""
    return source.with_name(source.stem + BACKUP_MARK + source.suffix)


def is_backup(name: str) -> bool:
    """``name`` is one of the previous versions leakbudget keeps: ``<stem>.before-leakbudget<suffix>`` or a
    numbered one, ``<stem>.before-leakbudget-<n><suffix>``."""
    stem = Path(name).stem
    if stem.endswith(BACKUP_MARK):
        return True
    head, mark, number = stem.rpartition(BACKUP_MARK + "-")
    return bool(head and mark) and number.isdigit()


def _numbered(source: Path, n: int) -> Path:
    return source.with_name(f"{source.stem}{BACKUP_MARK}-{n}{source.suffix}")


def _generations(source: Path) -> list[int]:
    """The numbers of the numbered backups beside ``source`` (2, 3, …), oldest first."""
    import glob

    prefix, suffix = f"{source.stem}{BACKUP_MARK}-", source.suffix
    out = []
    for path in source.parent.glob(glob.escape(prefix) + "*" + glob.escape(suffix)):
        middle = path.name[len(prefix) : len(path.name) - len(suffix)]
        if middle.isdigit():
            out.append(int(middle))
    return sorted(out)


def next_backup_path(source: Path) -> Path:
    """Where this write keeps the previous version: the first backup when there is none yet (it is never replaced
    afterwards), else the next numbered one (``<stem>.before-leakbudget-2<suffix>``, -3, …)."""
    first = backup_path(source)
    if not first.exists():
        return first
    numbers = _generations(source)
    return _numbered(source, (numbers[-1] if numbers else 1) + 1)


def prune_backups(source: Path) -> None:
    """Keep the first backup and the ``BACKUP_GENERATIONS`` newest numbered ones; remove older numbered ones."""
    numbers = _generations(source)
    for n in numbers[: max(0, len(numbers) - BACKUP_GENERATIONS)]:
        _numbered(source, n).unlink(missing_ok=True)


@dataclass(frozen=True)
class Rewritten(Generic[_T]):
    path: Path  # the file written
    backup: Path | None  # the previous version, when the source itself was replaced
    value: _T  # what the build function returned


def rewrite(
    source: Path, out: Path | None, build: Callable[[IO[bytes], IO[bytes]], _T], force: bool = False
) -> Rewritten[_T]:
    """Write ``build(original, dest)`` to ``out``, or over ``source`` (keeping its previous version) if ``out``
    is None or the same file; ``original`` is ``source`` opened for reading.

    The destination is refused while a spreadsheet program's lock file sits beside it (beside a symbolic link and
    beside the file it points to), when it has no write bit, when it has other names (hard links, which a
    replaced file would leave on the old version) and, for an ``out`` that exists, unless ``force`` (its previous
    version is then kept too). ``source`` is never replaced if it changed on disk meanwhile (a save from the
    spreadsheet program wins). The new file gets the replaced file's permission bits and, where the process may
    set them, its owner and group; a symbolic link ``source`` is followed. The previous version is kept as
    :func:`next_backup_path` says.
    """
    link = source if out is None and source.is_symlink() else None
    if link is not None:
        source = source.resolve()
    in_place = out is None or same_file(out, source)
    target = source if in_place else out
    assert target is not None
    if link is not None:
        refuse_if_open(link)
    if not in_place:
        refuse_existing_out(target, force)
    if target.exists():
        refuse_if_unsafe_target(target)
    kept = source if in_place else (target if target.exists() else None)
    backup = next_backup_path(kept) if kept is not None else None
    refuse_if_open(target)
    for path in (target, backup):
        if path is not None:
            remove_stale_temps(path)
    try:
        original = open(source, "rb")  # noqa: SIM115  (opened apart to word its error; the with below closes it)
    except OSError as exc:
        raise WriteBackError(
            f"{source}: cannot read the workbook ({exc.strerror}); check the path and run again."
        ) from None
    with original:
        before = os.fstat(original.fileno())
        replaced = os.stat(target) if target.exists() else before
        mode = stat.S_IMODE(replaced.st_mode)
        owner = (replaced.st_uid, replaced.st_gid)

        def keep_previous() -> None:
            if backup is None or kept is None:
                return
            if in_place:
                refuse_if_changed(source, before)  # a save meanwhile must neither be overwritten nor backed up
                original.seek(0)
                replace_atomically(
                    backup,
                    mode,
                    lambda f: shutil.copyfileobj(original, f, COPY_CHUNK_BYTES),
                    times_ns=(before.st_atime_ns, before.st_mtime_ns),
                    owner=owner,
                )
                refuse_if_changed(source, before)
            else:
                with open(kept, "rb") as previous:
                    replace_atomically(
                        backup,
                        mode,
                        lambda f: shutil.copyfileobj(previous, f, COPY_CHUNK_BYTES),
                        times_ns=(replaced.st_atime_ns, replaced.st_mtime_ns),
                        owner=owner,
                    )
            prune_backups(kept)

        value = replace_atomically(
            target, mode, lambda dest: build(original, dest), before_replace=keep_previous, owner=owner
        )
    return Rewritten(target, backup, value)


def refuse_existing_out(path: Path, force: bool) -> None:
    """Refuse to write a new file over one that exists, unless ``force`` (its version is then kept as a backup)."""
    if path.exists() and not force:
        raise WriteBackError(
            f"{path.name}: the file exists; leakbudget does not replace it unless told to: give --force (its current "
            "version is then kept as a backup beside it), or choose another name."
        )


def refuse_if_unsafe_target(path: Path) -> None:
    """Refuse to replace a file that has no write bit (read-only) or that has other names (hard links)."""
    info = os.stat(path)
    if not info.st_mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH):
        raise WriteBackError(
            f"{path.name}: the file is read-only; leakbudget does not replace it: make it writable, or write the results "
            "to another file with --out."
        )
    if info.st_nlink > 1:
        raise WriteBackError(
            f"{path.name}: the file has {info.st_nlink} names (hard links); replacing it would leave the other names on "
            "the old version: write the results to another file with --out."
        )


def replace_atomically(
    final: Path,
    mode: int,
    write: Callable[[IO[bytes]], _T],
    before_replace: Callable[[], None] = lambda: None,
    times_ns: tuple[int, int] | None = None,
    owner: tuple[int, int] | None = None,
) -> _T:
    """Write a temp file beside ``final`` with ``write``, fsync it, then ``os.replace`` it onto ``final``.

    Until the rename, ``final`` is untouched; on any error or interrupt the temp file is removed.
    """
    temp = final.with_name(f"{final.name}{TEMP_MARK}{os.getpid()}.tmp")
    try:
        handle = open(temp, "wb")  # noqa: SIM115  (opened apart to word its error; the with below closes it)
    except OSError as exc:
        raise WriteBackError(
            f"{final.parent}: cannot create a file in this folder ({exc.strerror}); make the folder writable or "
            "choose another output path."
        ) from None
    try:
        with handle:
            result = write(handle)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(temp, mode)
        if owner is not None and hasattr(os, "chown"):
            try:
                os.chown(temp, *owner)  # keep the replaced file's owner and group where the process may
            except PermissionError:
                pass
        if times_ns is not None:
            os.utime(temp, ns=times_ns)
        before_replace()
        os.replace(temp, final)
    except OSError as exc:
        temp.unlink(missing_ok=True)
        raise WriteBackError(
            f"{final}: could not write the file ({exc.strerror or exc}); nothing was changed; close it in other "
            "programs, free some disk space and run again."
        ) from None
    except BaseException:
        temp.unlink(missing_ok=True)
        raise
    _fsync_folder(final.parent)
    return result


def _fsync_folder(folder: Path) -> None:
    """Make the rename durable (POSIX); folders cannot be opened for fsync on Windows."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def lock_file(path: Path) -> str | None:
    """The name of a spreadsheet program's lock file beside ``path`` (the file is open there), or None."""
    name = path.name
    for lock in (f".~lock.{name}#", f"~${name}", f"~${name[2:]}"):  # LibreOffice/OpenOffice; Excel (two forms)
        if (path.parent / lock).exists():
            return lock
    return None


def refuse_if_open(path: Path) -> None:
    """Refuse when a spreadsheet program's lock file sits beside ``path`` (it would overwrite our result)."""
    lock = lock_file(path)
    if lock is not None:
        raise WriteBackError(
            f"{path}: the file is open in a spreadsheet program (lock file {lock} beside it); close it there "
            "and run again, or write the results to another file."
        )


def refuse_if_changed(path: Path, before: os.stat_result) -> None:
    now = os.stat(path)
    if (now.st_size, now.st_mtime_ns, now.st_ino) != (before.st_size, before.st_mtime_ns, before.st_ino):
        raise WriteBackError(f"{path}: the file changed while leakbudget was writing; nothing was changed; run again.")


def remove_stale_temps(path: Path) -> None:
    """Delete temp files a killed run left beside ``path`` (their process is gone, or they are a day old)."""
    import glob

    for temp in path.parent.glob(glob.escape(path.name) + TEMP_MARK + "*.tmp"):
        pid_text = temp.name[len(path.name) + len(TEMP_MARK) : -len(".tmp")]
        try:
            age_s = time.time() - temp.stat().st_mtime
            if not pid_text.isdigit() or not _process_alive(int(pid_text)) or age_s > STALE_TEMP_AGE_S:
                temp.unlink()
        except OSError:
            continue


def _process_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    if os.name != "posix":
        return True  # os.kill would terminate the process on Windows; rely on the age test there
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def same_file(a: Path, b: Path) -> bool:
    try:
        return a.exists() and os.path.samefile(a, b)
    except OSError:
        return False
