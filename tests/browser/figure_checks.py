"""Checks of one rendered figure, from what the browser laid out (tests/browser/measure.js:
every text's box, every stroke's points, every marker) and the figure's metadata block.

`run(figure, drawn, panels)` returns (ok, description) pairs; the caller counts them.
"""

import math
import re
from collections import namedtuple

# Colours that are background, not drawing (src/report/figures/canvas.rs): grid, band, white.
BACKGROUND = {"#E4E6E9", "#DCE4EE", "#FFFFFF"}
# Texts within this many px of each other still count as touching, not overlapping.
SLACK = 1.0

Panel = namedtuple("Panel", "name rect px py xs x ys y")


def panels(meta):
    """Panels listed in the metadata: name, pixel rectangle (x0, y0, x1, y1) and mapping."""
    out = []
    for line in meta.splitlines():
        t = line.split()
        if t and t[0] == "panel" and len(t) >= 12:
            px, py = (float(t[2]), float(t[3])), (float(t[7]), float(t[8]))
            rect = (min(px), min(py), max(px), max(py))
            x, y = (float(t[5]), float(t[6])), (float(t[10]), float(t[11]))
            out.append(Panel(t[1], rect, px, py, t[4], x, t[9], y))
    return out


def meta_rows(meta, kind):
    return [l.split() for l in meta.splitlines() if l.startswith(kind + " ")]


def meta_ticks(meta):
    """{(panel, axis): [label, …]} from `tick PANEL AXIS VALUE LABEL…` lines."""
    out = {}
    for line in meta.splitlines():
        m = re.match(r"tick (\S+) ([xy]) (\S+) (.*)$", line)
        if m:
            out.setdefault((m.group(1), m.group(2)), []).append(m.group(4).strip())
    return out


def _fwd(scale, v):
    if scale == "log10":
        return math.log10(v)
    if scale.startswith("asinh:"):
        return math.asinh(v / float(scale[6:]))
    return v


def _inv(scale, u):
    if scale == "log10":
        return 10.0**u
    if scale.startswith("asinh:"):
        return float(scale[6:]) * math.sinh(u)
    return u


def to_px(p, x, y):
    fx = (_fwd(p.xs, x) - _fwd(p.xs, p.x[0])) / (_fwd(p.xs, p.x[1]) - _fwd(p.xs, p.x[0]))
    fy = (_fwd(p.ys, y) - _fwd(p.ys, p.y[0])) / (_fwd(p.ys, p.y[1]) - _fwd(p.ys, p.y[0]))
    return p.px[0] + fx * (p.px[1] - p.px[0]), p.py[0] + fy * (p.py[1] - p.py[0])


def to_data(p, qx, qy):
    fx = (qx - p.px[0]) / (p.px[1] - p.px[0])
    fy = (qy - p.py[0]) / (p.py[1] - p.py[0])
    ux = _fwd(p.xs, p.x[0]) + fx * (_fwd(p.xs, p.x[1]) - _fwd(p.xs, p.x[0]))
    uy = _fwd(p.ys, p.y[0]) + fy * (_fwd(p.ys, p.y[1]) - _fwd(p.ys, p.y[0]))
    return _inv(p.xs, ux), _inv(p.ys, uy)


def inside(rect, q, margin=1.0):
    return rect[0] - margin <= q[0] <= rect[2] + margin and rect[1] - margin <= q[1] <= rect[3] + margin


def series_colour(meta, panel, name):
    for t in meta_rows(meta, "series"):
        if len(t) >= 4 and t[1] == panel and t[2] == name:
            return t[3].upper()
    return None


# -- tick labels -------------------------------------------------------------------------


def axis_labels(texts, p):
    """Texts drawn as tick labels of a panel: just below its x axis, just left of its y axis."""
    x0, y0, x1, y1 = p.rect
    xs, ys = [], []
    for t in texts:
        if t["rotated"]:
            continue
        bx0, by0, bx1, by1 = t["box"]
        cx, cy = (bx0 + bx1) / 2, (by0 + by1) / 2
        if y1 + 2 <= by0 <= y1 + 20 and by1 <= y1 + 34 and x0 - 40 <= cx <= x1 + 40:
            xs.append((cx, t["text"]))
        elif x0 - 24 <= bx1 <= x0 - 1 and y0 - 10 <= cy <= y1 + 10:
            ys.append((cy, t["text"]))
    return [t for _, t in sorted(xs)], [t for _, t in sorted(ys)]


