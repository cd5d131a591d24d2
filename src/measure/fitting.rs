//! The modal fit: rows for the fit (samples, or block means of a long uniform record), the
//! uniform series for the matrix pencil, starting poles (pencil at neighbouring orders, the
//! model's poles), and the choice among the refined fits by the Bayesian information
//! criterion (Schwarz 1978).

use super::capture::Capture;
use super::condition::Clipping;
use super::pencil::{self, Pencil};
use super::varpro::{self, Fit, PoleKind, Rows};
use num_complex::Complex64 as C;
use serde::Serialize;

/// Rows after the pulse while choosing the order (longer uniform records are reduced to
/// block means).
pub const SELECT_TAIL_ROWS: usize = 20_000;
/// Most rows after the pulse in any fit.
pub const MAX_TAIL_ROWS: usize = 200_000;
/// Most rows before the pulse (they carry only the baseline).
pub const MAX_PRE_ROWS: usize = 5_000;
/// A block may span at most this fraction of the fastest fitted time scale 1/|p|: the block
/// mean then keeps practically all the information of its samples (common practice, no
/// source).
pub const BLOCK_SHARE: f64 = 0.05;
/// Points of the pencil's series (the pencil matrix is a third of this wide).
const PENCIL_POINTS: usize = 400;
/// Bins used to find how far the signal reaches above the noise.
const EXTENT_BINS: usize = 2000;

/// Where the samples are, in time since time zero.
pub struct Span<'a> {
    /// The capture.
    pub cap: &'a Capture,
    /// Capture time of time zero, s.
    pub zero: f64,
    /// First instant of the pulse (≤ 0 for a measured stimulus), s.
    pub pulse_start: f64,
    /// End of the pulse T, s.
    pub pulse_end: f64,
    /// Clipped samples.
    pub clip: &'a Clipping,
}

impl Span<'_> {
    fn t(&self, i: usize) -> f64 {
        self.cap.time[i] - self.zero
    }

    /// Unclipped sample indices before the pulse and at or after its end.
    pub fn counts(&self) -> (usize, usize) {
        let n = self.cap.len();
        let pre = (0..n)
            .take_while(|&i| self.t(i) < self.pulse_start)
            .filter(|&i| !self.clip.is_clipped(i))
            .count();
        let first_tail = self.first_tail();
        let tail = (first_tail..n)
            .filter(|&i| !self.clip.is_clipped(i))
            .count();
        (pre, tail)
    }

    /// Index of the first sample at or after the pulse end.
    pub fn first_tail(&self) -> usize {
        self.cap
            .time
            .partition_point(|&t| t - self.zero < self.pulse_end)
    }
}

/// Build the fit rows. Uniform records are reduced to block means (never across a clipped
/// sample or the pulse) so that at most `max_tail` (≤ [`MAX_TAIL_ROWS`]) rows follow the
/// pulse and [`MAX_PRE_ROWS`] precede it.
pub fn rows(span: &Span, sigma: f64, drift: bool, max_tail: usize) -> Rows {
    let (pre, tail) = span.counts();
    let step = span.cap.uniform_step.unwrap_or(0.0);
    let uniform = span.cap.uniform_step.is_some();
    let block = |n: usize, max: usize| {
        if uniform { n.div_ceil(max).max(1) } else { 1 }
    };
    let n_all = span.cap.len();
    let mut rows = Rows {
        end: span.pulse_end,
        step,
        sigma,
        drift,
        drift_scale: (span.t(n_all - 1) - span.t(0)).max(f64::MIN_POSITIVE),
        ..Default::default()
    };
    let pre_end = span
        .cap
        .time
        .partition_point(|&t| t - span.zero < span.pulse_start);
    push_blocks(&mut rows, span, 0..pre_end, block(pre, MAX_PRE_ROWS));
    push_blocks(
        &mut rows,
        span,
        span.first_tail()..n_all,
        block(tail, max_tail.clamp(1, MAX_TAIL_ROWS)),
    );
    rows
}

