//! One axis type for every figure: linear, base-10 logarithmic, or symmetric-logarithmic
//! (asinh) scales, with tick positions chosen here so tick labels land on round values.

use plotters::coord::ranged1d::{
    KeyPointHint, KeyPointWeight, NoDefaultFormatting, Ranged, ValueFormatter,
};
use std::ops::Range;

/// How data values map onto an axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scale {
    /// Position proportional to the value.
    Linear,
    /// Position proportional to log10 of the value (values > 0).
    Log,
    /// Position proportional to asinh(value / c): linear near zero, logarithmic far from it,
    /// for quantities of either sign spread over decades (pole maps).
    SymLog(f64),
}

impl Scale {
    /// The transformed coordinate positions are linear in.
    pub fn forward(self, v: f64) -> f64 {
        match self {
            Scale::Linear => v,
            Scale::Log => v.max(f64::MIN_POSITIVE).log10(),
            Scale::SymLog(c) => (v / c).asinh(),
        }
    }

    /// The inverse of [`Scale::forward`].
    pub fn inverse(self, u: f64) -> f64 {
        match self {
            Scale::Linear => u,
            Scale::Log => 10f64.powf(u),
            Scale::SymLog(c) => c * u.sinh(),
        }
    }

    /// Short name written into the figure's metadata.
    pub fn name(self) -> String {
        match self {
            Scale::Linear => "linear".into(),
            Scale::Log => "log10".into(),
            Scale::SymLog(c) => format!("asinh:{c:e}"),
        }
    }
}

/// An axis: a value range with a scale.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Axis {
    /// Value at the low end.
    pub lo: f64,
    /// Value at the high end.
    pub hi: f64,
    /// The scale.
    pub scale: Scale,
}

impl Axis {
    /// A linear axis; a degenerate range is widened so the axis always has extent.
    pub fn linear(lo: f64, hi: f64) -> Axis {
        let (lo, hi) = widen(lo, hi);
        Axis {
            lo,
            hi,
            scale: Scale::Linear,
        }
    }

    /// A logarithmic axis over positive values.
    pub fn log(lo: f64, hi: f64) -> Axis {
        let lo = lo.max(f64::MIN_POSITIVE);
        let hi = if hi > lo * (1.0 + 1e-9) {
            hi
        } else {
            lo * 10.0
        };
        Axis {
            lo,
            hi,
            scale: Scale::Log,
        }
    }

    /// A symmetric-logarithmic axis with linear core half-width `c`.
    pub fn symlog(lo: f64, hi: f64, c: f64) -> Axis {
        let (lo, hi) = widen(lo, hi);
        Axis {
            lo,
            hi,
            scale: Scale::SymLog(c),
        }
    }

    /// Clamp a value into the axis range.
    pub fn clamp(&self, v: f64) -> f64 {
        v.clamp(self.lo, self.hi)
    }

    /// True when the value lies within the range.
    pub fn contains(&self, v: f64) -> bool {
        v >= self.lo.min(self.hi) && v <= self.hi.max(self.lo)
    }

    /// Fraction of the axis length at which `v` sits (0 at `lo`, 1 at `hi`).
    pub fn fraction(&self, v: f64) -> f64 {
        let (a, b) = (self.scale.forward(self.lo), self.scale.forward(self.hi));
        (self.scale.forward(v) - a) / (b - a)
    }

    /// Round tick values for this axis, at most about `max` of them.
    pub fn ticks(&self, max: usize) -> Vec<f64> {
        let max = max.max(2);
        match self.scale {
            Scale::Linear => linear_ticks(self.lo, self.hi, max),
            Scale::Log => log_ticks(self.lo, self.hi, max),
            Scale::SymLog(c) => symlog_ticks(self, c, max),
        }
    }

