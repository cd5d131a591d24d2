#!/usr/bin/env python3
"""Render pulseplan's report bundle in headless Chromium and check that it rendered.

    python3 tests/browser/check_report.py [--bin PATH] [--keep DIR] [--quiet]

For each scenario below, runs `pulseplan plan FILE --report --out DIR`, then:
  - report.html holds no http:// or https:// reference, no script and no external stylesheet;
  - Chromium renders report.html (1200 × 3000 window, and a tall one for the figures) with no
    console errors ("Uncaught", "ERROR:…CONSOLE" in its log);
  - the screenshots are not blank, and the figures' curve colours appear in them;
  - each SVG, rendered on its own, has non-blank plot panels: the pixel variance inside every
    panel rectangle named in the SVG's metadata is well above that of an empty panel.
PNG files are decoded with zlib only (no imaging library needed).
Prints one line per check and the final line `N passed, N failed`; exits 1 on any failure.
"""

import argparse
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SCENARIOS = [
    "scenarios/lag-lead-compensator.toml",
    "scenarios/hydrophone-tank.toml",
    "scenarios/strain-bridge-stiff.toml",
    "scenarios/piezo-stage-driver.toml",
]
# Curve colours the figures use (src/report/figures/mod.rs): predicted, ideal.
PREDICTED = (0x11, 0x4B, 0x63)
IDEAL = (0xE3, 0xA2, 0x4F)

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


def screenshot(browser, url, png, size, scale=1.0):
    """Render a URL to a PNG (the window is `size` CSS px, the PNG `scale` times that);
    returns Chromium's log (stderr + stdout)."""
    profile = tempfile.mkdtemp(prefix="pulseplan-chromium-")
    try:
        cmd = [
            browser,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--no-first-run",
            "--hide-scrollbars",
            f"--user-data-dir={profile}",
            "--enable-logging=stderr",
            "--v=0",
            f"--window-size={size[0]},{size[1]}",
            f"--force-device-scale-factor={scale}",
            f"--screenshot={png}",
            url,
        ]
        r = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
        return r.stderr + r.stdout
    finally:
        shutil.rmtree(profile, ignore_errors=True)


def console_errors(log):
    bad = []
    for line in log.splitlines():
        if "Uncaught" in line or re.search(r"ERROR:.*CONSOLE", line):
            bad.append(line)
    return bad


def read_png(path):
    """Decode an 8-bit RGB/RGBA (or grey) PNG into (width, height, rows of RGB tuples)."""
    with open(path, "rb") as f:
        data = f.read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG")
    pos = 8
    idat = b""
    width = height = depth = ctype = None
    while pos < len(data):
        (length,) = struct.unpack(">I", data[pos : pos + 4])
        kind = data[pos + 4 : pos + 8]
        body = data[pos + 8 : pos + 8 + length]
        pos += 12 + length
        if kind == b"IHDR":
            width, height, depth, ctype, _, _, interlace = struct.unpack(">IIBBBBB", body)
            if depth != 8 or interlace != 0:
                raise ValueError("only 8-bit non-interlaced PNGs are handled")
        elif kind == b"IDAT":
            idat += body
        elif kind == b"IEND":
            break
    channels = {0: 1, 2: 3, 4: 2, 6: 4}[ctype]
    raw = zlib.decompress(idat)
    stride = width * channels
    rows = []
    prev = bytearray(stride)
    i = 0
    for _ in range(height):
        ftype = raw[i]
        line = bytearray(raw[i + 1 : i + 1 + stride])
        i += 1 + stride
        if ftype == 1:
            for x in range(channels, stride):
                line[x] = (line[x] + line[x - channels]) & 0xFF
        elif ftype == 2:
            for x in range(stride):
                line[x] = (line[x] + prev[x]) & 0xFF
        elif ftype == 3:
            for x in range(stride):
                left = line[x - channels] if x >= channels else 0
                line[x] = (line[x] + ((left + prev[x]) >> 1)) & 0xFF
        elif ftype == 4:
            for x in range(stride):
                a = line[x - channels] if x >= channels else 0
                b = prev[x]
                c = prev[x - channels] if x >= channels else 0
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                pr = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
                line[x] = (line[x] + pr) & 0xFF
        rows.append(bytes(line))
        prev = line
    pixels = []
    for line in rows:
        if channels >= 3:
            pixels.append([tuple(line[x : x + 3]) for x in range(0, stride, channels)])
        else:
            pixels.append([(line[x],) * 3 for x in range(0, stride, channels)])
    return width, height, pixels


def region_variance(pixels, x0, y0, x1, y1):
    vals = []
    for y in range(max(0, y0), min(len(pixels), y1)):
        row = pixels[y]
        for x in range(max(0, x0), min(len(row), x1), 2):
            r, g, b = row[x]
            vals.append(0.299 * r + 0.587 * g + 0.114 * b)
    if not vals:
        return 0.0
    m = sum(vals) / len(vals)
    return sum((v - m) ** 2 for v in vals) / len(vals)


