"""Plain-text tables for the terminal (no dependencies, fast to import)."""
from __future__ import annotations

import json
import math


def fmt_number(value, digits: int = 2) -> str:
    """A number for a table cell: fixed decimals, thousands kept readable."""
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            return "-"
        return f"{value:,.{digits}f}"
    return str(value)


def key_value_table(rows: list[tuple[str, object, str]], title: str = "") -> str:
    """Rows of (label, value, unit) as an aligned two-column table."""
    cells = [(label, fmt_number(value), unit) for label, value, unit in rows]
    w0 = max(len(c[0]) for c in cells)
    w1 = max(len(c[1]) for c in cells)
    lines = [title, "-" * len(title)] if title else []
    lines += [f"{a:<{w0}}  {b:>{w1}}  {c}".rstrip() for a, b, c in cells]
    return "\n".join(lines)


def grid_table(header: list[str], rows: list[list[object]], digits: int = 2) -> str:
    """A header and rows as an aligned grid (first column left, rest right)."""
    cells = [[fmt_number(v, digits) for v in row] for row in rows]
    widths = [max(len(h), *(len(r[i]) for r in cells)) for i, h in enumerate(header)]
    def line(items):
        return "  ".join(f"{s:<{w}}" if i == 0 else f"{s:>{w}}"
                         for i, (s, w) in enumerate(zip(items, widths))).rstrip()
    return "\n".join([line(header), line(["-" * w for w in widths])] + [line(r) for r in cells])


def _plain(obj):
    """numpy scalars (np.bool_, np.int64, ...) as Python values; nothing else."""
    item = getattr(obj, "item", None)
    if item is not None and getattr(obj, "shape", None) == ():
        return item()
    raise TypeError(f"Object of type {type(obj).__name__} is not JSON serializable")


def _finite(obj):
    """Replace NaN and infinities by None (JSON null): never write invalid JSON."""
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_finite(v) for v in obj]
    return obj


def dumps(obj) -> str:
    """JSON text: numpy scalars as plain values, NaN and infinities as null."""
    return json.dumps(_finite(json.loads(json.dumps(obj, default=_plain))), indent=2, allow_nan=False)