    /// Faint grid positions between the ticks (log axes: 2…9 × each decade).
    pub fn minor_ticks(&self, max: usize) -> Vec<f64> {
        match self.scale {
            Scale::Log => {
                let decades = (self.hi / self.lo).log10();
                if decades > 6.0 {
                    return Vec::new();
                }
                let mut out = Vec::new();
                let mut d = 10f64.powf(self.lo.log10().floor());
                while d <= self.hi {
                    for k in 2..10 {
                        let v = d * k as f64;
                        if v >= self.lo && v <= self.hi {
                            out.push(v);
                        }
                    }
                    d *= 10.0;
                }
                out
            }
            // One faint line between neighbouring ticks.
            Scale::Linear => linear_ticks(self.lo, self.hi, max * 2),
            Scale::SymLog(_) => Vec::new(),
        }
    }
}

fn widen(lo: f64, hi: f64) -> (f64, f64) {
    if !(lo.is_finite() && hi.is_finite()) {
        return (0.0, 1.0);
    }
    if hi > lo {
        return (lo, hi);
    }
    let m = lo.abs().max(1e-300);
    (lo - 0.5 * m, lo + 0.5 * m)
}

/// A 1-2-5 step at least `raw`.
fn nice_step(raw: f64) -> f64 {
    let e = 10f64.powf(raw.log10().floor());
    for k in [1.0, 2.0, 2.5, 5.0, 10.0] {
        if k * e >= raw * (1.0 - 1e-9) {
            return k * e;
        }
    }
    10.0 * e
}

fn linear_ticks(lo: f64, hi: f64, max: usize) -> Vec<f64> {
    let (lo, hi) = (lo.min(hi), lo.max(hi));
    let step = nice_step((hi - lo) / max as f64);
    let first = (lo / step).ceil();
    let mut out = Vec::new();
    let mut k = first;
    while k * step <= hi + step * 1e-9 {
        let v = k * step;
        // Snap values that are zero up to rounding.
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        k += 1.0;
        if out.len() > 4 * max {
            break;
        }
    }
    out
}

fn log_ticks(lo: f64, hi: f64, max: usize) -> Vec<f64> {
    let a = lo.log10();
    let b = hi.log10();
    let decades = b - a;
    if decades < 1.0 {
        // Less than a decade: 1-2-5 multiples (or a linear subdivision when even those are few).
        let mut out = Vec::new();
        let mut d = 10f64.powf(a.floor());
        while d <= hi * (1.0 + 1e-12) {
            for k in [1.0, 2.0, 5.0] {
                let v = d * k;
                if v >= lo * (1.0 - 1e-12) && v <= hi * (1.0 + 1e-12) {
                    out.push(v);
                }
            }
            d *= 10.0;
        }
        if out.len() < 3 {
            return linear_ticks(lo, hi, max.min(5));
        }
        return out;
    }
    let step = (decades / max as f64).ceil().max(1.0) as i32;
    let mut out = Vec::new();
    let mut k = a.ceil() as i32;
    // Align multi-decade steps to multiples of the step.
    if step > 1 {
        k = (k as f64 / step as f64).ceil() as i32 * step;
    }
    while (k as f64) <= b + 1e-9 {
        out.push(10f64.powi(k));
        k += step;
    }
    if decades < 2.5 {
        // Few decades: add 2× and 5× for orientation.
        let mut more = Vec::new();
        let mut d = 10f64.powf(a.floor());
        while d <= hi {
            for k in [2.0, 5.0] {
                let v = d * k;
                if v >= lo && v <= hi {
                    more.push(v);
                }
            }
            d *= 10.0;
        }
        out.extend(more);
        out.sort_by(f64::total_cmp);
    }
    out
}

