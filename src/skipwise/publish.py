"""The one publisher: every output of every command appears through this module.

A single file is written under a hidden temporary name in its own folder, flushed
to disk (``fsync``) and renamed onto its name, so a reader sees the old file or
the new one, never half of one (:func:`publish_file`, :func:`publish_files`).

A package (the folder ``skipwise run`` writes) is built in a sibling staging
folder and published by renames (:class:`PackagePublisher`):

1. the old folder ``OUT`` is renamed aside to ``.OUT.skipwise-previous``;
2. the staging folder is renamed to ``OUT``;
3. the previous folder is removed.

A crash between 1 and 2 leaves no ``OUT`` but a kept previous folder: the next
start restores it.  A crash after 2 leaves the new package and a previous folder:
the next start removes the previous one.  An exclusive lock (``fcntl.flock`` on
the sibling file ``OUT.lock``, holding the holder's pid and host) keeps two runs
from building or publishing the same package at once; staging folders left by a
holder that died are removed (and reported) by the next holder.

SIGINT and SIGTERM become :class:`Interrupted`, so the clean-up in ``finally``
blocks runs; while a publish step renames, they are held back until the step is
done, so an interruption never splits a swap.
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import shutil
import signal
import socket
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Iterator, Sequence

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["publish_file", "publish_files", "check_writable", "clean_message", "probe_folder", "PackagePublisher", "Interrupted",
           "handle_signals", "user_path", "os_error_problem", "STAGING_MARK", "PREVIOUS_MARK"]

STAGING_MARK = ".skipwise-staging-"
PREVIOUS_MARK = ".skipwise-previous"
MANIFEST = "manifest.json"

#: Hidden temporary path -> the user's output it stands for (messages name the latter).
_SHOWN: dict[Path, Path] = {}
#: Test hook: called with a label before each rename of a publish step ("aside", "in", "remove").
_before_rename: Callable[[str], None] | None = None


# -- messages ---------------------------------------------------------------------------------
def user_path(path: str | Path | None) -> str | None:
    """The user's name for ``path``: a temporary file or staging folder is shown as its target."""
    if path is None:
        return None
    p = Path(os.fsdecode(path))
    for hidden, shown in list(_SHOWN.items()):
        if p == hidden:
            return str(shown)
        with contextlib.suppress(ValueError):
            return str(shown / p.relative_to(hidden))
    return str(p)


def clean_message(text: object, limit: int = 240) -> str:
    """Text taken from a library's exception, fit for a message: hidden temporary names shown as
    the user's files, control characters and runs of escaped bytes removed, one line, capped."""
    import re

    out = str(text)
    for hidden, shown in list(_SHOWN.items()):
        out = out.replace(str(hidden), str(shown))
    out = re.sub(r"(?:\\x[0-9a-fA-F]{2}|\\[0-7]{3}){3,}", " ... ", out)  # b'PK\x03\x04...' and the like
    out = "".join(ch if ch.isprintable() else " " for ch in out)
    out = " ".join(out.split())
    return out if len(out) <= limit else out[: limit - 4].rstrip() + " ..."


_CAUSES = {
    errno.ENOSPC: ("the disk is full", "free some space or write to another disk"),
    errno.EDQUOT: ("the disk quota is used up", "free some space or write to another disk"),
    errno.EROFS: ("the folder is on a read-only file system", "write the output to a writable folder"),
    errno.EACCES: ("permission denied", "choose a folder you may write to, or ask for access"),
    errno.EPERM: ("the operation is not permitted there", "choose an ordinary folder you may write to"),
    errno.ENOTDIR: ("a part of the path is a file where a folder is expected", "check the path"),
    errno.EISDIR: ("it is a folder where a file is expected", "name a file inside the folder"),
    errno.ENAMETOOLONG: ("the name is too long for the file system", "choose a shorter name"),
    errno.ENOENT: ("no such file or folder", "check the path; the folder must exist"),
    errno.EEXIST: ("something of that name is already there", "choose another name"),
    errno.EIO: ("the device reported an input/output error", "check the disk, or copy the file elsewhere"),
    errno.EMFILE: ("too many open files", "close other programs and try again"),
    errno.EXDEV: ("the staging folder is on another file system", "choose an output folder on one disk"),
}


