"""The client report opened in a real browser: headless Chromium (Debian's package).

The report must open offline with every chart shown, no console or page error,
no request beyond the file itself and its data URIs, no script run (the building
name holds a script tag), and the headline numbers shown must equal the JSON
numbers of the run to the precision displayed (1 decimal).

Chromium is driven by the ``playwright`` package with ``executable_path`` set to
the system browser (playwright's own browser download is not used). Without
Chromium or playwright the test is skipped on a developer's machine, but fails
in CI (the CI environment variable set), where it must run.
"""
from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from experiments.report import write_report

from .report_context import HOSTILE_NAME, tiny_context

def _find_chromium() -> Path:
    """``LIFTSORT_CHROMIUM`` if set, else ``chromium`` or ``chromium-browser`` on the PATH,
    else Debian's /usr/bin/chromium."""
    import shutil
    given = os.environ.get("LIFTSORT_CHROMIUM")
    if given:
        return Path(given)
    found = shutil.which("chromium") or shutil.which("chromium-browser")
    return Path(found) if found else Path("/usr/bin/chromium")


CHROMIUM = _find_chromium()
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _unavailable(reason: str):
    if os.environ.get("CI"):
        pytest.fail(f"{reason}: CI must run the browser test")
    pytest.skip(reason)


@pytest.fixture(scope="module")
def browser():
    if not CHROMIUM.is_file():
        _unavailable(f"Chromium not found at {CHROMIUM} (install it, e.g. `apt-get install "
                     f"chromium`, or set LIFTSORT_CHROMIUM to its path)")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        _unavailable("the playwright package is not installed (pip install '.[test]')")
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS, headless=True)
        try:
            yield b
        finally:
            b.close()


def test_report_opens_offline_with_every_chart_and_the_json_numbers(browser, tmp_path):
    context = tiny_context(tmp_path)
    report = write_report(context, tmp_path)
    # The numbers as a consumer of the JSON output would read them.
    expected = json.loads(json.dumps(context["headline_numbers"]))

    page = browser.new_page()
    errors, requests, dialogs = [], [], []
    page.on("console", lambda m: errors.append(f"console {m.type}: {m.text}")
            if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(f"page error: {e}"))
    page.on("request", lambda r: requests.append(r.url))
    page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
    try:
        page.goto(report.as_uri(), wait_until="load")

        images = page.eval_on_selector_all(
            "img", "els => els.map(e => ({complete: e.complete, width: e.naturalWidth}))")
        assert len(images) == len(context["figures"]) >= 3
        assert all(i["complete"] and i["width"] > 0 for i in images), images

        shown = page.eval_on_selector_all(
            "[data-key]", "els => els.map(e => [e.dataset.key, e.textContent.trim()])")
        assert [k for k, _ in shown] == list(expected)
        for key, text in shown:
            assert float(text) == pytest.approx(round(expected[key], 1), abs=1e-9), key

        assert page.inner_text("header .building") == HOSTILE_NAME     # shown as text
        assert page.title() == context["title"]
        assert page.evaluate("document.scripts.length") == 0
        assert dialogs == []
        assert errors == []
        assert all(u.startswith(("file:", "data:")) for u in requests), requests
    finally:
        page.close()


def test_liftsort_report_in_chromium_matches_its_json(browser, tmp_path, capsys):
    """End to end: `liftsort report --json` on an invented building whose name carries
    markup; the page shows that name as text, every chart loads, the headline numbers
    equal the JSON output, and the console stays clean."""
    from experiments.cli import main
    f = tmp_path / "b.toml"
    name = '<i>Ostler</i> & "Sons" <script>alert(2)</script>'
    f.write_text(
        f"[building]\nname = '{name}'\nfloors = 8\nfloor_height_m = 3.6\npopulation = 70\n"
        "[group]\ncars = 3\nrated_load_persons = 13\nrated_speed_mps = 1.6\n"
        "acceleration_mps2 = 1.0\njerk_mps3 = 1.5\ndoor_open_s = 1.8\ndoor_close_s = 2.9\n"
        "[traffic]\narrival_rate_pct_5min = 11.0\n", encoding="utf-8")
    assert main(["report", str(f), "--out", str(tmp_path / "out"), "--trials", "300",
                 "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    page = browser.new_page()
    errors = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(str(e)))
    try:
        page.goto(Path(out["report"]).as_uri(), wait_until="load")
        images = page.eval_on_selector_all(
            "img", "els => els.map(e => ({complete: e.complete, width: e.naturalWidth}))")
        assert len(images) >= 7 and all(i["complete"] and i["width"] > 0 for i in images)
        shown = dict(page.eval_on_selector_all(
            "[data-key]", "els => els.map(e => [e.dataset.key, e.textContent.trim()])"))
        assert set(shown) == set(out["headline_numbers"])
        for key, value in out["headline_numbers"].items():
            assert float(shown[key]) == pytest.approx(round(value, 1), abs=1e-9), key
        assert page.inner_text("header .building") == name
        assert page.evaluate("document.scripts.length") == 0
        assert errors == []
    finally:
        page.close()
