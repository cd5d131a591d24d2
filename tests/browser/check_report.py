#!/usr/bin/env python3
"""Render pulseplan's report bundle in headless Chromium and check what a reader would see.

    python3 tests/browser/check_report.py [--bin PATH] [--keep DIR] [--quiet] [--only NAME]

One headless Chromium (driven over the DevTools protocol, tests/browser/cdp.py) serves every
check; measurements are taken by JavaScript evaluated in the page (tests/browser/measure.js),
so the report stays script-free and no file under test is changed. For each scenario below,
runs `pulseplan plan FILE --report --out DIR`, then:

  report.html
  - holds no http:// or https:// reference, no script and no external stylesheet;
  - renders (1200 px wide) with no console errors; the first 1500 px are not blank, and the
    figures' curve colours appear in a render of the whole page;
  - nothing sticks out of the window at 700 px and at 1200 px: the page does not scroll
    sideways, and every element ends inside the window or inside a box that scrolls it;
  - the summary cards include the repetition period and the sample rate;
  - printed to PDF (A4, the report's print CSS), no page ends with a heading; every heading
    keeps with what follows in the print CSS.
  each figure (SVG, rendered on its own)
  - renders without console errors; every plot panel named in its metadata is not blank;
  - tick labels are distinct on every axis (read from the rendered text next to each axis) and
    agree with the tick labels the figure lists in its metadata;
  - no two texts overlap (boxes as laid out by the browser);
  - no label inside a plot is crossed by a drawn curve, line or marker;
  - stimulus: nothing is drawn left of t = 0 apart from the pulse's own baseline;
  - response: the curves over the run visibly move over at least a tenth of the panel's width;
  - design: the curve starts where narrower pulses do better (the narrowest width's error is
    no larger than the planned width's), so it never begins on top of a hump;
  - poles: a map of real poles only spends little height on the imaginary axis.

Prints one line per check and the final line `N passed, N failed (T s)`; exits 1 on any failure.
"""

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import cdp  # noqa: E402
import figure_checks  # noqa: E402

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SCENARIOS = [
    "scenarios/lag-lead-compensator.toml",
    "scenarios/hydrophone-tank.toml",
    "scenarios/strain-bridge-stiff.toml",
    "scenarios/piezo-stage-driver.toml",
    # 200 real poles, 185 of them minor: crowded labels on the error figure and the pole map.
    "scenarios/rc-line-ladder.toml",
    # 50 real poles over six decades, most of the response in the first 2 % of the run.
    "tests/reference/scenarios/order50_interlaced.toml",
    # A minor fast mode: a hump in the design curve at its time scale.
    "tests/browser/minor-fast-mode.toml",
    # Planned for the modal fit: the readings figure.
    "scenarios/valve-positioner-fit.toml",
]
# Curve colours the figures use (src/report/figures/canvas.rs): predicted, ideal.
PREDICTED = (0x11, 0x4B, 0x63)
IDEAL = (0xE3, 0xA2, 0x4F)
WIDTHS = (700, 1200)
MEASURE_JS = os.path.join(os.path.dirname(os.path.abspath(__file__)), "measure.js")

passed = 0
failed = 0
verbose = True


def check(ok, what):
    global passed, failed
    if ok:
        passed += 1
        if verbose:
            print(f"ok    {what}")
    else:
        failed += 1
        print(f"FAIL  {what}")


def chromium():
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    return None


def load(page, url, width, height, scale=1.0):
    """Load a URL and define the measuring functions in it; returns the console errors."""
    errs = page.load(url, width, height, scale)
    with open(MEASURE_JS, encoding="utf-8") as f:
        page.eval(f.read())
    return errs


def pixels(page, b64, regions=(), colours=(), tol=40):
    return page.eval(
        f"ppPixels({b64!r}, {[list(r) for r in regions]!r}, {[list(c) for c in colours]!r}, {tol})"
    )