fn symlog_ticks(axis: &Axis, c: f64, max: usize) -> Vec<f64> {
    let (lo, hi) = (axis.lo.min(axis.hi), axis.lo.max(axis.hi));
    let mut cand = vec![0.0];
    let top = lo.abs().max(hi.abs()).max(c);
    let mut d = 10f64.powf(c.log10().floor());
    while d <= top * 10.0 {
        cand.push(d);
        cand.push(-d);
        d *= 10.0;
    }
    cand.retain(|&v| v >= lo && v <= hi);
    cand.sort_by(f64::total_cmp);
    // Keep ticks at least a fraction of the axis apart (decades crowd near the core).
    let min_gap = 0.9 / max as f64;
    let mut out: Vec<f64> = Vec::new();
    // Zero first, then the largest magnitudes (the decades crowd near the linear core).
    let mut order: Vec<f64> = cand.clone();
    order.sort_by(|a, b| {
        (*a != 0.0)
            .cmp(&(*b != 0.0))
            .then(b.abs().total_cmp(&a.abs()))
    });
    for v in order {
        if out
            .iter()
            .all(|&w| (axis.fraction(v) - axis.fraction(w)).abs() >= min_gap)
        {
            out.push(v);
        }
    }
    out.sort_by(f64::total_cmp);
    out
}

/// A tick formatter: the value and the significant digits to write it with.
pub type TickFormat<'a> = &'a dyn Fn(f64, usize) -> String;

/// Fewest significant digits a tick label is written with.
const MIN_DIGITS: usize = 3;
/// Most significant digits before the labels switch to offsets from a reference tick.
const MAX_DIGITS: usize = 5;

/// How an axis's tick values are written so that no two labels read the same: with as few
/// significant digits as keep them distinct (at least three), or, when that would take more
/// than five, as offsets from the first tick, which the axis description then names.
#[derive(Debug, Clone, PartialEq)]
pub struct TickText {
    /// Significant digits of each label (of the offset, in offset mode).
    pub digits: usize,
    /// The reference the labels count from, when they are offsets.
    pub offset: Option<f64>,
    /// The tick values and their labels, in increasing value.
    pub labels: Vec<(f64, String)>,
}

impl TickText {
    /// Choose the writing for these ticks.
    pub fn choose(ticks: &[f64], fmt: TickFormat<'_>) -> TickText {
        for digits in MIN_DIGITS..=MAX_DIGITS {
            let labels: Vec<(f64, String)> = ticks.iter().map(|&v| (v, fmt(v, digits))).collect();
            if distinct(&labels) {
                return TickText {
                    digits,
                    offset: None,
                    labels,
                };
            }
        }
        let origin = ticks.first().copied().unwrap_or(0.0);
        let mut digits = MIN_DIGITS;
        loop {
            let labels: Vec<(f64, String)> = ticks
                .iter()
                .map(|&v| (v, offset_text(v - origin, digits, fmt)))
                .collect();
            if distinct(&labels) || digits >= 2 * MAX_DIGITS {
                return TickText {
                    digits,
                    offset: Some(origin),
                    labels,
                };
            }
            digits += 1;
        }
    }

    /// The label of a tick value (the nearest listed tick's; a value between ticks is
    /// written the same way).
    pub fn label(&self, v: f64, fmt: TickFormat<'_>) -> String {
        let near = self
            .labels
            .iter()
            .min_by(|a, b| (a.0 - v).abs().total_cmp(&(b.0 - v).abs()));
        match near {
            Some((t, l)) if (t - v).abs() <= 1e-9 * (t.abs() + (self.step())) => l.clone(),
            _ => match self.offset {
                Some(o) => offset_text(v - o, self.digits, fmt),
                None => fmt(v, self.digits),
            },
        }
    }

    /// The axis description, naming the reference when the labels are offsets.
    pub fn describe(&self, desc: &str, fmt: TickFormat<'_>) -> String {
        match self.offset {
            Some(o) => format!("{desc}, ticks counted from {}", fmt(o, 12)),
            None => desc.to_string(),
        }
    }

    fn step(&self) -> f64 {
        match self.labels.as_slice() {
            [a, b, ..] => (b.0 - a.0).abs(),
            _ => 0.0,
        }
    }
}

/// No two labels read the same (empty labels, for ticks drawn without text, aside).
fn distinct(labels: &[(f64, String)]) -> bool {
    labels
        .iter()
        .enumerate()
        .all(|(i, a)| a.1.is_empty() || labels[i + 1..].iter().all(|b| b.1 != a.1))
}

