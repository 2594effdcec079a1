"""The client report: one self-contained, escaped HTML file with every section.

Plumbing checks of :func:`experiments.report.write_report`; the browser test
(tests/test_report_browser.py) opens the same kind of file in Chromium.
"""
from __future__ import annotations

import base64
import re
from pathlib import Path

import pytest

from experiments.report import format_number, number_label, render_report, write_report

from .report_context import HOSTILE_NAME

# The answer first, then the figures it rests on, then how they were made (issue: the
# report leads with the peak-simulated comparison and the verdict, then the bounds, then
# the method).
SECTIONS = ["answer", "results", "charts", "method", "assumptions", "sources", "inputs",
            "caution", "stamp"]


def tiny_png(path: Path) -> Path:
    """A real small PNG drawn by matplotlib (no simulation needed here)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    fig = Figure(figsize=(2, 1.5))
    FigureCanvasAgg(fig)
    fig.subplots().plot([0, 1, 2], [0, 1, 4])
    fig.savefig(path, format="png", dpi=50)
    return path


@pytest.fixture
def context(tmp_path):
    png = tiny_png(tmp_path / "chart.png")
    return {
        "title": f"{HOSTILE_NAME}: is destination control worth specifying?",
        "building": HOSTILE_NAME,
        "job": "Should the new lifts have destination control?",
        "headline": f"Yes for {HOSTILE_NAME}: grouping raises handling capacity by 41.3 %.",
        "answer_points": ["first point", f"second point about {HOSTILE_NAME}"],
        "headline_numbers": {"hc_gain_pct": 41.26, "rtt_gain_pct": 27.04, "cars_saved": 1,
                             "tiny_negative_pct": -0.04},
        "inputs": [("building", "name", HOSTILE_NAME), ("group", "cars", "4"),
                   ("group", "rated_speed_mps", 1.6)],
        "method": ["Paragraph one.", "Paragraph two."],
        "assumptions": ["Up-peak only."],
        "sources": ["ISO 8100-32:2020, clause on the round-trip time."],
        "tables": [{"title": "Rules", "columns": ["rule", "RTT [s]", "stops"],
                    "rows": [["random", 156.1412, 7], [HOSTILE_NAME, 98.9, 3]]}],
        "figures": [{"title": "A chart", "caption": f"Caption for {HOSTILE_NAME}", "png": png},
                    {"title": "Another chart.", "caption": "", "png": png}],
        "caution": "Planning estimates only.",
        "stamp": {"liftsort_version": "0.1.0", "seed": 2026, "trials": 4000,
                  "input_sha256": "ab" * 32, "generated_at": "2026-01-01 00:00 UTC"},
    }


def test_every_user_string_is_escaped(context, tmp_path):
    html = write_report(context, tmp_path / "out").read_text(encoding="utf-8")
    assert "<script" not in html.lower()
    escaped = "&lt;script&gt;alert(1)&lt;/script&gt; &amp; Co"
    # title, header, headline, point, input, table cell, caption
    assert html.count(escaped) >= 7


def test_figures_are_embedded_as_png_data_uris(context, tmp_path):
    html = render_report(context)
    sources = re.findall(r'<img\s[^>]*src="([^"]*)"', html)
    assert len(sources) == 2
    for src in sources:
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1]).startswith(b"\x89PNG\r\n\x1a\n")


def test_no_external_resource(context):
    html = render_report(context)
    assert not re.search(r"https?:", html)
    assert not re.search(r"<(script|link|iframe|object|embed)\b", html, re.I)
    assert "url(" not in html and "@import" not in html
    links = re.findall(r'(?:src|href)\s*=\s*"([^"]*)"', html)
    assert links and all(link.startswith("data:image/png;base64,") for link in links)


def test_sections_in_order_answer_first(context):
    html = render_report(context)
    positions = [html.index(f'id="{s}"') for s in SECTIONS]
    assert positions == sorted(positions)
    assert html.index("Should the new lifts") < html.index("grouping raises") < positions[1]
    for text in ("Paragraph two.", "Up-peak only.", "ISO 8100-32:2020", "Planning estimates only.",
                 "0.1.0", "2026", "4000", "ab" * 32, "2026-01-01 00:00 UTC", "first point"):
        assert text in html


def test_numbers_are_formatted_for_reading(context):
    html = render_report(context)
    keys = dict(re.findall(r'data-key="([^"]+)">([^<]*)<', html))
    assert keys == {"hc_gain_pct": "41.3", "rtt_gain_pct": "27.0", "cars_saved": "1",
                    "tiny_negative_pct": "0.0"}
    assert ">156.14<" in html and ">98.90<" in html and ">7<" in html
    assert ">1.6<" in html            # inputs are shown as read, not reformatted


def test_a_sparse_context_still_renders_with_the_standard_caution():
    html = render_report({"title": "Bare", "building": "Bare House"})
    assert "Bare House" in html and "qualified lift engineer" in html
    assert all(f'id="{s}"' in html for s in SECTIONS)


def test_written_atomically_and_replaced(context, tmp_path):
    out = tmp_path / "out"
    first = write_report(context, out)
    context["headline"] = "Second version."
    second = write_report(context, out)
    assert first == second == out / "report.html"
    assert "Second version." in second.read_text(encoding="utf-8")
    assert [p.name for p in out.iterdir()] == ["report.html"]


def test_a_missing_or_wrong_figure_is_refused(context, tmp_path):
    context["figures"] = [{"title": "t", "caption": "", "png": tmp_path / "nope.png"}]
    with pytest.raises(ValueError, match="nope.png.*cannot be read"):
        write_report(context, tmp_path / "out")
    text = tmp_path / "text.png"
    text.write_text("not a picture")
    context["figures"] = [{"title": "t", "caption": "", "png": text}]
    with pytest.raises(ValueError, match="is not a PNG file"):
        write_report(context, tmp_path / "out")
    assert not (tmp_path / "out" / "report.html").exists()


@pytest.mark.parametrize("value, decimals, text", [
    (1.25, 1, "1.2"), (-0.04, 1, "0.0"), (float("nan"), 2, "n/a"), (3, 2, "3"),
    (True, 2, "yes"), ("text", 2, "text"), (None, 2, ""), (2.0, 2, "2.00")])
def test_format_number(value, decimals, text):
    assert format_number(value, decimals) == text


def test_number_labels():
    assert number_label("hc_gain_pct") == "handling capacity gain [%]"
    assert number_label("demand_pct_5min") == "demand [% / 5 min]"
    assert number_label("Interval [s]") == "Interval [s]"