def plan_bundle(binary, scen, out):
    r = subprocess.run(
        [binary, "plan", os.path.join(ROOT, scen), "--report", "--out", out, "--quiet"],
        capture_output=True,
        text=True,
    )
    return r


def check_static_html(name, html):
    check(not re.search(r"https?://", html), f"{name}: no http(s):// reference in report.html")
    check("<script" not in html.lower(), f"{name}: no script in report.html")
    check(not re.search(r"<link\b|@import|url\(", html), f"{name}: no external resources")


def check_render(name, page, url, work):
    """The report at 1200 px: console, non-blank top, curve colours in the whole page."""
    errs = load(page, url, 1200, 3000)
    check(not errs, f"{name}: no console errors {errs[:3]}")
    png = os.path.join(work, f"{name}-top.png")
    b64 = page.screenshot(png, (0, 0, 1200, 1500))
    check(os.path.getsize(png) > 0, f"{name}: screenshot written")
    bands = pixels(page, b64, [(0, y, 1200, y + 300) for y in range(0, 1500, 300)])["variance"]
    check(
        min(bands) > 20.0,
        f"{name}: the first 1500 px of the page are not blank {[round(b) for b in bands]}",
    )
    height = min(page.eval("document.documentElement.scrollHeight"), 12000)
    b64 = page.screenshot(os.path.join(work, f"{name}-full.png"), (0, 0, 1200, height), 0.5)
    errs = page.console()
    check(not errs, f"{name}: no console errors (tall render) {errs[:3]}")
    n_pred, n_ideal = pixels(page, b64, colours=[PREDICTED, IDEAL])["counts"]
    check(n_pred > 500, f"{name}: predicted-response colour drawn ({n_pred} px)")
    check(n_ideal > 500, f"{name}: ideal-response colour drawn ({n_ideal} px)")


def check_layout(name, page, url, work):
    """Nothing outside the window at each width; the summary cards' contents."""
    layout = None
    for width in WIDTHS:
        errs = load(page, url, width, 900)
        check(not errs, f"{name} @{width}px: no console errors {errs[:3]}")
        layout = page.eval("ppLayout()")
        sw, iw = layout["scrollWidth"], layout["innerWidth"]
        check(sw <= iw, f"{name} @{width}px: the page does not scroll sideways (content {sw} px, window {iw} px)")
        check(
            layout["offenderCount"] == 0,
            f"{name} @{width}px: every element ends inside the window or a box that scrolls it "
            f"({layout['offenderCount']} do not: {layout['offenders'][:4]})",
        )
        loose = [t for t in layout["tables"] if t["box"] is None or t["boxRight"] > iw + 0.5]
        check(
            not loose,
            f"{name} @{width}px: every table sits in its own box within the window ({len(loose)} do not)",
        )
        if width == WIDTHS[0]:
            page.screenshot(os.path.join(work, f"{name}-{width}px.png"), (0, 0, width, 900))
    cards = " | ".join(layout["cards"])
    check("period" in cards.lower(), f"{name}: a summary card gives the repetition period ({cards})")
    check("sample rate" in cards.lower(), f"{name}: a summary card gives the sample rate ({cards})")
    return layout["headings"]


def pdf_pages(pdf):
    """Each printed page's non-empty text lines (pdftotext), or None without poppler."""
    if not shutil.which("pdftotext"):
        return None
    r = subprocess.run(["pdftotext", "-layout", pdf, "-"], capture_output=True, text=True)
    return [[l.strip() for l in p.splitlines() if l.strip()] for p in r.stdout.split("\f")]


def check_print(name, page, url, work, headings):
    """Headings keep with what follows: in the print CSS, and on the printed pages."""
    load(page, url, 1200, 900)
    page.media("print")
    rules = page.eval("ppPrintRules()")
    loose = [r["text"] for r in rules if r["breakAfter"] != "avoid"]
    check(not loose, f"{name}: print CSS keeps every heading with what follows (not: {loose[:4]})")
    page.media("")
    pdf = os.path.join(work, f"{name}.pdf")
    page.pdf(pdf)
    pages = pdf_pages(pdf)
    if pages is None:
        print(f"skip  {name}: printed pages not read (pdftotext missing: apt-get install poppler-utils)")
        return
    heads = {h for h in headings if h}
    orphans = [
        f"page {i + 1}: {lines[-1]!r}"
        for i, lines in enumerate(pages[:-1])
        if lines and lines[-1] in heads
    ]
    check(
        len(pages) > 1 and not orphans,
        f"{name}: no printed page ends with a heading ({len(pages)} pages; {orphans[:3]})",
    )