fn push_blocks(rows: &mut Rows, span: &Span, range: std::ops::Range<usize>, b: usize) {
    let y = &span.cap.output.values;
    let mut i = range.start;
    while i < range.end {
        if span.clip.is_clipped(i) {
            i += 1;
            continue;
        }
        let mut j = i;
        let mut sum = 0.0;
        while j < range.end && j - i < b && !span.clip.is_clipped(j) {
            sum += y[j];
            j += 1;
        }
        rows.t.push(span.t(i));
        rows.y.push(sum / (j - i) as f64);
        rows.n.push((j - i) as u32);
        i = j;
    }
}

/// Baseline level of the rows before the pulse (0 without any).
pub fn pre_mean(rows: &Rows) -> f64 {
    let (s, n) = rows
        .t
        .iter()
        .zip(&rows.y)
        .zip(&rows.n)
        .filter(|((t, _), _)| **t < rows.end.min(0.0))
        .fold((0.0, 0u64), |(s, n), ((_, y), k)| {
            (s + y * *k as f64, n + *k as u64)
        });
    if n == 0 { 0.0 } else { s / n as f64 }
}

/// Bin the tail rows on [T, T + span) into `bins` equal cells (empty cells interpolated):
/// returns values (baseline removed), the cell width and the mean samples per cell.
fn bin_tail(rows: &Rows, base: f64, span: f64, bins: usize) -> (Vec<f64>, f64, f64) {
    let width = span / bins as f64;
    let mut sum = vec![0.0; bins];
    let mut cnt = vec![0.0; bins];
    for ((t, y), n) in rows.t.iter().zip(&rows.y).zip(&rows.n) {
        let tau = t - rows.end + rows.step * (*n as f64 - 1.0) / 2.0;
        if *t < rows.end || tau >= span {
            continue;
        }
        let k = ((tau / width) as usize).min(bins - 1);
        sum[k] += (y - base) * *n as f64;
        cnt[k] += *n as f64;
    }
    let filled: Vec<Option<f64>> = sum
        .iter()
        .zip(&cnt)
        .map(|(s, c)| (*c > 0.0).then(|| s / c))
        .collect();
    let per = cnt.iter().sum::<f64>() / bins as f64;
    (interpolate_gaps(&filled), width, per)
}

fn interpolate_gaps(v: &[Option<f64>]) -> Vec<f64> {
    let known: Vec<(usize, f64)> = v
        .iter()
        .enumerate()
        .filter_map(|(i, x)| x.map(|x| (i, x)))
        .collect();
    if known.is_empty() {
        return vec![0.0; v.len()];
    }
    (0..v.len())
        .map(|i| {
            let k = known.partition_point(|(j, _)| *j < i);
            match (k.checked_sub(1).map(|k| known[k]), known.get(k)) {
                (_, Some(&(j, x))) if j == i => x,
                (Some((a, xa)), Some(&(b, xb))) => xa + (xb - xa) * (i - a) as f64 / (b - a) as f64,
                (Some((_, x)), None) | (None, Some(&(_, x))) => x,
                (None, None) => 0.0,
            }
        })
        .collect()
}

/// The pencil on the tail: find how far the signal stands above the noise (last bin beyond
/// 4σ of its mean, common practice, no source), then run the pencil over 1.5× that reach.
pub fn run_pencil(rows: &Rows, forced: Option<usize>) -> Option<(Pencil, f64)> {
    let last = rows.t.last().copied()? + rows.step * (*rows.n.last()? as f64);
    let total = last - rows.end;
    if total <= 0.0 {
        return None;
    }
    let base = pre_mean(rows);
    let (coarse, width, per) = bin_tail(rows, base, total, EXTENT_BINS);
    let noise = rows.sigma / per.max(1.0).sqrt();
    let reach = coarse
        .iter()
        .rposition(|v| v.abs() > 4.0 * noise)
        .map_or(total, |k| (k + 1) as f64 * width);
    let extent = (1.5 * reach).clamp(20.0 * width, total);
    let (series, step, per) = grouped_tail(rows, base, extent)
        .unwrap_or_else(|| bin_tail(rows, base, extent, PENCIL_POINTS));
    let noise = rows.sigma / per.max(1.0).sqrt();
    pencil::pencil(&series, step, noise, forced).map(|p| (p, step))
}

