//! Where labels go: each label's box is estimated from the font's advance widths and tried at
//! candidate spots until one collides with nothing drawn — no curve's pixel path, no marker,
//! no label already placed — and stays inside its plot.
//!
//! The estimate follows the metrics of DejaVu Sans (the usual `sans-serif` of Linux browsers),
//! which is wider than most other sans faces, so boxes drawn in another face come out smaller
//! than estimated, never larger.

use plotters::style::text_anchor::{HPos, Pos, VPos};

/// A pixel rectangle: left, top, right, bottom.
pub type Rect = [f64; 4];

/// The SVG backend writes a font of nominal size `px` at `px / SVG_SCALE` pixels.
const SVG_SCALE: f64 = 1.24;
/// Ascent and descent of the face, in em (what a browser's text box spans).
const ASCENT: f64 = 0.928;
const DESCENT: f64 = 0.236;
/// Half the x-height, in em: the shift the backend applies for centred and bottom anchors.
const HALF_EX: f64 = 0.274;
/// Clear space kept between a label and anything else, px.
const CLEARANCE: f64 = 2.0;

/// Advance width of a character, in em.
fn advance(c: char) -> f64 {
    match c {
        '0'..='9' | 'µ' | '$' => 0.636,
        ' ' | '.' | ',' | '·' | ';' => 0.32,
        ':' | '|' | '/' | '\\' => 0.337,
        '(' | ')' | '[' | ']' | '{' | '}' => 0.39,
        '-' => 0.361,
        '–' | '°' => 0.5,
        '—' => 1.0,
        '%' => 0.95,
        '+' | '=' | '×' | '±' | '−' | '<' | '>' | '≤' | '≥' | '↑' | '↓' | '∞' => {
            0.838
        }
        'i' | 'j' | 'l' | 'I' | 'J' | '\'' | '′' => 0.295,
        'f' | 't' => 0.392,
        'r' | '⁺' | '⁻' | '*' => 0.42,
        'm' => 0.974,
        'w' => 0.818,
        'M' => 0.863,
        'W' => 0.989,
        'ω' | 'ψ' => 0.8,
        'A'..='Z' => 0.79,
        _ => 0.65,
    }
}

/// Width of a text at a nominal font size, px (a little generous).
pub fn text_width(text: &str, px: u32) -> f64 {
    let em = f64::from(px) / SVG_SCALE;
    text.chars().map(advance).sum::<f64>() * em * 1.02 + 1.0
}

/// The box a text anchored at a pixel occupies.
pub fn text_box(at: (f64, f64), anchor: Pos, text: &str, px: u32) -> Rect {
    let em = f64::from(px) / SVG_SCALE;
    let w = text_width(text, px);
    let x0 = match anchor.h_pos {
        HPos::Left => at.0,
        HPos::Center => at.0 - w / 2.0,
        HPos::Right => at.0 - w,
    };
    // The backend shifts the baseline by 0.76 em (top), +0.5 ex (centre) or −0.5 ex (bottom).
    let baseline = at.1
        + match anchor.v_pos {
            VPos::Top => 0.76 * em,
            VPos::Center => HALF_EX * em,
            VPos::Bottom => -HALF_EX * em,
        };
    [x0, baseline - ASCENT * em, x0 + w, baseline + DESCENT * em]
}

/// The box of a text turned to read upwards (the backend's 270° turn about the anchor).
pub fn upright_box(at: (f64, f64), anchor: Pos, text: &str, px: u32) -> Rect {
    let r = text_box(at, anchor, text, px);
    let (u0, v0, u1, v1) = (r[0] - at.0, r[1] - at.1, r[2] - at.0, r[3] - at.1);
    // rotate(270): (u, v) → (v, −u).
    [at.0 + v0, at.1 - u1, at.0 + v1, at.1 - u0]
}

/// A drawn stroke: its bounding box, half its width and its pixel path.
type Stroke = (Rect, f64, Vec<(f64, f64)>);

/// What has been drawn, in pixels, that a label must keep clear of.
#[derive(Debug, Default)]
pub struct Layout {
    /// Plot area of the panel being drawn.
    plot: Option<Rect>,
    /// Name of that panel.
    panel: String,
    /// Drawn strokes.
    strokes: Vec<Stroke>,
    /// Markers and placed labels.
    blocks: Vec<Rect>,
}

impl Layout {
    /// Start a panel: labels placed from now on stay inside `plot`.
    pub fn enter(&mut self, name: &str, plot: Rect) {
        self.plot = Some(plot);
        self.panel = name.to_string();
    }

    /// The current panel's name.
    pub fn panel(&self) -> &str {
        &self.panel
    }

    /// The current panel's plot area.
    pub fn plot(&self) -> Option<Rect> {
        self.plot
    }

    /// Record a drawn stroke.
    pub fn stroke(&mut self, pts: Vec<(f64, f64)>, width: u32) {
        if pts.len() < 2 {
            return;
        }
        let mut b = [
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ];
        for p in &pts {
            b = [b[0].min(p.0), b[1].min(p.1), b[2].max(p.0), b[3].max(p.1)];
        }
        self.strokes.push((b, f64::from(width) / 2.0, pts));
    }