def os_error_problem(exc: OSError, *, path: str | Path | None = None) -> Problem:
    """One readable problem for an OS error: the user's path, the cause and what to do.

    ``path`` names the user's file when the error does not (a failed ``write`` carries no
    name); a hidden temporary or staging name is always shown as the output it stands for.
    """
    cause, hint = _CAUSES.get(exc.errno, (exc.strerror or type(exc).__name__, None))
    name = exc.filename if exc.filename is not None else path
    where = user_path(name)
    shown = user_path(path) if path is not None else None
    writing = name is not None and (shown is not None or where != str(Path(os.fsdecode(name))))
    doing = "cannot write the output" if writing else "cannot use this path"
    if shown is not None:
        where = shown
    if exc.errno in (errno.ENOENT, errno.EACCES, errno.EPERM) and where is not None:
        parent = next((f for f in Path(where).parents if f.exists()), None)
        if parent is not None and parent.is_dir() and _is_system_folder(parent):
            cause, hint = (f"{parent} is a system folder that does not accept new files",
                           "write the output to an ordinary folder")
            doing = "cannot write the output"
    if exc.errno == errno.ENAMETOOLONG and name is not None:
        longest = max((len(os.fsencode(part)) for part in Path(os.fsdecode(name)).parts), default=0)
        cause += f" ({longest} bytes in one name; most allow 255)"
        where = where[:60] + "..." if where and len(where) > 63 else where
    if exc.filename2 is not None and exc.errno != errno.ENAMETOOLONG:
        where = f"{where} -> {user_path(exc.filename2)}"
    return Problem(code=ProblemCode.OS_ERROR, category=Category.USAGE, file=where,
                   message=f"{doing}: {cause}", hint=hint)


def _is_system_folder(folder: Path) -> bool:
    """A folder of a virtual file system (/proc, /sys, /dev), where files cannot be created."""
    try:
        resolved = folder.resolve()
    except OSError:
        return False
    return any(resolved == Path(root) or Path(root) in resolved.parents for root in ("/proc", "/sys", "/dev"))


# -- signals ----------------------------------------------------------------------------------
class Interrupted(BaseException):
    """SIGINT or SIGTERM arrived; ``committed`` tells whether a publish step had already finished."""

    def __init__(self, signum: int, committed: bool = False):
        self.signum = signum
        self.committed = committed
        super().__init__(signal.Signals(signum).name)

    @property
    def exit_code(self) -> int:
        return 128 + self.signum


@dataclass
class _SignalState:
    depth: int = 0              # > 0 while a publish step renames
    pending: int | None = None  # a signal held back during it
    installed: bool = False


_SIG = _SignalState()


def _on_signal(signum, frame) -> None:  # noqa: ARG001 - signal handler signature
    if _SIG.depth:
        _SIG.pending = signum
        return
    raise Interrupted(signum)


@contextlib.contextmanager
def handle_signals() -> Iterator[None]:
    """Turn SIGINT/SIGTERM into :class:`Interrupted` for the duration (main thread only)."""
    import threading

    if threading.current_thread() is not threading.main_thread() or _SIG.installed:
        yield
        return
    old = {s: signal.signal(s, _on_signal) for s in (signal.SIGINT, signal.SIGTERM)}
    _SIG.installed = True
    try:
        yield
    finally:
        for s, h in old.items():
            signal.signal(s, h)
        _SIG.installed = False


@contextlib.contextmanager
def _uninterrupted() -> Iterator[None]:
    """Hold SIGINT/SIGTERM back while renames run; deliver a held one afterwards."""
    _SIG.depth += 1
    try:
        yield
    finally:
        _SIG.depth -= 1
    if _SIG.depth == 0 and _SIG.pending is not None:
        signum, _SIG.pending = _SIG.pending, None
        raise Interrupted(signum, committed=True)


def _hook(label: str) -> None:
    if _before_rename is not None:
        _before_rename(label)