def check_figures(name, page, out, work):
    figs = ["stimulus", "response", "error", "design", "poles"]
    if os.path.exists(os.path.join(out, "readings.svg")):
        figs.append("readings")
    for fig in figs:
        svg_path = os.path.join(out, f"{fig}.svg")
        svg = open(svg_path, encoding="utf-8").read()
        size = re.search(r'<svg width="(\d+)" height="(\d+)"', svg)
        w, h = int(size.group(1)), int(size.group(2))
        errs = load(page, "file://" + os.path.abspath(svg_path), w, h)
        check(not errs, f"{name}/{fig}.svg: renders without console errors {errs[:3]}")
        drawn = page.eval("ppFigure()")
        fpng = os.path.join(work, f"{name}-{fig}.png")
        b64 = page.screenshot(fpng, (0, 0, w, h), 0.5)
        panels = figure_checks.panels(drawn["meta"])
        check(len(panels) >= 1, f"{name}/{fig}.svg: panels listed in its metadata")
        boxes = [tuple(int(v * 0.5) for v in p.rect) for p in panels]
        shrunk = [(x0 + 1, y0 + 1, x1 - 1, y1 - 1) for x0, y0, x1, y1 in boxes]
        for p, v in zip(panels, pixels(page, b64, shrunk)["variance"]):
            check(v > 30.0, f"{name}/{fig}.svg: panel {p.name} is not blank (variance {v:.0f})")
        for ok, what in figure_checks.run(fig, drawn, panels):
            check(ok, f"{name}/{fig}.svg: {what}")


def run_scenario(binary, page, scen, work):
    name = os.path.splitext(os.path.basename(scen))[0]
    out = os.path.join(work, name)
    r = plan_bundle(binary, scen, out)
    check(
        r.returncode in (0, 1),
        f"{name}: plan --report exits 0 or 1 (got {r.returncode}) {r.stderr[-300:] if r.returncode > 1 else ''}",
    )
    html_path = os.path.join(out, "report.html")
    if not os.path.exists(html_path):
        check(False, f"{name}: report.html written")
        return
    check_static_html(name, open(html_path, encoding="utf-8").read())
    url = "file://" + os.path.abspath(html_path)
    check_render(name, page, url, work)
    headings = check_layout(name, page, url, work)
    check_print(name, page, url, work, headings)
    check_figures(name, page, out, work)


def main():
    global verbose
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", default=os.path.join(ROOT, "target", "release", "pulseplan"))
    ap.add_argument("--keep", help="keep bundles, screenshots and PDFs in this folder")
    ap.add_argument("--quiet", action="store_true")
    ap.add_argument("--only", help="check only the scenarios whose file name contains this")
    args = ap.parse_args()
    verbose = not args.quiet
    started = time.monotonic()
    path = chromium()
    if path is None:
        print("FAIL  no chromium found (install it: apt-get install -y chromium)")
        print("0 passed, 1 failed")
        return 1
    work = args.keep or tempfile.mkdtemp(prefix="pulseplan-browser-")
    os.makedirs(work, exist_ok=True)
    browser = cdp.Browser(path)
    try:
        page = browser.page()
        for scen in SCENARIOS:
            if args.only and args.only not in scen:
                continue
            run_scenario(args.bin, page, scen, work)
    finally:
        browser.close()
    if not args.keep:
        shutil.rmtree(work, ignore_errors=True)
    print(f"{passed} passed, {failed} failed ({time.monotonic() - started:.0f} s)")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
