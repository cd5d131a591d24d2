//! The drawing kit every figure shares: colours, sizes, the titled frame, legends, panels,
//! tick labels, the metadata block that maps pixels back to data, and small curve helpers.

use super::axis::{Axis, TickFormat, TickText};
use super::place::{Layout, Rect, rings, sweep, text_box, upright_box};
use crate::estimate::Estimator;
use crate::network::Network;
use crate::response::{FreeResponse, Modal};
use crate::units::{Dim, eng_number, eng_sig};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontTransform;
use plotters::style::text_anchor::Pos;
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
/// Nominal size of labels inside plots.
pub(crate) const LABEL_PX: u32 = 14;

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
    /// What is drawn where, for placing labels clear of it.
    pub layout: Layout,
}

impl Meta {
    pub fn new(title: &str) -> Meta {
        Meta {
            title: title.to_string(),
            ..Meta::default()
        }
    }

    /// Record a panel's mapping from data to pixels; labels placed from now on stay in it.
    pub fn panel(&mut self, name: &str, chart: &Chart<'_, '_>, x: &Axis, y: &Axis) {
        let (x0, y0) = chart.backend_coord(&(x.lo, y.lo));
        let (x1, y1) = chart.backend_coord(&(x.hi, y.hi));
        let plot = [
            f64::from(x0.min(x1)),
            f64::from(y0.min(y1)),
            f64::from(x0.max(x1)),
            f64::from(y0.max(y1)),
        ];
        self.layout.enter(name, plot);
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

    /// Record an axis's tick labels as drawn (empty labels are not drawn).
    pub fn ticks(&mut self, panel: &str, axis: char, ticks: &TickText) {
        for (v, l) in &ticks.labels {
            if !l.is_empty() {
                self.lines.push(format!("tick {panel} {axis} {v:e} {l}"));
            }
        }
    }

    /// Record a placed label's box (pixels) and text.
    pub fn label_box(&mut self, r: &Rect, text: &str) {
        let panel = self.layout.panel().to_string();
        self.lines.push(format!(
            "label {panel} {:.0} {:.0} {:.0} {:.0} {text}",
            r[0], r[1], r[2], r[3]
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

/// Height of the title strip, px.
pub(crate) fn title_height(sub: &str) -> u32 {
    if sub.is_empty() { 34 } else { 56 }
}

/// Draw a title across the top strip and return the area below it.
pub(crate) fn titled<'a>(root: &Area<'a>, title: &str, sub: &str) -> io::Result<Area<'a>> {
    root.fill(&WHITE).map_err(pe)?;
    let (top, rest) = root.split_vertically(title_height(sub));
    title_strip(&top, title, sub)?;
    Ok(rest)
}

/// The title and subtitle, in a strip of [`title_height`] (for figures that word their
/// subtitle after drawing the rest).
pub(crate) fn title_strip(top: &Area<'_>, title: &str, sub: &str) -> io::Result<()> {
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
    Ok(())
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

/// What a panel shows: its name (in the metadata), axes, descriptions, tick formatters and an
/// optional caption above it.
pub(crate) struct PanelSpec<'s> {
    pub name: &'s str,
    pub x: Axis,
    pub y: Axis,
    pub xdesc: &'s str,
    pub ydesc: &'s str,
    pub xfmt: TickFormat<'s>,
    pub yfmt: TickFormat<'s>,
    pub caption: Option<&'s str>,
}

/// The legend of `keys` above a panel against the pulse width, with the budget and
/// rule-of-thumb lines' dashes recorded (returns the area below the legend).
pub(crate) fn width_legend<'a>(
    area: &Area<'a>,
    keys: &[Key],
    meta: &mut Meta,
) -> io::Result<Area<'a>> {
    let body = legend(area, keys, meta)?;
    meta.dash(BUDGET, "8 5");
    meta.dash(RULE, "10 4 2 4");
    Ok(body)
}

/// A panel of a relative quantity (percent ticks) against the pulse width at 50 % (log time).
pub(crate) fn width_spec<'s>(name: &'s str, x: Axis, y: Axis, ydesc: &'s str) -> PanelSpec<'s> {
    PanelSpec {
        name,
        x,
        y,
        xdesc: "pulse width at 50 % (s)",
        ydesc,
        xfmt: &time_tick,
        yfmt: &percent_tick,
        caption: None,
    }
}

/// Tick labels asked of each axis.
const X_TICKS: usize = 8;
const Y_TICKS: usize = 6;

/// Build a panel chart with our axes, grid and tick labels (distinct on every axis: see
/// [`TickText`]), and record it in the metadata.
pub(crate) fn panel<'a, 'b>(
    area: &'a Area<'b>,
    spec: &PanelSpec<'_>,
    meta: &mut Meta,
) -> io::Result<Chart<'a, 'b>> {
    let xt = TickText::choose(&spec.x.ticks(X_TICKS), spec.xfmt);
    let yt = TickText::choose(&spec.y.ticks(Y_TICKS), spec.yfmt);
    let mut b = ChartBuilder::on(area);
    b.margin_left(8)
        .margin_right(22)
        .margin_top(if spec.caption.is_some() { 4 } else { 10 })
        .x_label_area_size(48)
        .y_label_area_size(92);
    if let Some(c) = spec.caption {
        b.caption(c, (FONT, 15, FontStyle::Bold).into_font().color(&INK));
    }
    let mut chart = b.build_cartesian_2d(spec.x, spec.y).map_err(pe)?;
    let xlabel = |v: &f64| xt.label(*v, spec.xfmt);
    let ylabel = |v: &f64| yt.label(*v, spec.yfmt);
    chart
        .configure_mesh()
        .x_labels(X_TICKS)
        .y_labels(Y_TICKS)
        .max_light_lines(1)
        .light_line_style(GRID.mix(0.45))
        .bold_line_style(GRID)
        .axis_style(INK.mix(0.8))
        .label_style(font(TICK_PX))
        .axis_desc_style(font(DESC_PX))
        .x_desc(xt.describe(spec.xdesc, spec.xfmt))
        .y_desc(yt.describe(spec.ydesc, spec.yfmt))
        .x_label_formatter(&xlabel)
        .y_label_formatter(&ylabel)
        .draw()
        .map_err(pe)?;
    meta.panel(spec.name, &chart, &spec.x, &spec.y);
    meta.ticks(spec.name, 'x', &xt);
    meta.ticks(spec.name, 'y', &yt);
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
pub(crate) fn time_tick(v: f64, digits: usize) -> String {
    eng_sig(v, Dim::Time, digits)
}

/// Tick label for a plain quantity with a compound unit (e.g. "/s").
pub(crate) fn unit_tick(v: f64, unit: &str, digits: usize) -> String {
    if v == 0.0 {
        return "0".into();
    }
    format!("{}{unit}", eng_number(v, digits))
        .trim_end()
        .to_string()
}

/// Tick label for a dimensionless ratio near 1 (no prefixes, which would read as units).
pub(crate) fn ratio_tick(v: f64, digits: usize) -> String {
    if v == 0.0 {
        return "0".into();
    }
    if (1e-3..1e4).contains(&v.abs()) {
        let t = format!("{v:.*}", digits + 1);
        t.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        format!("{v:.*e}", digits.saturating_sub(1))
    }
}

/// Tick label for a fraction shown in percent.
pub(crate) fn percent_tick(v: f64, digits: usize) -> String {
    let p = v * 100.0;
    if p == 0.0 {
        return "0 %".into();
    }
    let a = p.abs();
    if (1e-4..1e5).contains(&a) {
        let t = format!("{p:.*}", digits + 3);
        let t = t.trim_end_matches('0').trim_end_matches('.');
        format!("{t} %")
    } else {
        let t = format!("{p:.*e}", digits.saturating_sub(2));
        let t = match t.split_once('e') {
            Some((m, e)) if m.contains('.') => {
                format!("{}e{e}", m.trim_end_matches('0').trim_end_matches('.'))
            }
            _ => t,
        };
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

/// Draw a curve (already in the panel's range) as one polyline, and keep labels off it.
pub(crate) fn curve(
    chart: &mut Chart<'_, '_>,
    meta: &mut Meta,
    pts: Vec<(f64, f64)>,
    colour: RGBColor,
    width: u32,
) -> io::Result<()> {
    if pts.len() < 2 {
        return Ok(());
    }
    let px: Vec<(f64, f64)> = pts
        .iter()
        .map(|p| {
            let (x, y) = chart.backend_coord(p);
            (f64::from(x), f64::from(y))
        })
        .collect();
    meta.layout.stroke(px, width);
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
    meta: &mut Meta,
    a: (f64, f64),
    b: (f64, f64),
    colour: RGBColor,
    width: u32,
) -> io::Result<()> {
    curve(chart, meta, vec![a, b], colour, width)
}

/// Draw a filled round marker, and keep labels off it.
pub(crate) fn marker(
    chart: &mut Chart<'_, '_>,
    meta: &mut Meta,
    at: (f64, f64),
    radius: u32,
    colour: RGBColor,
) -> io::Result<()> {
    block(chart, meta, at, radius);
    chart
        .draw_series(std::iter::once(Circle::new(at, radius, colour.filled())))
        .map_err(pe)?;
    Ok(())
}

/// Keep labels off a square of half-side `half` px around a data point (a marker drawn by
/// the caller).
pub(crate) fn block(chart: &Chart<'_, '_>, meta: &mut Meta, at: (f64, f64), half: u32) {
    let (x, y) = chart.backend_coord(&at);
    let (x, y, h) = (f64::from(x), f64::from(y), f64::from(half));
    meta.layout.block([x - h, y - h, x + h, y + h]);
}

/// Where a label may go: a data point, a pixel offset from it, and which point of the text
/// (see `Pos`) sits there.
#[derive(Clone, Copy)]
pub(crate) struct Spot {
    pub at: (f64, f64),
    pub offset: (i32, i32),
    pub anchor: Pos,
    /// The text turned to read upwards (the anchor as for the unturned text).
    pub upright: bool,
}

impl Spot {
    pub fn new(at: (f64, f64), offset: (i32, i32), anchor: Pos) -> Spot {
        Spot {
            at,
            offset,
            anchor,
            upright: false,
        }
    }

    /// A spot for a text turned to read upwards.
    pub fn upright(at: (f64, f64), offset: (i32, i32), anchor: Pos) -> Spot {
        Spot {
            upright: true,
            ..Spot::new(at, offset, anchor)
        }
    }
}

/// Write a label at the first of `spots` where it collides with nothing drawn so far (no
/// curve, marker or label; inside the plot). When none is free, spots nearby and then
/// anywhere in the plot are tried, nearest first. Draw every curve a label must avoid before
/// placing it. Returns false when no free place was found (the label is then drawn at the
/// first spot).
pub(crate) fn label(
    chart: &mut Chart<'_, '_>,
    meta: &mut Meta,
    spots: &[Spot],
    text: &str,
    colour: RGBColor,
) -> io::Result<bool> {
    place(chart, meta, spots, text, colour, true)
}

/// Write a label at the first free one of `spots`. With `search`, rings around the spots and
/// then the whole plot are tried too, and the label is drawn at the first spot if nothing is
/// free (returning false); without, nothing is drawn when no spot is free.
pub(crate) fn place(
    chart: &mut Chart<'_, '_>,
    meta: &mut Meta,
    spots: &[Spot],
    text: &str,
    colour: RGBColor,
    search: bool,
) -> io::Result<bool> {
    let Some(first) = spots.first() else {
        return Ok(false);
    };
    let px = |at: &(f64, f64)| {
        let (x, y) = chart.backend_coord(at);
        (f64::from(x), f64::from(y))
    };
    let origin = px(&first.at);
    let fits = |at: (f64, f64), anchor: Pos, upright: bool| {
        let r = if upright {
            upright_box(at, anchor, text, LABEL_PX)
        } else {
            text_box(at, anchor, text, LABEL_PX)
        };
        meta.layout.free(&r).then_some((at, anchor, upright, r))
    };
    let shifted = |s: &Spot| {
        let p = px(&s.at);
        (p.0 + f64::from(s.offset.0), p.1 + f64::from(s.offset.1))
    };
    let mut found = spots
        .iter()
        .find_map(|s| fits(shifted(s), s.anchor, s.upright));
    if found.is_none() && search {
        found = spots
            .iter()
            .flat_map(|s| rings(px(&s.at)))
            .find_map(|(at, anchor)| fits(at, anchor, false));
        if found.is_none()
            && let Some(plot) = meta.layout.plot()
        {
            found = sweep(plot, origin)
                .into_iter()
                .find_map(|(at, anchor)| fits(at, anchor, false));
        }
    }
    let ok = found.is_some();
    if !ok && !search {
        return Ok(false);
    }
    let (at, anchor, upright, r) = found.unwrap_or_else(|| {
        let at = shifted(first);
        let r = text_box(at, first.anchor, text, LABEL_PX);
        (at, first.anchor, false, r)
    });
    meta.layout.block(r);
    meta.label_box(&r, text);
    let offset = (
        (at.0 - origin.0).round() as i32,
        (at.1 - origin.1).round() as i32,
    );
    let mut style = font(LABEL_PX).color(&colour).pos(anchor);
    if upright {
        style = style.transform(FontTransform::Rotate270);
    }
    chart
        .draw_series(std::iter::once(
            EmptyElement::at(first.at) + Text::new(text.to_string(), offset, style),
        ))
        .map_err(pe)?;
    Ok(ok)
}