    /// Record a marker or a placed label.
    pub fn block(&mut self, r: Rect) {
        self.blocks.push(r);
    }

    /// True when a box lies inside the plot and clear of every stroke, marker and label.
    pub fn free(&self, r: &Rect) -> bool {
        if let Some(p) = self.plot
            && (r[0] < p[0] + CLEARANCE
                || r[1] < p[1] + CLEARANCE
                || r[2] > p[2] - CLEARANCE
                || r[3] > p[3] - CLEARANCE)
        {
            return false;
        }
        let grown = |m: f64| [r[0] - m, r[1] - m, r[2] + m, r[3] + m];
        if self.blocks.iter().any(|b| overlaps(&grown(CLEARANCE), b)) {
            return false;
        }
        self.strokes.iter().all(|(bb, half, pts)| {
            let g = grown(CLEARANCE + half);
            !overlaps(&g, bb) || !pts.windows(2).any(|w| segment_hits(w[0], w[1], &g))
        })
    }
}

/// Candidate pixel anchors around a point, nearest first: rings of growing radius, each
/// text anchored on the side facing away from the point.
pub fn rings(at: (f64, f64)) -> Vec<((f64, f64), Pos)> {
    let mut out = Vec::new();
    for r in [10.0, 18.0, 28.0, 42.0, 60.0, 85.0, 120.0, 170.0, 240.0] {
        for k in 0..16 {
            let a = f64::from(k) * std::f64::consts::PI / 8.0;
            let (dx, dy) = (a.cos(), -a.sin());
            let h = if dx > 0.3 {
                HPos::Left
            } else if dx < -0.3 {
                HPos::Right
            } else {
                HPos::Center
            };
            let v = if dy > 0.3 {
                VPos::Top
            } else if dy < -0.3 {
                VPos::Bottom
            } else {
                VPos::Center
            };
            out.push(((at.0 + r * dx, at.1 + r * dy), Pos::new(h, v)));
        }
    }
    out
}

/// Candidate pixel anchors over a whole plot, nearest to `at` first.
pub fn sweep(plot: Rect, at: (f64, f64)) -> Vec<((f64, f64), Pos)> {
    let mut out = Vec::new();
    let mut y = plot[1];
    while y <= plot[3] {
        let mut x = plot[0];
        while x <= plot[2] {
            out.push(((x, y), Pos::new(HPos::Left, VPos::Top)));
            x += 8.0;
        }
        y += 6.0;
    }
    let d = |p: &(f64, f64)| (p.0 - at.0).powi(2) + (p.1 - at.1).powi(2);
    out.sort_by(|a, b| d(&a.0).total_cmp(&d(&b.0)));
    out
}

/// True when two rectangles share interior.
pub fn overlaps(a: &Rect, b: &Rect) -> bool {
    a[0] < b[2] && b[0] < a[2] && a[1] < b[3] && b[1] < a[3]
}

/// Liang–Barsky: does the segment a–b pass through the rectangle?
fn segment_hits(a: (f64, f64), b: (f64, f64), r: &Rect) -> bool {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-dx, a.0 - r[0]),
        (dx, r[2] - a.0),
        (-dy, a.1 - r[1]),
        (dy, r[3] - a.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return false;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
            if t0 > t1 {
                return false;
            }
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn boxes_follow_the_anchor() {
        let b = text_box((100.0, 50.0), Pos::new(HPos::Right, VPos::Top), "10 %", 14);
        assert!((b[2] - 100.0).abs() < 1e-9 && b[0] < 100.0 - 25.0);
        assert!(b[1] < 50.0 && b[3] > 50.0 + 10.0);
        let c = text_box(
            (100.0, 50.0),
            Pos::new(HPos::Left, VPos::Bottom),
            "10 %",
            14,
        );
        assert!(c[3] <= 50.0 + 1.0);
        // Turned upright and started at the anchor, the text rises above it.
        let u = upright_box(
            (100.0, 50.0),
            Pos::new(HPos::Left, VPos::Center),
            "10 %",
            14,
        );
        assert!((u[3] - 50.0).abs() < 1e-9 && u[1] < 50.0 - 25.0);
        assert!(u[0] < 100.0 && u[2] > 100.0 && u[2] - u[0] < 16.0);
    }

    #[test]
    fn strokes_and_blocks_take_room() {
        let mut l = Layout::default();
        l.enter("p", [0.0, 0.0, 400.0, 300.0]);
        l.stroke(vec![(0.0, 100.0), (400.0, 100.0)], 2);
        assert!(!l.free(&[50.0, 90.0, 120.0, 105.0]), "crossed by the line");
        assert!(l.free(&[50.0, 60.0, 120.0, 95.0]), "clear above it");
        l.block([50.0, 60.0, 120.0, 95.0]);
        assert!(!l.free(&[100.0, 70.0, 150.0, 90.0]), "on a placed label");
        assert!(!l.free(&[390.0, 10.0, 420.0, 30.0]), "outside the plot");
    }
}
