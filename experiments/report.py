"""The client report: one self-contained HTML file.

:func:`write_report` renders ``experiments/templates/report.html`` with jinja2
(autoescaping on: every string from the context, the building's name
included, is shown as text and can never become markup) into ``report.html``.
The file needs nothing else to open, online or off: the charts are embedded as
base64 PNG data URIs, the style sheet is inline, there is no script, and a
Content-Security-Policy forbids the page any other resource.

Numbers are formatted here, not in the template: table cells to 2 decimals,
headline numbers to 1 decimal, each headline number in an element with
``data-key="NAME"`` so that a test can read it back.
"""
from __future__ import annotations

import base64
import math
import numbers
from importlib import resources
from pathlib import Path

from .outputs import output_dir, write_atomic
from .wording import CAUTION

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
STAMP_ORDER = ("liftsort_version", "seed", "trials", "input_sha256", "generated_at")
STAMP_LABELS = {"liftsort_version": "liftsort version", "seed": "seed",
                "trials": "trials", "input_sha256": "input file SHA-256",
                "generated_at": "generated at"}


def _is_real(value) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, (bool, numbers.Integral))


def _is_number(value) -> bool:
    return isinstance(value, numbers.Number) and not isinstance(value, bool)


def _mostly_numbers(cells) -> bool:
    """A column is right-aligned when most of its non-empty cells are numbers."""
    filled = [c for c in cells if c["text"] != ""]
    return bool(filled) and 2 * sum(c["numeric"] for c in filled) > len(filled)


def format_number(value, decimals: int) -> str:
    """A real number with ``decimals`` decimals; integers as they are; text unchanged.

    Non-finite numbers show as "n/a"; a value that rounds to zero shows
    without a minus sign.
    """
    if value is None:
        return ""
    if isinstance(value, bool) or getattr(getattr(value, "dtype", None), "kind", "") == "b":
        return "yes" if value else "no"
    if isinstance(value, numbers.Integral):
        return str(int(value))
    if _is_real(value):
        x = float(value)
        if not math.isfinite(x):
            return "n/a"
        text = f"{x:.{decimals}f}"
        return text[1:] if text.startswith("-") and float(text) == 0.0 else text
    return str(value)


_WORDS = {"hc": "handling capacity", "rtt": "round-trip time", "ci95": "95 % interval",
          "pct": "%", "5min": "per 5 min", "s": "s"}
_UNITS = (("_pct_5min", "[% / 5 min]"), ("_pct", "[%]"), ("_persons", "[persons]"),
          ("_mps", "[m/s]"), ("_s", "[s]"), ("_m", "[m]"))


def number_label(key: str) -> str:
    """A readable label for a headline number's key.

    ``hc_gain_pct`` -> "handling capacity gain [%]"; keys that are not
    snake_case (e.g. "Interval [s]") are shown as they are.
    """
    if not key or " " in key or key != key.lower():
        return key
    unit = ""
    for suffix, text in _UNITS:
        if key.endswith(suffix) and len(key) > len(suffix):
            key, unit = key[: -len(suffix)], text
            break
    words = [_WORDS.get(w, w) for w in key.split("_") if w]
    if words and words[-1] == "95 % interval":
        words = words[:-2] + [words[-2] + ",", "95 % interval (±)"] if len(words) > 1 else words
    return " ".join(words + ([unit] if unit else []))


def _data_uri(path) -> str:
    p = Path(path)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise ValueError(f"figure png = {str(p)!r}: cannot be read ({exc.strerror})") from None
    if not data.startswith(PNG_SIGNATURE):
        raise ValueError(f"figure png = {str(p)!r}: is not a PNG file")
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii")


def _view(context: dict) -> dict:
    """The template's view of the context: defaults filled in, numbers formatted."""
    c = dict(context)
    numbers_ = [{"key": str(k), "label": number_label(str(k)), "text": format_number(v, 1)}
                for k, v in (c.get("headline_numbers") or {}).items()]
    tables = []
    for t in c.get("tables") or []:
        columns = [str(x) for x in t.get("columns", [])]
        rows = [[{"text": format_number(v, 2), "numeric": _is_number(v)} for v in row]
                for row in t.get("rows", [])]
        numeric = [_mostly_numbers([r[i] for r in rows if i < len(r)]) for i in range(len(columns))]
        tables.append({"title": t.get("title", ""), "columns": list(zip(columns, numeric)),
                       "rows": rows})
    figures = [{"title": str(f.get("title", "")).rstrip(". "), "caption": f.get("caption", ""),
                "src": _data_uri(f["png"])} for f in c.get("figures") or []]
    inputs = [tuple(str(x) for x in row) for row in c.get("inputs") or []]
    stamp = dict(c.get("stamp") or {})
    stamp_rows = [(STAMP_LABELS.get(k, k.replace("_", " ")), str(stamp[k]))
                  for k in (*[k for k in STAMP_ORDER if k in stamp],
                            *[k for k in stamp if k not in STAMP_ORDER])]
    return {
        "title": c.get("title") or f"{c.get('building', '')}: lift-traffic report",
        "building": c.get("building", ""),
        "job": c.get("job", ""),
        "headline": c.get("headline", ""),
        "answer_points": list(c.get("answer_points") or []),
        "headline_numbers": numbers_,
        "inputs": inputs,
        "method": list(c.get("method") or []),
        "assumptions": list(c.get("assumptions") or []),
        "sources": list(c.get("sources") or []),
        "tables": tables,
        "figures": figures,
        "caution": c.get("caution") or CAUTION,
        "stamp": stamp_rows,
    }


def render_report(context: dict) -> str:
    """The report's HTML text for ``context`` (see :func:`write_report`)."""
    import jinja2
    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined,
                             trim_blocks=True, lstrip_blocks=True)
    source = resources.files("experiments").joinpath("templates", "report.html").read_text(
        encoding="utf-8")
    return env.from_string(source).render(**_view(context))


def write_report(context: dict, out_dir) -> Path:
    """Render the client report into ``out_dir/report.html``, atomically.

    Parameters
    ----------
    context : dict
        ``title`` (str), ``building`` (str), ``headline`` (str, the answer in
        plain words), ``answer_points`` (list of str), ``headline_numbers``
        (dict name -> number, shown to 1 decimal in ``data-key`` elements),
        ``inputs`` (list of (section, key, value)), ``method`` (list of
        paragraphs), ``assumptions`` and ``sources`` (lists of str),
        ``tables`` (list of {"title", "columns", "rows"}; real numbers shown
        to 2 decimals), ``figures`` (list of {"title", "caption", "png": path
        to a PNG file}), ``caution`` (str) and ``stamp`` (dict:
        liftsort_version, seed, trials, input_sha256, generated_at). Optional
        ``job`` (str): the question asked, shown above the answer. A missing
        key shows as an empty section (``caution`` defaults to the standard
        caution).
    out_dir : path
        Output folder (created if needed).

    Returns
    -------
    pathlib.Path
        The path of ``report.html``.

    Raises
    ------
    ValueError
        A figure's ``png`` cannot be read or is not a PNG file.
    """
    html = render_report(context)
    return write_atomic(output_dir(out_dir) / "report.html", html)
