"""Writing output files safely: all or nothing, never a half-written file or a mixed set.

Two tools:

* :func:`write_atomic` writes one file through a temporary file renamed into place;
* :func:`output_set` gives a command a fresh private folder beside its ``--out``
  folder, and when the command has written everything, puts the finished set in
  place of ``--out`` in one step (on Linux an atomic exchange of the two folders;
  elsewhere two renames under a lock). After Ctrl-C, an error or a concurrent
  run, ``--out`` holds either its previous complete set or the new complete set,
  never a mixture. ``--out`` is checked before any work starts: it must be a new
  folder, an empty one, or one that holds a set liftsort wrote (a manifest,
  :data:`MANIFEST`, lists the files of each set), since the folder is replaced
  as a whole.
"""
from __future__ import annotations

import contextlib
import datetime as _dt
import json
import os
import shutil
import signal
import tempfile
import threading
from pathlib import Path

from roundtrip import __version__
from roundtrip.inputfile import InputError, printable

#: The manifest of an output set, written last into the finished set.
MANIFEST = "liftsort-set.json"

#: The private folders of the sets being written in this process (see
#: :func:`remove_unfinished_sets`).
_UNFINISHED: set[Path] = set()

#: What a set written before manifests existed may hold (besides its own charts).
_OLD_SET_FILES = {"sweep.csv", "report.html"}
_OLD_SET_SUFFIXES = {".png", ".svg", ".csv", ".html"}


def output_dir(path: str | os.PathLike) -> Path:
    """Create (if needed) and return the output folder; a clear error if it cannot be."""
    out = Path(path)
    if str(path) == "":
        raise InputError(["--out '': give the name of a folder."])
    if out.exists() and not out.is_dir():
        raise InputError([f"--out {_q(out)}: exists and is not a folder."])
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError([f"--out {_q(out)}: cannot create the folder ({exc.strerror})."]) from None
    return out


def write_atomic(path: Path, data: str | bytes) -> Path:
    """Write to a temporary file beside ``path`` and rename it into place."""
    mode = "wb" if isinstance(data, bytes) else "w"
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8"})) as f:
            f.write(data)
        os.chmod(tmp, 0o666 & ~_umask())          # as an ordinary file, not mkstemp's 0600
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _q(path) -> str:
    return json.dumps(printable(str(path)), ensure_ascii=False)


# ------------------------------------------------------------------------ output sets
class OutputSet:
    """A set of output files being written (see :func:`output_set`).

    Attributes
    ----------
    final : Path
        The ``--out`` folder the finished set will become.
    folder : Path
        The private folder the command writes into meanwhile.
    """

    def __init__(self, final: Path, folder: Path, option: str):
        self.final = final
        self.folder = folder
        self.option = option

    def final_path(self, path) -> Path:
        """Where a file written into :attr:`folder` will be once the set is in place."""
        return self.final / Path(path).relative_to(self.folder)


def _is_output_set(folder: Path) -> tuple[bool, str]:
    """Whether ``folder`` may be replaced as a whole: empty, a set with a manifest, or a set
    written before manifests existed; else the name of a file liftsort did not write."""
    try:
        names = sorted(os.listdir(folder))
    except OSError as exc:
        return False, f"cannot be listed ({exc.strerror})"
    if not names:
        return True, ""
    if MANIFEST in names:
        try:
            data = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
            if isinstance(data, dict) and "liftsort_version" in data:
                return True, ""
        except (OSError, ValueError):
            pass
    visible = [n for n in names if not n.startswith(".")]
    if visible and set(visible) & _OLD_SET_FILES and all(
            Path(n).suffix in _OLD_SET_SUFFIXES and (folder / n).is_file() for n in visible):
        return True, ""
    other = next((n for n in names if n not in _OLD_SET_FILES), names[0])
    return False, f"holds {_q(other)}, which liftsort did not write"


def check_output_folder(path, option: str = "--out") -> Path:
    """The absolute ``--out`` folder, checked before any work: a clear error if a finished
    set could not be put there."""
    text = os.fspath(path)
    if text == "":
        raise InputError([f"{option} '': give the name of a folder."])
    final = Path(os.path.abspath(text))
    shown = _q(text)
    if final.is_symlink():
        if not final.resolve().is_dir():
            raise InputError([f"{option} {shown}: is a link to no folder."])
        final = final.resolve()
    if final.exists() and not final.is_dir():
        raise InputError([f"{option} {shown}: exists and is not a folder."])
    if final.parent == final:
        raise InputError([f"{option} {shown}: cannot be the root folder."])
    try:
        here = Path.cwd().resolve()
    except OSError:
        here = None
    if here is not None and (final == here or final in here.parents):
        raise InputError([f"{option} {shown}: cannot be the current folder or one that holds "
                          f"it (liftsort replaces its output folder as a whole); give a "
                          f"folder of its own."])
    if final.is_dir():
        ok, why = _is_output_set(final)
        if not ok:
            raise InputError([f"{option} {shown}: the folder {why}; liftsort replaces its output "
                              f"folder as a whole, so give a new or empty folder, or one that "
                              f"holds a previous liftsort output set."])
        if not os.access(final, os.W_OK | os.X_OK):
            raise InputError([f"{option} {shown}: the folder is not writable."])
    anchor = final.parent
    while not anchor.exists():
        anchor = anchor.parent
    if not anchor.is_dir():
        raise InputError([f"{option} {shown}: {_q(anchor)} is not a folder."])
    if not os.access(anchor, os.W_OK | os.X_OK):
        raise InputError([f"{option} {shown}: cannot write into {_q(anchor)} (not writable)."])
    return final