# -- single files -----------------------------------------------------------------------------
def check_writable(path: str | Path, *, overwrite: bool = True, inputs: Iterable[str | Path] = ()) -> Path:
    """Refuse an output that is an input, a folder, or (without ``overwrite``) an existing file."""
    path = Path(path)
    for part in path.parts:
        if len(os.fsencode(part)) > 255:
            exc = OSError(errno.ENAMETOOLONG, os.strerror(errno.ENAMETOOLONG), str(path))
            raise SkipwiseError(os_error_problem(exc, path=path))
    for source in inputs:
        if Path(source).resolve() == path.resolve():
            raise SkipwiseError(Problem(
                code=ProblemCode.OUTPUT_IS_INPUT, category=Category.USAGE, file=str(path),
                message="the output would replace an input file",
                hint="inputs are never modified: choose another output name"))
    if path.is_dir():
        raise SkipwiseError(Problem(
            code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(path),
            message="the output names an existing folder, not a file",
            hint="name a file, e.g. a path inside that folder"))
    if path.exists() and not overwrite:
        raise SkipwiseError(Problem(
            code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(path),
            message="output file already exists",
            hint="choose another name or pass --overwrite to replace it"))
    try:
        probe_folder(path)
    except OSError as exc:
        raise SkipwiseError(os_error_problem(exc, path=path)) from None
    return path


def probe_folder(path: Path) -> None:
    """Find out before any work whether ``path`` can be written: no file where a folder is expected, and a file can be created in its nearest existing folder (a
    read-only disk, /proc, a full quota).  Creates no folder; the probe file is removed."""
    for folder in path.parents:
        if folder.exists():
            if not folder.is_dir():
                raise NotADirectoryError(errno.ENOTDIR, os.strerror(errno.ENOTDIR), str(folder))
            fd, probe = tempfile.mkstemp(prefix=".skipwise-probe-", dir=folder)
            os.close(fd)
            os.unlink(probe)
            return


def _fsync_path(path: Path) -> None:
    """Flush a file's (or a folder's) data to disk; folders where the system allows it."""
    flags = os.O_RDONLY | (os.O_DIRECTORY if path.is_dir() else 0)
    try:
        fd = os.open(path, flags)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError as exc:  # some file systems cannot sync a folder; a file's failure matters
        if not path.is_dir():
            raise exc
    finally:
        os.close(fd)


def _make_folder(folder: Path) -> None:
    """Create ``folder`` and its parents; a file in the way is reported as such (not as EEXIST)."""
    for part in [folder, *folder.parents]:
        if part.exists():
            if not part.is_dir():
                raise NotADirectoryError(errno.ENOTDIR, os.strerror(errno.ENOTDIR), str(part))
            break
    folder.mkdir(parents=True, exist_ok=True)


def _temp_file(path: Path) -> Path:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem[:80]}.", suffix=f".part{path.suffix}", dir=path.parent)
    os.close(fd)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes the file private (0600): give it the usual mode
    return Path(tmp)


@contextlib.contextmanager
def publish_files(paths: Sequence[str | Path], *, overwrite: bool = True) -> Iterator[list[Path]]:
    """Yield temporary paths for ``paths``; on success all appear together, else none changes.

    Each temporary file sits in its target's folder (so the rename is atomic) and is
    flushed to disk before the renames.  If a rename fails, the targets already
    replaced get their earlier files back.
    """
    targets = [check_writable(p, overwrite=overwrite) for p in paths]
    temps: list[Path] = []
    try:
        for t in targets:
            try:
                _make_folder(t.parent)
                temps.append(_temp_file(t))
            except OSError as exc:
                raise SkipwiseError(os_error_problem(exc, path=t)) from None
            _SHOWN[temps[-1]] = t
        try:
            yield temps
        except OSError as exc:  # a write into one of our temporary files failed (disk full, ...)
            if exc.filename is not None and Path(os.fsdecode(exc.filename)) not in temps:
                raise
            raise SkipwiseError(os_error_problem(exc, path=targets[0] if len(targets) == 1 else None)) from None
        try:
            for tmp in temps:
                _fsync_path(tmp)
            with _uninterrupted():
                _commit_files(targets, temps)
            for folder in {t.parent for t in targets}:
                _fsync_path(folder)
        except OSError as exc:
            raise SkipwiseError(os_error_problem(exc)) from None
    finally:
        for tmp in temps:
            _SHOWN.pop(tmp, None)
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()


def _commit_files(targets: list[Path], temps: list[Path]) -> None:
    if len(targets) == 1:
        _hook("file")
        os.replace(temps[0], targets[0])
        return
    kept: list[tuple[Path, Path | None]] = []  # target, its earlier file kept aside
    try:
        for target, tmp in zip(targets, temps):
            old = None
            if target.exists():
                old = target.with_name(f".{target.name[:80]}.{os.getpid()}.previous")
                os.replace(target, old)
            kept.append((target, old))
            _hook("file")
            os.replace(tmp, target)
    except BaseException:
        for target, old in reversed(kept):
            if old is not None:
                os.replace(old, target)
            else:
                with contextlib.suppress(FileNotFoundError):
                    target.unlink()
        raise
    for _, old in kept:
        if old is not None:
            old.unlink()