def tick_checks(drawn, pans):
    listed = meta_ticks(drawn["meta"])
    for p in pans:
        xs, ys = axis_labels(drawn["texts"], p)
        for axis, labels in (("x", xs), ("y", ys)):
            dup = sorted({l for l in labels if labels.count(l) > 1})
            shown = f" {labels} (repeated: {dup})" if dup else ""
            yield (
                len(labels) >= 1 and not dup,
                f"panel {p.name}: {len(labels)} {axis} tick labels, all distinct{shown}",
            )
            want = listed.get((p.name, axis))
            same = want is not None and sorted(want) == sorted(labels)
            yield (
                same,
                f"panel {p.name}: the {axis} tick labels drawn are those its metadata lists"
                + ("" if same else f" (drawn {labels}, listed {want})"),
            )


# -- overlaps ----------------------------------------------------------------------------


def boxes_overlap(a, b, slack=SLACK):
    return (
        min(a[2], b[2]) - max(a[0], b[0]) > slack and min(a[3], b[3]) - max(a[1], b[1]) > slack
    )


def overlap_checks(drawn):
    texts = drawn["texts"]
    w, h = drawn["width"], drawn["height"]
    out = [t["text"] for t in texts if t["box"][0] < -SLACK or t["box"][1] < -SLACK
           or t["box"][2] > w + SLACK or t["box"][3] > h + SLACK]
    yield not out, f"every text lies inside the {w:.0f} × {h:.0f} px figure {out[:3]}"
    clashes = []
    for i, a in enumerate(texts):
        for b in texts[i + 1 :]:
            if boxes_overlap(a["box"], b["box"]):
                clashes.append(f"{a['text']!r} / {b['text']!r}")
    yield not clashes, f"no two texts overlap ({len(texts)} texts; {clashes[:4]})"


def _segment_hits_box(a, b, box):
    """Liang–Barsky clipping: does the segment a–b pass through the rectangle?"""
    x0, y0, x1, y1 = box
    dx, dy = b[0] - a[0], b[1] - a[1]
    t0, t1 = 0.0, 1.0
    for p, q in ((-dx, a[0] - x0), (dx, x1 - a[0]), (-dy, a[1] - y0), (dy, y1 - a[1])):
        if p == 0:
            if q < 0:
                return False
        else:
            r = q / p
            if p < 0:
                t0 = max(t0, r)
            else:
                t1 = min(t1, r)
            if t0 > t1:
                return False
    return True


def drawing(drawn):
    """Strokes that are drawing (not background, not the faded axes)."""
    return [
        s
        for s in drawn["strokes"]
        if s["opacity"] >= 0.99 and s["stroke"] not in BACKGROUND and len(s["pts"]) >= 2
    ]


def crossing_checks(drawn, pans):
    """Labels inside a plot are crossed by no stroke and cover no marker."""
    strokes = drawing(drawn)
    hits = []
    labels = 0
    for t in drawn["texts"]:
        bx0, by0, bx1, by1 = t["box"]
        centre = ((bx0 + bx1) / 2, (by0 + by1) / 2)
        if not any(inside(p.rect, centre, 0) for p in pans):
            continue
        labels += 1
        for s in strokes:
            grow = s["width"] / 2 - SLACK
            box = (bx0 - grow, by0 - grow, bx1 + grow, by1 + grow)
            pts = s["pts"]
            if any(_segment_hits_box(pts[k], pts[k + 1], box) for k in range(len(pts) - 1)):
                hits.append(f"{t['text']!r} × stroke {s['stroke']}")
                break
        for c in drawn["circles"]:
            qx = min(max(c["cx"], bx0), bx1)
            qy = min(max(c["cy"], by0), by1)
            if math.hypot(qx - c["cx"], qy - c["cy"]) < c["r"] - SLACK:
                hits.append(f"{t['text']!r} × marker")
                break
    yield not hits, f"no curve, line or marker crosses a label in a plot ({labels} labels; {hits[:4]})"


# -- one check per figure ------------------------------------------------------------------


