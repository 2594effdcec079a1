"""Writing output files safely: all or nothing, never a half-written file."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

from roundtrip.inputfile import InputError


def output_dir(path: str | os.PathLike) -> Path:
    """Create (if needed) and return the output folder; a clear error if it cannot be."""
    out = Path(path)
    if out.exists() and not out.is_dir():
        raise InputError([f"--out {str(out)!r}: exists and is not a folder."])
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError([f"--out {str(out)!r}: cannot create the folder ({exc.strerror})."]) from None
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
