//! The drawing kit every figure shares: colours, sizes, the titled frame, legends, panels,
//! tick labels, the metadata block that maps pixels back to data, and small curve helpers.

use super::axis::Axis;
use crate::estimate::Estimator;
use crate::network::Network;
use crate::response::{FreeResponse, Modal};
use crate::units::{Dim, eng_number, eng_sig};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::fmt::Write as _;
use std::io;

/// Near-black for text, axes and frames.
pub const INK: RGBColor = RGBColor(0x22, 0x26, 0x2B);
/// Ideal h(t): a light amber, drawn wide and underneath.
pub const IDEAL: RGBColor = RGBColor(0xE3, 0xA2, 0x4F);
/// Predicted y(t)/area: a deep blue-green, drawn thin on top.
pub const PREDICTED: RGBColor = RGBColor(0x11, 0x4B, 0x63);
/// Centroid-aligned quantities: plum.
pub const ALIGNED: RGBColor = RGBColor(0x86, 0x3D, 0x78);
/// The direct-term copy of the pulse: olive, dashed.
pub const DIRECT: RGBColor = RGBColor(0x66, 0x85, 0x2F);
/// Budget lines: brick, dashed.
pub const BUDGET: RGBColor = RGBColor(0xB0, 0x3A, 0x2E);
/// The planned width and its marker: deep plum-blue.
pub const PLANNED: RGBColor = RGBColor(0x3B, 0x2F, 0x8F);
/// The rule-of-thumb width: mid grey, dash-dot.
pub const RULE: RGBColor = RGBColor(0x6E, 0x74, 0x7A);
/// Annotation marks inside the stimulus: slate.
pub const MARK: RGBColor = RGBColor(0x3D, 0x5A, 0x80);
/// Background band marking the pulse's duration.
pub const BAND: RGBColor = RGBColor(0xDC, 0xE4, 0xEE);
/// Light grid lines.
pub const GRID: RGBColor = RGBColor(0xE4, 0xE6, 0xE9);
/// Extra colours for further curves (noise, total, per-mode components).
pub const EXTRA: [RGBColor; 4] = [
    RGBColor(0x2E, 0x7D, 0x4F),
    RGBColor(0xC2, 0x5B, 0x12),
    RGBColor(0x55, 0x55, 0x55),
    RGBColor(0x9C, 0x6B, 0xA8),
];

/// Width of every figure, px.
pub const WIDTH: u32 = 960;

pub(crate) const FONT: &str = "sans-serif";
pub(crate) const TICK_PX: u32 = 15;
pub(crate) const DESC_PX: u32 = 16;
pub(crate) const TITLE_PX: u32 = 20;

pub(crate) type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;
pub(crate) type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<Axis, Axis>>;

/// Convert a drawing error (never expected on a string backend) into an I/O error.
pub(crate) fn pe<E: std::fmt::Display>(e: E) -> io::Error {
    io::Error::other(format!("drawing a figure: {e}"))
}

/// `#RRGGBB` as the SVG backend writes it.
pub fn hex(c: RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
}

/// A legend entry.
#[derive(Debug, Clone)]
pub(crate) struct Key {
    pub colour: RGBColor,
    pub width: u32,
    pub dash: Option<&'static str>,
    pub label: String,
    /// How the swatch is drawn.
    pub shape: Swatch,
}

/// Legend swatch shapes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Swatch {
    Line,
    Dot,
    Ring,
    Cross,
}

impl Key {
    pub fn line(colour: RGBColor, width: u32, label: impl Into<String>) -> Key {
        Key {
            colour,
            width,
            dash: None,
            label: label.into(),
            shape: Swatch::Line,
        }
    }
    pub fn dashed(
        colour: RGBColor,
        width: u32,
        dash: &'static str,
        label: impl Into<String>,
    ) -> Key {
        Key {
            dash: Some(dash),
            ..Key::line(colour, width, label)
        }
    }
    pub fn marker(colour: RGBColor, label: impl Into<String>) -> Key {
        Key {
            shape: Swatch::Dot,
            ..Key::line(colour, 2, label)
        }
    }
    pub fn shaped(colour: RGBColor, shape: Swatch, label: impl Into<String>) -> Key {
        Key {
            shape,
            ..Key::line(colour, 2, label)
        }
    }
}

/// What a figure records about itself, and its finishing touches.
#[derive(Debug, Default)]
pub(crate) struct Meta {
    lines: Vec<String>,
    dashes: Vec<(String, &'static str)>,
    title: String,
}

impl Meta {
    pub fn new(title: &str) -> Meta {
        Meta {
            title: title.to_string(),
            ..Meta::default()
        }
    }