def stimulus_checks(drawn, pans):
    """Nothing but the pulse's own baseline lies left of t = 0 in the whole-pulse panel."""
    p = next((q for q in pans if q.name == "pulse"), None)
    if p is None:
        yield False, "panel pulse listed"
        return
    outline = series_colour(drawn["meta"], "pulse", "u")
    x_zero = to_px(p, 0.0, p.y[0])[0]
    stray = []
    for s in drawing(drawn):
        if s["stroke"] == outline or not all(inside(p.rect, q) for q in s["pts"]):
            continue
        if any(q[0] < x_zero - 1 for q in s["pts"]):
            stray.append(f"{s['stroke']} at x = {min(q[0] for q in s['pts']):.0f} px")
    yield not stray, f"panel pulse: no mark left of t = 0 (x = {x_zero:.0f} px) {stray[:3]}"


def response_checks(drawn, pans):
    """In each panel the ideal curve moves visibly across at least a tenth of the width."""
    for name in ("main", "zoom"):
        p = next((q for q in pans if q.name == name), None)
        colour = series_colour(drawn["meta"], name, "ideal")
        if p is None or colour is None:
            yield False, f"panel {name} and its ideal series listed"
            continue
        height = p.rect[3] - p.rect[1]
        best = 0.0
        for s in drawing(drawn):
            pts = s["pts"]
            if s["stroke"] != colour or not all(inside(p.rect, q) for q in pts):
                continue
            final = pts[-1][1]
            moving = [q[0] for q in pts if abs(q[1] - final) > 0.02 * height]
            if moving:
                best = max(best, (max(moving) - min(moving)) / (p.rect[2] - p.rect[0]))
        yield best >= 0.1, f"panel {name}: h(t) visibly moves over {100 * best:.0f} % of the width (≥ 10 %)"


def design_checks(drawn, pans):
    """The sweep starts where narrower pulses do better: the error at the narrowest width
    drawn is no larger than at the planned width (a curve that starts high is cut off in the
    middle of a feature, and reads as a spike)."""
    p = next((q for q in pans if q.name == "design"), None)
    colour = series_colour(drawn["meta"], "design", "metric")
    planned = [t for t in meta_rows(drawn["meta"], "point") if t[1:3] == ["design", "planned"]]
    if p is None or colour is None or not planned:
        yield False, "panel design, its metric series and the planned point listed"
        return
    v_plan = float(planned[0][4])
    first = None
    for s in drawing(drawn):
        if s["stroke"] != colour or not all(inside(p.rect, q) for q in s["pts"]):
            continue
        q = min(s["pts"], key=lambda q: q[0])
        if first is None or q[0] < first[0]:
            first = q
    if first is None:
        yield False, "panel design: the metric curve is drawn"
        return
    # One pixel of slack: values are drawn on whole pixels.
    w, v = to_data(p, first[0], first[1] - 1.0 if p.py[0] > p.py[1] else first[1] + 1.0)
    yield (
        v <= max(v_plan, p.y[0] * 1.7),
        f"panel design: the error at the narrowest width ({100 * v:.3g} % at {w:.3g} s) is no "
        f"larger than at the planned width ({100 * v_plan:.3g} %)",
    )


def poles_checks(drawn, pans):
    """An all-real map is a strip: its height at most a quarter of its width."""
    p = next((q for q in pans if q.name == "poles"), None)
    pts = [t for t in meta_rows(drawn["meta"], "point") if len(t) >= 5 and t[1] == "poles"]
    if p is None or not pts:
        yield False, "panel poles and its poles listed"
        return
    if any(float(t[4]) != 0.0 for t in pts):
        yield True, "panel poles: complex poles, full plane shown"
        return
    w, h = p.rect[2] - p.rect[0], p.rect[3] - p.rect[1]
    yield h <= 0.25 * w, f"panel poles: all {len(pts)} poles real; the map is {w:.0f} × {h:.0f} px (height ≤ width/4)"


SPECIFIC = {
    "stimulus": stimulus_checks,
    "response": response_checks,
    "design": design_checks,
    "poles": poles_checks,
}


def run(figure, drawn, pans):
    yield from tick_checks(drawn, pans)
    yield from overlap_checks(drawn)
    yield from crossing_checks(drawn, pans)
    if figure in SPECIFIC:
        yield from SPECIFIC[figure](drawn, pans)
