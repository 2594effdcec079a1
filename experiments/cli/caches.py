"""Where compiled kernels and chart fonts are cached, chosen before numba or matplotlib loads.

numba keeps each ``@njit(cache=True)`` function's machine code on disk: in
``NUMBA_CACHE_DIR`` when that is set and writable, else in the ``__pycache__``
folder beside the source, else in a folder of the user's home. When it can
write none of them (a read-only install used by an account with no writable
home: a service, a container) it refuses to load the module at all. matplotlib
keeps its font list in ``MPLCONFIGDIR`` (default: under the home folder) and
warns on every start when it cannot.

:func:`choose_cache_folders` runs once, in :func:`experiments.cli.main`, before
anything imports numba or matplotlib. It leaves every working cache alone;
for one that cannot be written it picks, through the environment variable the
library reads, a writable folder: a persistent one under the user's cache folder
when there is one, otherwise a private temporary folder that is removed when the
command ends. In that last case the kernels are compiled afresh on every run,
and the command says so in one line.
"""
from __future__ import annotations

import importlib.util
import os
import shutil
import sys
import tempfile
from pathlib import Path

#: Packages whose modules hold cached numba functions (those not installed are skipped).
COMPILED_PACKAGES = ("roundtrip", "allocation", "batchrounds", "peak")

SLOWER_NOTE = ("liftsort: note: numba cannot write its compile cache here ({reason}); using a "
               "temporary one, so start-up will be slower (set NUMBA_CACHE_DIR to a writable "
               "folder to keep the compiled code).")


def writable_folder(path: Path) -> bool:
    """Whether ``path`` exists or can be made, and a file can be written in it (the test
    numba itself makes)."""
    try:
        os.makedirs(path, exist_ok=True)
        tempfile.TemporaryFile(dir=path).close()
    except (OSError, ValueError):
        return False
    return True


def _package_folders(names=COMPILED_PACKAGES) -> list[Path]:
    folders = []
    for name in names:
        try:
            spec = importlib.util.find_spec(name)
        except (ImportError, ValueError):
            spec = None
        if spec is not None and spec.submodule_search_locations:
            folders += [Path(p) for p in spec.submodule_search_locations]
    return folders


def _home(env) -> Path | None:
    if env.get("HOME"):
        return Path(env["HOME"])
    try:
        return Path.home()
    except (RuntimeError, KeyError):
        return None


def _user_cache_home(env) -> Path | None:
    if env.get("XDG_CACHE_HOME"):
        return Path(env["XDG_CACHE_HOME"])
    home = _home(env)
    return home / ".cache" if home is not None else None


def _matplotlib_folders(env) -> list[Path]:
    """The folders matplotlib writes to when MPLCONFIGDIR is not set."""
    home = _home(env)
    if home is None:
        return [Path("/nonexistent")]
    if sys.platform.startswith("linux"):
        config = Path(env.get("XDG_CONFIG_HOME") or home / ".config")
        cache = Path(env.get("XDG_CACHE_HOME") or home / ".cache")
        return [config / "matplotlib", cache / "matplotlib"]
    return [home / ".matplotlib"]


class CacheFolders:
    """What :func:`choose_cache_folders` chose: the note to print (or None) and the
    temporary folder to remove at the end (or None)."""

    def __init__(self, note: str | None = None, temporary: Path | None = None):
        self.note = note
        self.temporary = temporary

    def remove(self) -> None:
        if self.temporary is not None:
            shutil.rmtree(self.temporary, ignore_errors=True)
            self.temporary = None


def choose_cache_folders(environ=None, package_folders=None) -> CacheFolders:
    """Make sure numba and matplotlib can cache, changing ``environ`` only where they cannot.

    Parameters
    ----------
    environ : mapping, optional
        The environment to read and change (default ``os.environ``: numba and matplotlib
        read it when first imported, and the chart process inherits it).
    package_folders : list of Path, optional
        The folders of the packages with cached functions (default: found from
        :data:`COMPILED_PACKAGES`).

    Returns
    -------
    CacheFolders
        ``note`` is one line for stderr when the compile cache is temporary.
    """
    env = os.environ if environ is None else environ
    folders = _package_folders() if package_folders is None else package_folders
    chosen = CacheFolders()
    temporary = None

    def temporary_folder() -> Path | None:
        nonlocal temporary
        if temporary is None:
            try:
                temporary = Path(tempfile.mkdtemp(prefix="liftsort-cache-"))
            except OSError:
                return None
        return temporary

    given = env.get("NUMBA_CACHE_DIR")
    numba_ok = (given and writable_folder(Path(given))) or all(
        writable_folder(f / "__pycache__") for f in folders)
    if not numba_ok:
        user = _user_cache_home(env)
        persistent = user / "liftsort" / "numba" if user is not None else None
        if persistent is not None and writable_folder(persistent):
            env["NUMBA_CACHE_DIR"] = str(persistent)
        else:
            where = temporary_folder()
            reason = (f"NUMBA_CACHE_DIR {given} is not writable" if given else
                      "neither the installed package nor the home folder is writable")
            if where is None:
                raise OSError(f"numba cannot write its compile cache ({reason}) and no "
                              f"temporary folder is writable; set NUMBA_CACHE_DIR to a "
                              f"writable folder")
            env["NUMBA_CACHE_DIR"] = str(where / "numba")
            chosen.note = SLOWER_NOTE.format(reason=reason)
    if not env.get("MPLCONFIGDIR") and not all(writable_folder(f) for f in _matplotlib_folders(env)):
        user = _user_cache_home(env)
        persistent = user / "liftsort" / "matplotlib" if user is not None else None
        if persistent is not None and writable_folder(persistent):
            env["MPLCONFIGDIR"] = str(persistent)
        elif temporary_folder() is not None:
            env["MPLCONFIGDIR"] = str(temporary / "matplotlib")
    chosen.temporary = temporary
    return chosen