/// When the tail rows are equal, back-to-back blocks (a uniform record without gaps), whole
/// groups of them make an exactly uniform series (a mean of exponentials over equal groups
/// is again a sum of the same exponentials); `None` otherwise.
fn grouped_tail(rows: &Rows, base: f64, extent: f64) -> Option<(Vec<f64>, f64, f64)> {
    let first = rows.t.iter().position(|&t| t >= rows.end)?;
    let n0 = rows.n[first];
    let block = rows.step * n0 as f64;
    if block.is_nan() || block <= 0.0 {
        return None;
    }
    let count = ((extent / block).floor() as usize).min(rows.len() - first);
    let tail = first..first + count;
    let regular = tail.clone().all(|i| {
        rows.n[i] == n0
            && (rows.t[i] - rows.t[first] - (i - first) as f64 * block).abs()
                <= 0.01 * rows.step.max(block * 1e-9)
    });
    if !regular || count < PENCIL_POINTS.min(24) {
        return None;
    }
    let g = count.div_ceil(PENCIL_POINTS).max(1);
    let series: Vec<f64> = (0..count / g)
        .map(|k| {
            let s: f64 = (0..g).map(|j| rows.y[first + k * g + j]).sum();
            s / g as f64 - base
        })
        .collect();
    Some((series, g as f64 * block, (g * n0 as usize) as f64))
}

/// How a start was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum StartOrigin {
    /// The pencil at its own order.
    Pencil,
    /// The pencil at one order less.
    PencilLower,
    /// The pencil at one order more.
    PencilHigher,
    /// The scenario model's poles.
    Model,
    /// The order given with `--order`.
    Forced,
}

/// One refined candidate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CandidateSummary {
    /// Where it started.
    pub origin: StartOrigin,
    /// Number of distinct modes (a pair counts once).
    pub modes: usize,
    /// χ² at its optimum.
    pub chi2: f64,
    /// Bayesian information criterion χ² + k ln n.
    pub bic: f64,
    /// Whether its refinement converged.
    pub converged: bool,
}

/// Kinds and starting poles (upper members) from a pole list: unstable poles, poles at
/// the series' Nyquist limit and poles too slow to tell from the baseline are dropped.
pub fn starts(poles: &[C], nyquist_step: f64, span: f64) -> (Vec<PoleKind>, Vec<C>) {
    let mut kinds = Vec::new();
    let mut out: Vec<C> = Vec::new();
    for p in poles {
        let stable = p.re < 0.0 && p.re.is_finite() && p.im.is_finite();
        let alias = nyquist_step > 0.0 && p.im.abs() * nyquist_step > 0.9 * std::f64::consts::PI;
        let too_slow = -p.re * span < 0.05 && p.im.abs() * span < 0.5;
        if !stable || alias || too_slow || p.im < 0.0 {
            continue;
        }
        let mut q = *p;
        while out.iter().any(|o| (o - q).norm() < 1e-6 * q.norm()) {
            q *= 1.01; // two equal starts would make the basis singular
        }
        kinds.push(if q.im == 0.0 {
            PoleKind::Real
        } else {
            PoleKind::Pair
        });
        out.push(q);
    }
    (kinds, out)
}

/// Refine every start and keep the fit with the lowest BIC; also return all summaries.
pub fn choose(
    rows: &Rows,
    starts: Vec<(StartOrigin, Vec<PoleKind>, Vec<C>)>,
) -> Option<(Fit, Vec<CandidateSummary>)> {
    let n = rows.len() as f64;
    let mut best: Option<(f64, Fit)> = None;
    let mut summaries = Vec::new();
    for (origin, kinds, poles) in starts {
        if kinds.is_empty() {
            continue;
        }
        let Some(f) = varpro::fit(rows, &kinds, &poles) else {
            continue;
        };
        let k = (f.theta.len() + f.c.len()) as f64;
        let bic = f.chi2 + k * n.ln();
        summaries.push(CandidateSummary {
            origin,
            modes: kinds.len(),
            chi2: f.chi2,
            bic,
            converged: f.converged,
        });
        if best.as_ref().is_none_or(|(b, _)| bic < *b) {
            best = Some((bic, f));
        }
    }
    best.map(|(_, f)| (f, summaries))
}