@contextlib.contextmanager
def output_set(path, *, option: str = "--out", command: str = ""):
    """Write a whole output set, or nothing.

    ``--out`` is checked at once (:func:`check_output_folder`), before the caller
    computes anything; the caller then writes into ``s.folder`` (a fresh private
    folder beside ``--out``). When the block ends normally, a manifest is written
    last and the folder takes the place of ``--out`` in one step; when it ends by
    an exception (Ctrl-C included), the private folder is removed and ``--out``
    is left as it was.

    Yields
    ------
    OutputSet
    """
    final = check_output_folder(path, option)
    anchor = final.parent
    while not anchor.exists():
        anchor = anchor.parent
    try:
        folder = Path(tempfile.mkdtemp(dir=anchor, prefix=f".{final.name}.liftsort-"))
    except OSError as exc:
        raise InputError([f"{option} {_q(path)}: cannot write into {_q(anchor)} "
                          f"({exc.strerror})."]) from None
    _UNFINISHED.add(folder)
    try:
        yield OutputSet(final, folder, option)
        _write_manifest(folder, command)
        os.chmod(folder, 0o777 & ~_umask())        # an ordinary folder, not mkdtemp's 0700
        with _interrupts_held():
            _UNFINISHED.discard(folder)
            _put_in_place(folder, final)
    except BaseException:
        _UNFINISHED.discard(folder)
        shutil.rmtree(folder, ignore_errors=True)
        raise


def remove_unfinished_sets() -> None:
    """Remove the private folders of the sets still being written (for a program that must
    stop at once: Ctrl-C in ``liftsort``); ``--out`` folders are never touched."""
    for folder in list(_UNFINISHED):
        shutil.rmtree(folder, ignore_errors=True)
        _UNFINISHED.discard(folder)


def _write_manifest(folder: Path, command: str) -> None:
    files = sorted(str(p.relative_to(folder)) for p in folder.rglob("*")
                   if p.is_file() and not p.name.startswith("."))
    data = {"liftsort_version": __version__, "command": command, "files": files,
            "written_at": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")}
    write_atomic(folder / MANIFEST, json.dumps(data, indent=2) + "\n")


@contextlib.contextmanager
def _interrupts_held():
    """Hold Ctrl-C while the set is put in place; raise it afterwards."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught = []
    previous = signal.signal(signal.SIGINT, lambda *_: caught.append(True))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)
    if caught:
        raise KeyboardInterrupt


@contextlib.contextmanager
def _locked(folder: Path):
    """An advisory lock on ``folder`` (POSIX), so that concurrent liftsort runs put their
    sets in place one at a time."""
    try:
        import fcntl
    except ImportError:                          # no POSIX locks: the renames still hold
        yield
        return
    fd = os.open(folder, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)


def _exchange(a: Path, b: Path) -> bool:
    """Swap two folders atomically (Linux ``renameat2`` with ``RENAME_EXCHANGE``); False
    where that is not available."""
    import sys
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    renameat2.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p,
                          ctypes.c_uint]
    done = renameat2(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange)
    return done == 0


def _put_in_place(folder: Path, final: Path) -> None:
    """``folder`` becomes ``final``; a previous set there is removed."""
    final.parent.mkdir(parents=True, exist_ok=True)
    with _locked(final.parent):
        try:
            os.rename(folder, final)                # no previous set, or an empty folder
            return
        except OSError:
            if not final.is_dir():
                raise
        ok, why = _is_output_set(final)
        if not ok:
            raise InputError([f"--out {_q(final)}: the folder {why} (it changed during the "
                              f"run); the new set is not put there."])
        if _exchange(folder, final):
            shutil.rmtree(folder, ignore_errors=True)   # now the previous set
            return
        old = folder.with_name(folder.name + "-previous")
        os.rename(final, old)
        try:
            os.rename(folder, final)
        except BaseException:
            os.rename(old, final)
            raise
        shutil.rmtree(old, ignore_errors=True)