    /// Record a panel's mapping from data to pixels.
    pub fn panel(&mut self, name: &str, chart: &Chart<'_, '_>, x: &Axis, y: &Axis) {
        let (x0, y0) = chart.backend_coord(&(x.lo, y.lo));
        let (x1, y1) = chart.backend_coord(&(x.hi, y.hi));
        self.lines.push(format!(
            "panel {name} {x0} {x1} {} {:e} {:e} {y0} {y1} {} {:e} {:e}",
            x.scale.name(),
            x.lo,
            x.hi,
            y.scale.name(),
            y.lo,
            y.hi
        ));
    }

    /// Record a series' colour (unique within its panel).
    pub fn series(&mut self, panel: &str, name: &str, colour: RGBColor) {
        self.lines
            .push(format!("series {panel} {name} {}", hex(colour)));
    }

    /// Record a point of interest in data coordinates.
    pub fn point(&mut self, panel: &str, name: &str, x: f64, y: f64) {
        self.lines.push(format!("point {panel} {name} {x:e} {y:e}"));
    }

    /// Draw every stroke of this colour dashed.
    pub fn dash(&mut self, colour: RGBColor, pattern: &'static str) {
        let h = hex(colour);
        if !self.dashes.iter().any(|(c, _)| *c == h) {
            self.dashes.push((h, pattern));
        }
    }

    /// Insert the metadata and title, and apply the dash patterns.
    pub fn finish(&self, svg: String) -> String {
        let mut out = String::with_capacity(svg.len() + 1024);
        let mut rest = svg.as_str();
        if let Some(i) = rest.find("<svg")
            && let Some(j) = rest[i..].find('>')
        {
            let cut = i + j + 1;
            out.push_str(&rest[..cut]);
            let _ = write!(
                out,
                "\n<title>{}</title>\n<metadata id=\"pulseplan-figure\">\n",
                crate::report::markup::escape(&self.title)
            );
            for l in &self.lines {
                out.push_str(&crate::report::markup::escape(l));
                out.push('\n');
            }
            out.push_str("</metadata>");
            rest = &rest[cut..];
        }
        // Dash patterns: add stroke-dasharray to lines and polylines of the dashed colours;
        // round joins so wide curves stay smooth on the integer pixel grid.
        for line in rest.split_inclusive('\n') {
            let t = line.trim_start();
            let rounded;
            let line = if t.starts_with("<polyline") {
                rounded = line.replacen(
                    "<polyline",
                    "<polyline stroke-linejoin=\"round\" stroke-linecap=\"round\"",
                    1,
                );
                rounded.as_str()
            } else {
                line
            };
            if (t.starts_with("<polyline") || t.starts_with("<line"))
                && let Some((c, pat)) = self
                    .dashes
                    .iter()
                    .find(|(c, _)| line.contains(&format!("stroke=\"{c}\"")))
            {
                let needle = format!("stroke=\"{c}\"");
                out.push_str(&line.replacen(
                    &needle,
                    &format!("{needle} stroke-dasharray=\"{pat}\""),
                    1,
                ));
                continue;
            }
            out.push_str(line);
        }
        out
    }
}

/// Text style helper.
pub(crate) fn font(px: u32) -> TextStyle<'static> {
    (FONT, px).into_font().color(&INK)
}

/// Draw a title across the top strip and return the area below it.
pub(crate) fn titled<'a>(root: &Area<'a>, title: &str, sub: &str) -> io::Result<Area<'a>> {
    root.fill(&WHITE).map_err(pe)?;
    let h = if sub.is_empty() { 34 } else { 56 };
    let (top, rest) = root.split_vertically(h);
    top.draw(&Text::new(
        title.to_string(),
        (14, 8),
        (FONT, TITLE_PX)
            .into_font()
            .style(FontStyle::Bold)
            .color(&INK),
    ))
    .map_err(pe)?;
    if !sub.is_empty() {
        top.draw(&Text::new(sub.to_string(), (14, 33), font(14).color(&RULE)))
            .map_err(pe)?;
    }
    Ok(rest)
}

