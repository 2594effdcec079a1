"""Progress shown on a terminal while a long job runs (silent elsewhere).

Two forms: a tqdm bar for a loop of known length (:func:`progress_bar`) and one line
per stage of a job, with the time since it began (:class:`Stages`), so that a user
sees something from the first second, compile time included.
"""
from __future__ import annotations

import sys
import time


def progress_bar(total: int, quiet: bool, desc: str, unit: str = "point"):
    """A tqdm bar on a terminal; silent when quiet or when stderr is not a terminal."""
    from tqdm import tqdm
    return tqdm(total=total, desc=desc, unit=unit, leave=False,
                disable=quiet or not sys.stderr.isatty())


class Stages:
    """``stages("text")`` prints "[  12.3 s] text" on stderr when it is a terminal and
    the job is not quiet; otherwise nothing."""

    def __init__(self, quiet: bool = False, stream=None):
        self.stream = sys.stderr if stream is None else stream
        self.enabled = not quiet and self.stream.isatty()
        self.start = time.perf_counter()

    def __call__(self, text: str) -> None:
        if self.enabled:
            print(f"[{time.perf_counter() - self.start:6.1f} s] {text}", file=self.stream,
                  flush=True)


def no_stages(text: str) -> None:
    """The silent stage printer."""