/// An offset from the reference tick: "0" for the reference itself, a sign otherwise.
fn offset_text(d: f64, digits: usize, fmt: TickFormat<'_>) -> String {
    if d == 0.0 {
        return fmt(0.0, digits);
    }
    let t = fmt(d, digits);
    if d > 0.0 { format!("+{t}") } else { t }
}

impl Ranged for Axis {
    type FormatOption = NoDefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        // The same rounding as plotters' own linear axes, applied to the transformed value.
        let frac = self.fraction(*value);
        let len = limit.1 - limit.0;
        if !frac.is_finite() {
            return if frac > 0.0 { limit.1 } else { limit.0 };
        }
        // Far outside the plot (clipped anyway) the offset is held to ±2²⁴ px, so the sum
        // cannot overflow.
        let far = f64::from(1 << 24);
        let offset = if len > 0 {
            (f64::from(len) * frac + 1e-3).floor()
        } else {
            (f64::from(len) * frac - 1e-3).ceil()
        };
        limit.0 + offset.clamp(-far, far) as i32
    }

    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        match hint.weight() {
            KeyPointWeight::Bold => self.ticks(hint.max_num_points()),
            KeyPointWeight::Any => {
                let mut v = self.minor_ticks(hint.bold_points());
                v.extend(self.ticks(hint.bold_points()));
                v
            }
        }
    }

    fn range(&self) -> Range<f64> {
        self.lo..self.hi
    }
}

impl ValueFormatter<f64> for Axis {
    fn format_ext(&self, value: &f64) -> String {
        crate::units::eng_number(*value, 3).trim_end().to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_and_inside() {
        let a = Axis::linear(-0.013, 0.047);
        let t = a.ticks(6);
        assert!(t.contains(&0.0));
        assert!(t.iter().all(|&v| (-0.013..=0.047).contains(&v)));
        let l = Axis::log(3e-7, 2e-2);
        let t = l.ticks(8);
        assert_eq!(t.first().copied(), Some(1e-6));
        assert!(
            t.iter()
                .all(|&v| (v.log10() - v.log10().round()).abs() < 1e-12)
        );
        let s = Axis::symlog(-1e6, 10.0, 0.1);
        let t = s.ticks(8);
        assert!(t.contains(&0.0) && t.contains(&-1e6));
    }

    #[test]
    fn tick_labels_stay_distinct() {
        let fmt = |v: f64, d: usize| crate::units::eng_sig(v, crate::units::Dim::Time, d);
        // 1.3095…1.3125 µs in 0.5 ns steps reads "1.31 µs" six times at three digits.
        let ticks: Vec<f64> = (0..7).map(|k| 1.3095e-6 + 0.5e-9 * k as f64).collect();
        let t = TickText::choose(&ticks, &fmt);
        assert_eq!(t.offset, None);
        assert_eq!(t.labels[0].1, "1.3095 µs");
        assert_eq!(t.labels[1].1, "1.31 µs");
        // Picosecond steps at one second need offsets.
        let ticks: Vec<f64> = (0..5).map(|k| 1.0 + 20e-12 * k as f64).collect();
        let t = TickText::choose(&ticks, &fmt);
        assert_eq!(t.offset, Some(1.0));
        let labels: Vec<&str> = t.labels.iter().map(|l| l.1.as_str()).collect();
        assert_eq!(labels, ["0 s", "+20 ps", "+40 ps", "+60 ps", "+80 ps"]);
        assert_eq!(
            t.describe("time t (s)", &fmt),
            "time t (s), ticks counted from 1 s"
        );
        // Round ticks keep three digits.
        let t = TickText::choose(&[0.0, 2e-9, 4e-9], &fmt);
        assert_eq!(t.digits, 3);
    }

    #[test]
    fn scales_invert() {
        for s in [Scale::Linear, Scale::Log, Scale::SymLog(3.0)] {
            for v in [0.5, 7.0, 1234.0] {
                assert!((s.inverse(s.forward(v)) - v).abs() < 1e-9 * v);
            }
        }
    }
}