/// A legend row in its own strip (returns the area below it). Entries wrap to a second row.
pub(crate) fn legend<'a>(area: &Area<'a>, keys: &[Key], meta: &mut Meta) -> io::Result<Area<'a>> {
    for k in keys {
        if let Some(p) = k.dash {
            meta.dash(k.colour, p);
        }
    }
    let width = area.dim_in_pixel().0 as i32;
    // Lay out first to know how many rows are needed (about 8 px per character at 14 px).
    let mut rows: Vec<Vec<(i32, &Key)>> = vec![Vec::new()];
    let mut x = 80;
    for k in keys {
        let w = 34 + (k.label.chars().count() as i32 * 15) / 2 + 26;
        if x + w > width - 10 && !rows.last().is_some_and(Vec::is_empty) {
            rows.push(Vec::new());
            x = 80;
        }
        rows.last_mut().expect("at least one row").push((x, k));
        x += w;
    }
    let row_h = 22;
    let (strip, rest) = area.split_vertically(row_h * rows.len() as i32 + 8);
    for (r, row) in rows.iter().enumerate() {
        let y = 6 + r as i32 * row_h + 8;
        for &(x, k) in row {
            match k.shape {
                Swatch::Dot => strip
                    .draw(&Circle::new((x + 14, y), 5, k.colour.filled()))
                    .map_err(pe)?,
                Swatch::Ring => strip
                    .draw(&Circle::new((x + 14, y), 6, k.colour.stroke_width(2)))
                    .map_err(pe)?,
                Swatch::Cross => strip
                    .draw(&Cross::new((x + 14, y), 6, k.colour.stroke_width(k.width)))
                    .map_err(pe)?,
                Swatch::Line => strip
                    .draw(&PathElement::new(
                        vec![(x, y), (x + 28, y)],
                        k.colour.stroke_width(k.width),
                    ))
                    .map_err(pe)?,
            }
            strip
                .draw(&Text::new(k.label.clone(), (x + 34, y - 8), font(14)))
                .map_err(pe)?;
        }
    }
    Ok(rest)
}

/// Build a panel chart with our axes, grid and tick formatting.
#[allow(clippy::too_many_arguments)]
pub(crate) fn panel<'a, 'b>(
    area: &'a Area<'b>,
    x: Axis,
    y: Axis,
    xdesc: &str,
    ydesc: &str,
    xfmt: &dyn Fn(&f64) -> String,
    yfmt: &dyn Fn(&f64) -> String,
    caption: Option<&str>,
) -> io::Result<Chart<'a, 'b>> {
    let mut b = ChartBuilder::on(area);
    b.margin_left(8)
        .margin_right(22)
        .margin_top(if caption.is_some() { 4 } else { 10 })
        .x_label_area_size(48)
        .y_label_area_size(92);
    if let Some(c) = caption {
        b.caption(c, (FONT, 15, FontStyle::Bold).into_font().color(&INK));
    }
    let mut chart = b.build_cartesian_2d(x, y).map_err(pe)?;
    chart
        .configure_mesh()
        .x_labels(8)
        .y_labels(6)
        .max_light_lines(1)
        .light_line_style(GRID.mix(0.45))
        .bold_line_style(GRID)
        .axis_style(INK.mix(0.8))
        .label_style(font(TICK_PX))
        .axis_desc_style(font(DESC_PX))
        .x_desc(xdesc)
        .y_desc(ydesc)
        .x_label_formatter(xfmt)
        .y_label_formatter(yfmt)
        .draw()
        .map_err(pe)?;
    Ok(chart)
}

/// Thin the points of a curve to what the panel can show: per pixel column, the first, lowest,
/// highest and last point in order (every kept point is an exact sample).
pub fn decimate(points: &[(f64, f64)], x: &Axis, columns: usize) -> Vec<(f64, f64)> {
    if points.len() <= 4 * columns {
        return points.to_vec();
    }
    let mut out = Vec::with_capacity(4 * columns);
    let mut i = 0;
    while i < points.len() {
        let col = |p: &(f64, f64)| (x.fraction(p.0) * columns as f64).floor() as i64;
        let c = col(&points[i]);
        let mut j = i;
        while j < points.len() && col(&points[j]) == c {
            j += 1;
        }
        let bin = &points[i..j];
        let (mut lo, mut hi) = (0, 0);
        for (k, p) in bin.iter().enumerate() {
            if p.1 < bin[lo].1 {
                lo = k;
            }
            if p.1 > bin[hi].1 {
                hi = k;
            }
        }
        let mut keep = vec![0, lo, hi, bin.len() - 1];
        keep.sort_unstable();
        keep.dedup();
        out.extend(keep.into_iter().map(|k| bin[k]));
        i = j;
    }
    out
}

/// Range of finite y values (with a margin), for a linear axis.
pub(crate) fn y_range(values: impl IntoIterator<Item = f64>, margin: f64) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values {
        if v.is_finite() {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    }
    if !lo.is_finite() {
        return (-1.0, 1.0);
    }
    let span = (hi - lo).max(hi.abs().max(lo.abs()) * 1e-9).max(1e-300);
    (lo - margin * span, hi + margin * span)
}

