"""Reports and exported notebooks rendered in a real browser (Debian's headless Chromium,
driven by Playwright): key results present, SVG drawn with a size, no console errors, and a
screenshot kept under the build folder for review."""

import os
import pathlib
import re
import subprocess

import nbformat
import pytest
from nbclient import NotebookClient

ROOT = pathlib.Path(__file__).resolve().parents[2]
TARGET = pathlib.Path(os.environ.get("CARGO_TARGET_DIR", ROOT / "target"))
SHOTS = TARGET / "report-screenshots"
CHROMIUM = "/usr/bin/chromium"
# The flags Chromium needs on a machine without a network or a display (as root).
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
        "--disable-component-update", "--disable-sync"]


def stagna_bin():
    b = os.environ.get("STAGNA_BIN")
    assert b, "STAGNA_BIN is set by tests/run-all"
    return b


@pytest.fixture(scope="module")
def browser():
    from playwright.sync_api import sync_playwright

    assert pathlib.Path(CHROMIUM).exists(), "tests/run-all installs Debian's chromium"
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        yield b
        b.close()


def render(browser, path, shot):
    """Loads a local page; returns its visible text, the sizes of its SVG drawings and the
    console errors, and saves a full-page screenshot. `page.maths` (set on the function)
    holds the sizes of the MathML formulas drawn."""
    page = browser.new_page(viewport={"width": 1100, "height": 900})
    errors = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("requestfailed", lambda r: errors.append(f"request failed: {r.url}"))
    page.goto(path.as_uri(), wait_until="load")
    text = page.inner_text("body")
    # Drawings: inline SVG, or SVG/PNG images (an exported notebook), drawn with a size.
    sizes = page.eval_on_selector_all(
        "svg, img",
        "els => els.map(e => { const r = e.getBoundingClientRect();"
        " return (e.tagName === 'IMG' && !(e.complete && e.naturalWidth > 0)) ? [0, 0] : [r.width, r.height]; })",
    )
    render.maths = page.eval_on_selector_all(
        "math", "els => els.map(e => { const r = e.getBoundingClientRect(); return [r.width, r.height]; })")
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / shot), full_page=True)
    page.close()
    return text, sizes, errors


def run_report(script, tmp_path):
    """`stagna run scripts/SCRIPT.rhai --report report.html`; the report's path."""
    out = tmp_path / "out"
    r = subprocess.run(
        [stagna_bin(), "run", str(ROOT / "scripts" / f"{script}.rhai"), "-o", str(out), "--report", "report.html"],
        capture_output=True, text=True, timeout=300,
    )
    assert r.returncode == 0, r.stderr
    return out / "report.html"


def test_run_report_renders_with_results_charts_and_cautions(browser, tmp_path):
    text, sizes, errors = render(browser, run_report("demo", tmp_path), "demo-report.png")
    assert not errors, errors
    # Key results as the terminal prints them (values checked against CoolProp and iapws in
    # the end-to-end demo test): the duct's flow, the budget line per GUM 7.2.6, the main.
    for needle in ["volume flow at duct conditions: 3.741 m³/s", "y = 3.742 m³/s, u_c = 0.029 m³/s (standard, k = 1",
                   "U = 0.057 m³/s (expanded, k = 1.96, 95 % coverage)", "Neverbrook pumping station",
                   "probe certificate: U = 0.005 (k = 2)", "Caution", "licensed practice"]:
        assert needle in text, needle
    # Tables as HTML tables with units in the header, not text.
    assert re.search(r"velocity\s*\[m/s\]", text)
    # The budget chart is drawn with a size.
    assert sizes and all(w > 100 and h > 100 for w, h in sizes), sizes
    # The worked steps' formulas are MathML drawn by the browser itself (no network):
    # two per step (formula, values), each with a size.
    assert len(render.maths) >= 4 and all(w > 20 and h > 8 for w, h in render.maths), render.maths
    assert "ISO 3966" in text and "Δp = (ρ_m − ρ_f)" not in text, "formulas drawn, not printed as text"


def test_stack_run_sheets_render(browser, tmp_path):
    text, _, errors = render(browser, run_report("stack-s-type", tmp_path), "stack-report.png")
    assert not errors, errors
    assert "Stack run R2" in text and "all method checks passed: true" in text
    assert "from memory, unverified" in text, "unverified limits say so in the report too"


def test_exported_notebook_renders(browser, tmp_path):
    from nbconvert import HTMLExporter

    path = ROOT / "demo-notebooks" / "02-duct-traverse-layout-to-flow.ipynb"
    nb = nbformat.read(path, as_version=4)
    NotebookClient(nb, kernel_name="stagna", timeout=120, resources={"metadata": {"path": str(path.parent)}}).execute()
    # The basic template: the notebook's cells without the CDN scripts of the full page,
    # so it reads offline like our own reports.
    body, _ = HTMLExporter(template_name="basic").from_notebook_node(nb)
    page = tmp_path / "notebook.html"
    page.write_text(f"<!DOCTYPE html><html><head><meta charset='utf-8'><title>notebook</title></head><body>{body}</body></html>")
    text, sizes, errors = render(browser, page, "notebook-02.png")
    assert not errors, errors
    assert "A1" in text and re.search(r"volume flow 1346\d", text), text[:2000]
    assert sizes and all(w > 100 and h > 100 for w, h in sizes), sizes
