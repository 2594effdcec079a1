"""Progress shown on a terminal while a long job runs (tqdm, silent elsewhere)."""
from __future__ import annotations

import sys


def progress_bar(total: int, quiet: bool, desc: str, unit: str = "point"):
    """A tqdm bar on a terminal; silent when quiet or when stderr is not a terminal."""
    from tqdm import tqdm
    return tqdm(total=total, desc=desc, unit=unit, leave=False,
                disable=quiet or not sys.stderr.isatty())