def colour_count(pixels, rgb, tol=40):
    n = 0
    for row in pixels:
        for p in row:
            if abs(p[0] - rgb[0]) + abs(p[1] - rgb[1]) + abs(p[2] - rgb[2]) <= tol:
                n += 1
    return n


def svg_panels(svg):
    m = re.search(r'<metadata id="pulseplan-figure">(.*?)</metadata>', svg, re.S)
    panels = []
    for line in (m.group(1) if m else "").splitlines():
        t = line.split()
        if t and t[0] == "panel":
            x0, x1, y0, y1 = float(t[2]), float(t[3]), float(t[7]), float(t[8])
            panels.append((t[1], min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1)))
    size = re.search(r'<svg width="(\d+)" height="(\d+)"', svg)
    return panels, (int(size.group(1)), int(size.group(2)))


def main():
    global verbose
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", default=os.path.join(ROOT, "target", "release", "pulseplan"))
    ap.add_argument("--keep", help="keep bundles and screenshots in this folder")
    ap.add_argument("--quiet", action="store_true")
    args = ap.parse_args()
    verbose = not args.quiet
    browser = chromium()
    if browser is None:
        print("FAIL  no chromium found (install it: apt-get install -y chromium)")
        print("0 passed, 1 failed")
        return 1
    work = args.keep or tempfile.mkdtemp(prefix="pulseplan-browser-")
    os.makedirs(work, exist_ok=True)
    for scen in SCENARIOS:
        name = os.path.splitext(os.path.basename(scen))[0]
        out = os.path.join(work, name)
        r = subprocess.run(
            [args.bin, "plan", os.path.join(ROOT, scen), "--report", "--out", out, "--quiet"],
            capture_output=True,
            text=True,
        )
        check(r.returncode in (0, 1), f"{name}: plan --report exits 0 or 1 (got {r.returncode}) {r.stderr[-300:] if r.returncode > 1 else ''}")
        html_path = os.path.join(out, "report.html")
        if not os.path.exists(html_path):
            check(False, f"{name}: report.html written")
            continue
        html = open(html_path, encoding="utf-8").read()
        check(not re.search(r"https?://", html), f"{name}: no http(s):// reference in report.html")
        check("<script" not in html.lower(), f"{name}: no script in report.html")
        check(not re.search(r"<link\b|@import|url\(", html), f"{name}: no external resources")

        url = "file://" + os.path.abspath(html_path)
        png = os.path.join(work, f"{name}-top.png")
        log = screenshot(browser, url, png, (1200, 3000))
        errs = console_errors(log)
        check(not errs, f"{name}: no console errors {errs[:3]}")
        ok = os.path.exists(png)
        check(ok, f"{name}: screenshot written")
        if ok:
            w, h, px = read_png(png)
            bands = [region_variance(px, 0, y, w, y + 300) for y in range(0, 1500, 300)]
            check(min(bands) > 20.0, f"{name}: the first 1500 px of the page are not blank {[round(b) for b in bands]}")
        tall = os.path.join(work, f"{name}-full.png")
        # The whole page at half scale (decoding a PNG in pure Python is slow).
        log = screenshot(browser, url, tall, (1200, 12000), 0.5)
        errs = console_errors(log)
        check(not errs, f"{name}: no console errors (tall render) {errs[:3]}")
        if os.path.exists(tall):
            w, h, px = read_png(tall)
            n_pred = colour_count(px, PREDICTED)
            n_ideal = colour_count(px, IDEAL)
            check(n_pred > 500, f"{name}: predicted-response colour drawn ({n_pred} px)")
            check(n_ideal > 500, f"{name}: ideal-response colour drawn ({n_ideal} px)")
        for fig in ("stimulus", "response", "error", "design", "poles"):
            svg_path = os.path.join(out, f"{fig}.svg")
            svg = open(svg_path, encoding="utf-8").read()
            panels, size = svg_panels(svg)
            check(len(panels) >= 1, f"{name}/{fig}.svg: panels listed in its metadata")
            fpng = os.path.join(work, f"{name}-{fig}.png")
            log = screenshot(browser, "file://" + os.path.abspath(svg_path), fpng, size, 0.5)
            check(not console_errors(log), f"{name}/{fig}.svg: renders without console errors")
            if not os.path.exists(fpng):
                check(False, f"{name}/{fig}.svg: screenshot written")
                continue
            _, _, px = read_png(fpng)
            for pname, x0, y0, x1, y1 in panels:
                x0, y0, x1, y1 = (int(v * 0.5) for v in (x0, y0, x1, y1))
                v = region_variance(px, x0 + 2, y0 + 2, x1 - 2, y1 - 2)
                check(v > 30.0, f"{name}/{fig}.svg: panel {pname} is not blank (variance {v:.0f})")
    if not args.keep:
        shutil.rmtree(work, ignore_errors=True)
    print(f"{passed} passed, {failed} failed")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
