// Measurements the browser check takes inside Chromium. Evaluated through the DevTools
// protocol in the page being checked (never written into the files under test); each
// function returns plain JSON.

// Every text, stroke and marker of the first SVG in the document, in the SVG's own pixels
// (the figure is shown at 1:1 from the window's top-left corner).
globalThis.ppFigure = () => {
  const svg = document.querySelector("svg");
  const origin = svg.getBoundingClientRect();
  const box = (el) => {
    const r = el.getBoundingClientRect();
    return [r.left - origin.left, r.top - origin.top, r.right - origin.left, r.bottom - origin.top];
  };
  const num = (el, name, dflt) => {
    const v = el.getAttribute(name);
    return v === null ? dflt : parseFloat(v);
  };
  const texts = [...svg.querySelectorAll("text")]
    .filter((t) => t.textContent.trim() !== "")
    .map((t) => ({
      text: t.textContent.trim(),
      box: box(t),
      fill: (t.getAttribute("fill") || "").toUpperCase(),
      size: num(t, "font-size", 0),
      rotated: (t.getAttribute("transform") || "").includes("rotate"),
    }));
  const strokes = [];
  for (const p of svg.querySelectorAll("polyline")) {
    const pts = (p.getAttribute("points") || "")
      .trim()
      .split(/\s+/)
      .filter((s) => s.includes(","))
      .map((s) => s.split(",").map(Number));
    strokes.push({
      stroke: (p.getAttribute("stroke") || "").toUpperCase(),
      width: num(p, "stroke-width", 1),
      opacity: num(p, "opacity", 1),
      pts,
    });
  }
  for (const l of svg.querySelectorAll("line")) {
    strokes.push({
      stroke: (l.getAttribute("stroke") || "").toUpperCase(),
      width: num(l, "stroke-width", 1),
      opacity: num(l, "opacity", 1),
      pts: [
        [num(l, "x1", 0), num(l, "y1", 0)],
        [num(l, "x2", 0), num(l, "y2", 0)],
      ],
    });
  }
  const circles = [...svg.querySelectorAll("circle")].map((c) => ({
    cx: num(c, "cx", 0),
    cy: num(c, "cy", 0),
    r: num(c, "r", 0),
    fill: (c.getAttribute("fill") || "").toUpperCase(),
  }));
  const meta = svg.querySelector("metadata#pulseplan-figure");
  return {
    width: num(svg, "width", origin.width),
    height: num(svg, "height", origin.height),
    meta: meta ? meta.textContent : "",
    texts,
    strokes,
    circles,
  };
};

// Decode a PNG (base64) and measure it: the luminance variance inside each region
// [x0, y0, x1, y1] (every second pixel) and how many pixels lie within `tol` (sum of channel
// differences) of each colour [r, g, b].
globalThis.ppPixels = async (b64, regions, colours, tol) => {
  const bytes = Uint8Array.from(atob(b64), (c) => c.charCodeAt(0));
  const bitmap = await createImageBitmap(new Blob([bytes], { type: "image/png" }));
  const w = bitmap.width;
  const h = bitmap.height;
  const canvas = new OffscreenCanvas(w, h);
  const g = canvas.getContext("2d");
  g.drawImage(bitmap, 0, 0);
  const d = g.getImageData(0, 0, w, h).data;
  const variance = regions.map(([x0, y0, x1, y1]) => {
    let n = 0;
    let s = 0;
    let s2 = 0;
    for (let y = Math.max(0, y0); y < Math.min(h, y1); y++) {
      for (let x = Math.max(0, x0); x < Math.min(w, x1); x += 2) {
        const i = 4 * (y * w + x);
        const v = 0.299 * d[i] + 0.587 * d[i + 1] + 0.114 * d[i + 2];
        n += 1;
        s += v;
        s2 += v * v;
      }
    }
    if (n === 0) return 0;
    const m = s / n;
    return s2 / n - m * m;
  });
  const counts = colours.map(() => 0);
  for (let i = 0; i < d.length; i += 4) {
    for (let k = 0; k < colours.length; k++) {
      const c = colours[k];
      if (Math.abs(d[i] - c[0]) + Math.abs(d[i + 1] - c[1]) + Math.abs(d[i + 2] - c[2]) <= tol) {
        counts[k] += 1;
      }
    }
  }
  return { width: w, height: h, variance, counts };
};

// The page's layout at the current window width: does anything stick out of the window?
// Lists the offenders (elements outside any box that scrolls them whose edges pass the
// window's), the tables with the width of the box that scrolls each, the summary cards'
// labels and every heading.
globalThis.ppLayout = () => {
  const doc = document.documentElement;
  const inner = window.innerWidth;
  const scrolls = (el) => {
    for (let p = el.parentElement; p; p = p.parentElement) {
      const o = getComputedStyle(p).overflowX;
      if (o === "auto" || o === "scroll" || o === "hidden") return p;
    }
    return null;
  };
  const offenders = [];
  for (const el of document.body.querySelectorAll("*")) {
    const r = el.getBoundingClientRect();
    if (r.width === 0 && r.height === 0) continue;
    // Inside a box that scrolls, the box keeps it in view; the box itself is checked.
    if (scrolls(el)) continue;
    if (r.right > inner + 0.5 || r.left < -0.5) {
      offenders.push(`${el.tagName.toLowerCase()}${el.className ? "." + el.className : ""} ${Math.round(r.left)}–${Math.round(r.right)} px`);
    }
  }
  const boxes = [...document.querySelectorAll("table")].map((t) => {
    const box = scrolls(t);
    return {
      width: t.getBoundingClientRect().width,
      box: box ? box.getBoundingClientRect().width : null,
      boxRight: box ? box.getBoundingClientRect().right : null,
    };
  });
  return {
    scrollWidth: doc.scrollWidth,
    bodyScrollWidth: document.body.scrollWidth,
    innerWidth: inner,
    offenders: offenders.slice(0, 8),
    offenderCount: offenders.length,
    tables: boxes,
    cards: [...document.querySelectorAll(".cards .card .k")].map((k) => k.textContent.trim()),
    cardValues: [...document.querySelectorAll(".cards .card .v")].map((k) => k.textContent.trim()),
    headings: [...document.querySelectorAll("h1, h2, h3")].map((h) => h.textContent.trim()),
    scrollHeight: doc.scrollHeight,
  };
};

// Computed print-relevant styles of the headings (call with print media emulated).
globalThis.ppPrintRules = () =>
  [...document.querySelectorAll("h2, h3")].map((h) => {
    const s = getComputedStyle(h);
    return { text: h.textContent.trim(), breakAfter: s.breakAfter, pageBreakAfter: s.pageBreakAfter };
  });