@contextlib.contextmanager
def publish_file(path: str | Path, *, overwrite: bool = True) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; it is renamed onto ``path`` on success."""
    with publish_files([path], overwrite=overwrite) as (tmp,):
        yield tmp


# -- packages ---------------------------------------------------------------------------------
def _problem(folder: Path, message: str, hint: str | None = None,
             code: ProblemCode = ProblemCode.OUTPUT_EXISTS) -> SkipwiseError:
    return SkipwiseError(Problem(code=code, category=Category.USAGE, file=str(folder), message=message, hint=hint))


@dataclass
class PackagePublisher:
    """Build a package folder in staging and publish it whole; see the module docstring.

    Use as a context manager: entering takes the lock, repairs what a crashed run
    left and creates :attr:`staging`; :meth:`publish` swaps the package in;
    leaving removes the staging folder and releases the lock.
    """

    folder: Path
    notes: list[str] = field(default_factory=list)
    staging: Path | None = None
    _lock_fd: int | None = None
    _made: list[Path] = field(default_factory=list)

    @property
    def lock_path(self) -> Path:
        return self.folder.with_name(self.folder.name + ".lock")

    @property
    def previous(self) -> Path:
        return self.folder.with_name(f".{self.folder.name}{PREVIOUS_MARK}")

    def __enter__(self) -> "PackagePublisher":
        try:
            return self._enter()
        except OSError as exc:
            raise SkipwiseError(os_error_problem(exc, path=self.folder)) from None

    def _enter(self) -> "PackagePublisher":
        self.folder = Path(os.path.abspath(self.folder))
        missing = [p for p in [self.folder.parent, *self.folder.parent.parents] if not p.exists()]
        _make_folder(self.folder.parent)
        self._made = missing  # folders to remove again if nothing is published
        self._lock()
        try:
            self._recover()
            self.staging = Path(tempfile.mkdtemp(prefix=f".{self.folder.name[:80]}{STAGING_MARK}{os.getpid()}-",
                                                 dir=self.folder.parent))
            _SHOWN[self.staging] = self.folder
        except BaseException:
            self._unlock()
            raise
        return self

    def __exit__(self, *exc) -> None:
        try:
            if self.staging is not None:
                _SHOWN.pop(self.staging, None)
                shutil.rmtree(self.staging, ignore_errors=True)
        finally:
            self._unlock()
        for made in self._made:  # innermost first; only the ones still empty
            with contextlib.suppress(OSError):
                made.rmdir()

    # the lock
    def _lock(self) -> None:
        import fcntl

        for _ in range(20):  # retry if the lock file was replaced between our open and our lock
            fd = os.open(self.lock_path, os.O_RDWR | os.O_CREAT, 0o644)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                holder = os.pread(fd, 400, 0).decode("utf-8", "replace")
                os.close(fd)
                raise self._held(holder) from None
            except BaseException:
                os.close(fd)
                raise
            try:
                same = os.fstat(fd).st_ino == os.stat(self.lock_path).st_ino
            except FileNotFoundError:
                same = False
            if same:
                os.ftruncate(fd, 0)
                os.pwrite(fd, json.dumps({"pid": os.getpid(), "host": socket.gethostname()}).encode(), 0)
                self._lock_fd = fd
                return
            os.close(fd)
        raise _problem(self.folder, "could not take the lock of the output folder", code=ProblemCode.OUTPUT_LOCKED)

    def _held(self, text: str) -> SkipwiseError:
        try:
            info = json.loads(text)
            who = f"process {info['pid']} on host {info['host']}"
        except (ValueError, KeyError, TypeError):
            who = "another process"
        return _problem(self.folder, f"another skipwise run is writing this package: {who} holds {self.lock_path}",
                        "wait for it to finish, or choose another output.folder", ProblemCode.OUTPUT_LOCKED)

    def _unlock(self) -> None:
        if self._lock_fd is None:
            return
        with contextlib.suppress(FileNotFoundError):
            os.unlink(self.lock_path)  # while still locked: the next run makes a fresh lock file
        os.close(self._lock_fd)
        self._lock_fd = None

    # recovery: we hold the lock, so every staging folder and kept previous folder is a dead holder's
    def _recover(self) -> None:
        prefix = f".{self.folder.name[:80]}{STAGING_MARK}"
        for leftover in sorted(self.folder.parent.glob(glob_escape(prefix) + "*")):
            if leftover.is_dir():
                shutil.rmtree(leftover, ignore_errors=True)
                self.notes.append(f"removed {leftover.name}, the staging folder of an earlier run that did not finish")
        if self.folder.is_dir():  # staging folders inside the package, as earlier versions made them
            for leftover in sorted(self.folder.glob(".skipwise-run-*")):
                shutil.rmtree(leftover, ignore_errors=True)
                self.notes.append(f"removed {self.folder.name}/{leftover.name}, the staging folder of an "
                                  f"earlier run that did not finish")
        if self.previous.exists():
            if self.folder.exists():  # the swap had renamed the new package in: drop the old one
                shutil.rmtree(self.previous)
                self.notes.append(f"removed {self.previous.name}, the previous package kept by an earlier run "
                                  f"that was interrupted after publishing {self.folder.name}")
            else:  # the swap stopped between its renames: put the previous package back
                os.replace(self.previous, self.folder)
                self.notes.append(f"restored the previous package in {self.folder} (an earlier run was "
                                  f"interrupted while replacing it)")

    def check_target(self, *, overwrite: bool, names: Iterable[str] = ()) -> None:
        """Refuse a folder that is not ours to replace: a non-package, or a package without ``overwrite``."""
        if not self.folder.exists():
            return
        if not self.folder.is_dir():
            raise _problem(self.folder, "the output folder is a file", "choose another output.folder")
        present = sorted(p.name for p in self.folder.iterdir())
        if not present:
            return
        if MANIFEST not in present:
            raise _problem(self.folder, f"the output folder is not empty and holds no {MANIFEST}, so it is not a "
                           f"skipwise package ({_listed(present)}); nothing in it is moved or replaced",
                           "choose a new or empty output.folder")
        listed = _manifest_files(self.folder / MANIFEST)
        if listed is None:
            raise _problem(self.folder, f"its {MANIFEST} cannot be read, so it is not known to be a skipwise package",
                           "choose a new or empty output.folder")
        foreign = [n for n in present if n != MANIFEST and n not in listed]
        if foreign:
            raise _problem(self.folder, f"the package folder holds files its {MANIFEST} does not list "
                           f"({_listed(foreign)}); they are not skipwise's to replace",
                           "move them out of the package folder, or choose another output.folder")
        if not overwrite:
            clash = [n for n in names if n in present]
            raise SkipwiseError(
                [Problem(code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(self.folder / n),
                         message="output file already exists") for n in clash or [MANIFEST]],
                headline=f"{len(clash) or 1} output file(s) of the run are in the way (nothing was written) — "
                         f"pass --overwrite to replace the package, or choose another output.folder")

    def publish(self) -> None:
        """Swap the staged package in: old aside, new in, old removed; wholly old or wholly new."""
        try:
            self._swap()
        except OSError as exc:  # named while the staging folder is still known as the package
            raise SkipwiseError(os_error_problem(exc, path=self.folder)) from None

    def _swap(self) -> None:
        assert self.staging is not None
        for path in self.staging.iterdir():
            _fsync_path(path)
        _fsync_path(self.staging)
        with _uninterrupted():
            had_old = self.folder.exists()
            if had_old:
                _hook("aside")
                os.replace(self.folder, self.previous)
            _hook("in")
            try:
                os.replace(self.staging, self.folder)
            except BaseException:
                if had_old:
                    os.replace(self.previous, self.folder)
                raise
            _SHOWN.pop(self.staging, None)
            self.staging = None
            _fsync_path(self.folder.parent)
            if had_old:
                _hook("remove")
                shutil.rmtree(self.previous)


def _listed(names: list[str], shown: int = 5) -> str:
    more = f" and {len(names) - shown} more" if len(names) > shown else ""
    return ", ".join(names[:shown]) + more


def _manifest_files(path: Path) -> set[str] | None:
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        return {str(o["file"]) for o in doc["outputs"]}
    except (OSError, ValueError, KeyError, TypeError):
        return None


def glob_escape(text: str) -> str:
    """``text`` with glob's special characters made literal."""
    import glob

    return glob.escape(text)