/// Tick label for a time.
pub(crate) fn time_tick(v: &f64) -> String {
    eng_sig(*v, Dim::Time, 3)
}

/// Tick label for a plain quantity with a compound unit (e.g. "/s").
pub(crate) fn unit_tick(v: f64, unit: &str) -> String {
    if v == 0.0 {
        return "0".into();
    }
    format!("{}{unit}", eng_number(v, 3)).trim_end().to_string()
}

/// Tick label for a dimensionless ratio near 1 (no prefixes, which would read as units).
pub(crate) fn ratio_tick(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    if (1e-3..1e4).contains(&v.abs()) {
        let t = format!("{v:.4}");
        t.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        format!("{v:.2e}")
    }
}

/// Tick label for a fraction shown in percent.
pub(crate) fn percent_tick(v: &f64) -> String {
    let p = v * 100.0;
    if p == 0.0 {
        return "0 %".into();
    }
    let a = p.abs();
    if (1e-4..1e5).contains(&a) {
        let t = format!("{p:.6}");
        let t = t.trim_end_matches('0').trim_end_matches('.');
        format!("{t} %")
    } else {
        let t = format!("{p:.1e}").replace(".0e", "e");
        format!("{t} %")
    }
}

/// One response component: the whole network, or (when residues are unknown) one unit mode.
#[derive(Debug, Clone)]
pub(crate) struct Component {
    /// Empty for the whole network; "τ = …" for a mode.
    pub label: String,
    pub modal: Modal,
    pub h: FreeResponse,
    pub normaliser: f64,
}

/// The components a network's figures show.
pub(crate) fn components(net: &Network, est: &Estimator) -> Vec<Component> {
    if net.residues_known {
        return vec![Component {
            label: String::new(),
            modal: est.modal().clone(),
            h: est.ideal().clone(),
            normaliser: est.normaliser(),
        }];
    }
    net.modes
        .iter()
        .filter(|m| m.pole.im >= 0.0)
        .map(|m| {
            let modal = Modal::from_modes(std::slice::from_ref(m), 0.0);
            let h = modal.impulse();
            let h0 = h.at(0.0).abs();
            let normaliser = if h0 > 0.0 {
                h0
            } else {
                // Repeated time constant: h starts at 0; use the peak on a fine grid.
                let tau = m.time_constant();
                (1..2000)
                    .map(|k| h.at(tau * k as f64 / 100.0).abs())
                    .fold(0.0, f64::max)
                    .max(f64::MIN_POSITIVE)
            };
            Component {
                label: format!("τ = {}", eng_sig(m.time_constant(), Dim::Time, 4)),
                modal,
                h,
                normaliser,
            }
        })
        .collect()
}

/// Render a figure into a string: `draw` gets the root area.
pub(crate) fn render(
    height: u32,
    meta: &mut Meta,
    draw: impl FnOnce(&Area<'_>, &mut Meta) -> io::Result<()>,
) -> io::Result<String> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (WIDTH, height)).into_drawing_area();
        draw(&root, meta)?;
        root.present().map_err(pe)?;
    }
    Ok(meta.finish(buf))
}

/// Draw a curve (already in the panel's range) as one polyline.
pub(crate) fn curve(
    chart: &mut Chart<'_, '_>,
    pts: Vec<(f64, f64)>,
    colour: RGBColor,
    width: u32,
) -> io::Result<()> {
    if pts.len() < 2 {
        return Ok(());
    }
    chart
        .draw_series(std::iter::once(PathElement::new(
            pts,
            colour.stroke_width(width),
        )))
        .map_err(pe)?;
    Ok(())
}

/// Draw a straight segment between two data points.
pub(crate) fn segment(
    chart: &mut Chart<'_, '_>,
    a: (f64, f64),
    b: (f64, f64),
    colour: RGBColor,
    width: u32,
) -> io::Result<()> {
    curve(chart, vec![a, b], colour, width)
}

/// Write a label at a data point, offset by pixels, anchored as given.
pub(crate) fn label(
    chart: &mut Chart<'_, '_>,
    at: (f64, f64),
    offset: (i32, i32),
    text: &str,
    colour: RGBColor,
    anchor: plotters::style::text_anchor::Pos,
) -> io::Result<()> {
    let style = font(14).color(&colour).pos(anchor);
    chart
        .draw_series(std::iter::once(
            EmptyElement::at(at) + Text::new(text.to_string(), offset, style),
        ))
        .map_err(pe)?;
    Ok(())
}
