//! Planning for the modal-fit reading (`[plan] reading = "fit"`): once `recover` removes the
//! pulse exactly, the width no longer biases h; what limits the answer is the noise, the
//! circuit's linear range and the generator. The pulse, amplitude, averages and record are
//! chosen to reach the budget on the predicted 95 % interval ([`crate::fisher`]) in the least
//! test time (averages × period), within the bench's limits, `[capture] max_averages` and
//! `[plan] max_test_time`; the rule-of-thumb and budget plans are set beside it.

use crate::bench::{self, BenchInput, BenchPlan};
use crate::estimate::Metric;
use crate::fisher::{self, Bounds, FitMode, Sampling, Unbounded};
use crate::notice::{Note, Warning};
use crate::plan::{FitQuantity, PlanSettings, Prepared, ReadingKind, tied_pulse};
use num_complex::Complex64;
use serde::Serialize;

/// Budget of the fit reading when `[plan] target_error` is not given: 0.1 % (the bench
/// stage's own least working budget; our choice).
pub const DEFAULT_BUDGET: f64 = 1e-3;
/// Two-sided 95 % point of the normal distribution.
pub const Z95: f64 = 1.959_963_984_540_054;
/// A mode decaying within this many samples after the pulse is not resolved (common
/// practice, no source).
const RESOLVE_SAMPLES: f64 = 5.0;
/// A time constant whose predicted 95 % half-width exceeds this share of itself is not one the
/// fit can deliver (our choice).
const WEAK: f64 = 0.5;
/// Widths tried on the logarithmic grid.
const GRID: usize = 40;

/// What one interval is of.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "of", rename_all = "snake_case")]
pub enum IntervalOf {
    /// A mode's time constant −1/Re p, s.
    TimeConstant {
        /// The pole, rad/s.
        pole: Complex64,
    },
    /// h(0⁺).
    H0,
    /// h(t) where its interval is widest over the window.
    WindowWidest {
        /// That instant, s.
        at: f64,
    },
}

/// A predicted 95 % interval of one quantity at the planned averages.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    /// What it is of.
    #[serde(flatten)]
    pub of: IntervalOf,
    /// The model's value (s for a time constant, h's unit otherwise).
    pub value: f64,
    /// Half-width of the 95 % interval, same unit.
    pub half_width: f64,
    /// Half-width relative to the value (time constants) or to the normaliser.
    pub relative: f64,
    /// False when the fit cannot deliver it (see the warnings): read it from the aligned
    /// reading instead.
    pub delivered: bool,
}

/// Which plan a comparison row describes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Which {
    /// The rule-of-thumb pulse, read raw/aligned.
    RuleOfThumb,
    /// The budget plan for the raw/aligned reading.
    Budget,
    /// This plan, read by the fit.
    Fit,
}

/// One plan's figures for the same budget and test time.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PlanRow {
    /// Which plan.
    pub plan: Which,
    /// Its reading.
    pub reading: ReadingKind,
    /// 50 % width, s.
    pub width: f64,
    /// Amplitude at the circuit's input, V or A.
    pub amplitude: f64,
    /// Repetition period, s (absent: single shot).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub period: Option<f64>,
    /// Bias of the reading (0 for the fit, which removes the pulse exactly), relative.
    pub bias: f64,
    /// 95 % half-width of the noise in one acquisition, relative.
    pub noise: f64,
    /// Averages to bring bias + noise within the budget (absent: the bias alone exceeds it).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub averages: Option<u64>,
    /// Bias + noise at the fit plan's test time, relative.
    pub at_equal_time: f64,
}

/// Predicted uncertainty against width at the fit plan's test time, for the figure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WidthCurve {
    /// 50 % widths, s.
    pub widths: Vec<f64>,
    /// Raw reading: bias + 95 % noise, relative.
    pub raw: Vec<f64>,
    /// Aligned reading (absent for the window metric, which has no aligned form).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub aligned: Option<Vec<f64>>,
    /// Fit: 95 % half-width of the planned quantity (NaN-free: widths without a bound are left
    /// out of `fit_widths`).
    pub fit: Vec<f64>,
    /// Widths at which `fit` is given, s.
    pub fit_widths: Vec<f64>,
    /// The test time the curves are drawn at, s.
    pub test_time: f64,
}

/// The fit reading's plan.
#[derive(Debug, Clone, Serialize)]
pub struct FitPlan {
    /// What the budget applies to.
    pub quantity: FitQuantity,
    /// Budget on the relative 95 % half-width.
    pub budget: f64,
    /// Whether the budget is `[plan] target_error` (else [`DEFAULT_BUDGET`]).
    pub budget_stated: bool,
    /// `[capture] noise`, RMS of one acquisition.
    pub noise: f64,
    /// Averages planned.
    pub averages: u64,
    /// Test time: averages × period (the record for a single shot), s.
    pub test_time: f64,
    /// `[plan] max_test_time`, s.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub max_test_time: Option<f64>,
    /// Predicted relative 95 % half-width of the planned quantity.
    pub predicted: f64,
    /// Whether it is within the budget (and delivered).
    pub met: bool,
    /// Whether the fit delivers the planned quantity at all (false when modes it leaves out
    /// carry more of h than the budget, or a significant mode is unresolved or too weak).
    pub delivered: bool,
    /// Every quantity's predicted interval.
    pub intervals: Vec<Interval>,
    /// Rule-of-thumb, budget and fit plans side by side.
    pub comparison: Vec<PlanRow>,
    /// Budget plan's averages over the fit's (both reaching the budget).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fewer_averages: Option<f64>,
    /// Budget plan's interval over the fit's at the fit's test time.
    pub narrower_interval: f64,
    /// The figure's curves.
    pub curve: WidthCurve,
    /// The bench plan of the chosen pulse.
    #[serde(skip)]
    pub bench: BenchPlan,
    /// Warnings of the fit's checks.
    #[serde(skip)]
    pub warnings: Vec<Warning>,
    /// Notes.
    #[serde(skip)]
    pub notes: Vec<Note>,
}

/// What the plan is compared with: the rule-of-thumb pulse's and the budget plan's bench fits.
pub struct Reference<'a> {
    /// The rule-of-thumb pulse on the bench.
    pub rule: &'a BenchPlan,
    /// The raw/aligned plan on the bench.
    pub budget: &'a BenchPlan,
}

/// The fixed inputs of the search.
struct Cx<'a> {
    inp: &'a BenchInput<'a>,
    prep: &'a Prepared,
    s: &'a PlanSettings,
    modes: Vec<FitMode>,
    sigma: f64,
    level: f64,
    budget: f64,
    times: Vec<f64>,
    max_averages: f64,
}

/// One width tried.
#[derive(Clone)]
struct Candidate {
    width: f64,
    bench: BenchPlan,
    /// The modes the record resolves (the fit's model at this width).
    modes: Vec<FitMode>,
    bounds: Option<Bounds>,
    /// Relative 95 % half-width of the planned quantity in one acquisition.
    one: Option<f64>,
}

impl Cx<'_> {
    fn normaliser(&self) -> f64 {
        self.prep.estimator.normaliser()
    }

    /// Most averages a test may take at this period.
    fn max_n(&self, period: Option<f64>) -> f64 {
        let by_time = match (self.s.max_test_time, period) {
            (_, None) => 1.0,
            (Some(t), Some(p)) => (t / p).floor().max(1.0),
            (None, Some(_)) => f64::INFINITY,
        };
        by_time.min(self.max_averages).max(1.0)
    }

    fn sampling(&self, b: &BenchPlan) -> Sampling {
        let c = &b.capture;
        // A record split for memory: the coarse record spans it all (the fine one is ignored,
        // a conservative bound).
        let interval = c
            .split
            .map_or(c.sample_interval, |(_, coarse)| coarse.interval);
        Sampling::uniform(interval, c.pre_trigger, c.record_length, b.pulse.end())
    }

    /// Relative 95 % half-width of the planned quantity, per acquisition, from the bounds.
    fn quantity(&self, b: &Bounds, modes: &[FitMode]) -> f64 {
        let z = Z95 * self.sigma;
        match self.s.fit_quantity {
            FitQuantity::TimeConstants => (0..modes.len())
                .map(|k| z * b.tau_std(k) * (-modes[k].pole.re))
                .fold(0.0, f64::max),
            FitQuantity::H0 => z * b.h_std(0.0) / self.normaliser(),
            FitQuantity::Window => z * b.window_std(&self.times).0 / self.normaliser(),
        }
    }

    fn candidate(&self, width: f64) -> Candidate {
        let mut planned = tied_pulse(self.level * width, width, self.s.edge_ratio);
        // Exactly the level (area/width would round a hair above a limit equal to it).
        planned.amplitude = self.level;
        let bench = bench::fit_for(self.inp, self.prep, &planned, true, Some(1));
        let sampling = self.sampling(&bench);
        let modes = resolved(&self.modes, sampling.interval);
        let bounds = (!modes.is_empty())
            .then(|| Bounds::new(&modes, &bench.pulse, &sampling).ok())
            .flatten();
        let one = bounds.as_ref().map(|b| self.quantity(b, &modes));
        Candidate {
            width,
            bench,
            modes,
            bounds,
            one,
        }
    }

    /// Averages the candidate needs for the budget, and whether it gets them within limits.
    fn averages(&self, c: &Candidate) -> Option<(u64, bool)> {
        let one = c.one?;
        let need = (one / self.budget).powi(2).ceil().max(1.0);
        let max = self.max_n(c.bench.period.as_ref().map(|p| p.period));
        Some(if need <= max {
            (need as u64, true)
        } else {
            (max.min(u64::MAX as f64 / 2.0) as u64, false)
        })
    }

    /// Ordering key: reachable candidates by test time, then the rest by their interval.
    fn score(&self, c: &Candidate) -> (bool, f64) {
        let Some((n, ok)) = self.averages(c) else {
            return (false, f64::INFINITY);
        };
        let one = c.one.unwrap_or(f64::INFINITY);
        if ok {
            (
                true,
                (one / self.budget).powi(2).max(1.0) * period_of(&c.bench),
            )
        } else {
            (false, one / (n as f64).sqrt())
        }
    }
}

/// The modes that last at least [`RESOLVE_SAMPLES`] samples after the pulse.
fn resolved(modes: &[FitMode], interval: f64) -> Vec<FitMode> {
    modes
        .iter()
        .copied()
        .filter(|m| 1.0 / -m.pole.re >= RESOLVE_SAMPLES * interval)
        .collect()
}

fn period_of(b: &BenchPlan) -> f64 {
    b.period
        .as_ref()
        .map_or(b.capture.record_length, |p| p.period)
}

fn better(a: (bool, f64), b: (bool, f64)) -> bool {
    match (a.0, b.0) {
        (true, false) => true,
        (false, true) => false,
        _ => a.1 < b.1,
    }
}

/// The generator level the fit plan starts from: the generator's largest amplitude when
/// stated, else the level of the area rule, else the default bench level; the bench stage
/// then lowers it to every limit.
fn start_level(inp: &BenchInput) -> f64 {
    inp.bench
        .generator
        .as_ref()
        .and_then(|g| g.max_amplitude)
        .or(inp.area.level())
        .unwrap_or_else(|| {
            crate::plan::AreaRule::default_for(inp.drive)
                .level()
                .unwrap_or(1.0)
        })
}

/// The significant modes as the fit sees them, and the share of h the others carry.
fn model_modes(prep: &Prepared, net_modes: &[FitMode]) -> (Vec<FitMode>, Vec<FitMode>) {
    let significant: Vec<Complex64> = prep
        .facts
        .modes
        .iter()
        .filter(|m| m.significant)
        .map(|m| m.pole)
        .collect();
    net_modes.iter().partition(|m| {
        significant
            .iter()
            .any(|p| (p - m.pole).norm() <= 1e-9 * m.pole.norm())
    })
}

fn share(modes: &[FitMode], normaliser: f64) -> f64 {
    modes
        .iter()
        .map(|m| m.weight() * m.residue.norm())
        .sum::<f64>()
        / normaliser
}

/// Golden-section refinement of the best grid width between its neighbours (on log width).
fn refine(cx: &Cx, grid: &[f64], best: usize, mut keep: Candidate) -> Candidate {
    let (mut lo, mut hi) = (
        grid[best.saturating_sub(1)].ln(),
        grid[(best + 1).min(grid.len() - 1)].ln(),
    );
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..14 {
        let c = cx.candidate((hi - g * (hi - lo)).exp());
        let d = cx.candidate((lo + g * (hi - lo)).exp());
        let (sc, sd) = (cx.score(&c), cx.score(&d));
        if better(sc, sd) {
            hi = lo + g * (hi - lo);
            if better(sc, cx.score(&keep)) {
                keep = c;
            }
        } else {
            lo = hi - g * (hi - lo);
            if better(sd, cx.score(&keep)) {
                keep = d;
            }
        }
    }
    keep
}

/// Plan the test for the fit reading. `Err` when the fit's bounds cannot be given for this
/// network; the caller then keeps the raw/aligned plan.
pub fn design(
    inp: &BenchInput,
    prep: &Prepared,
    net: &crate::network::Network,
    reference: &Reference,
) -> Result<FitPlan, Unbounded> {
    let s = inp.plan;
    let sigma = inp
        .bench
        .capture
        .as_ref()
        .and_then(|c| c.noise)
        .unwrap_or(0.0);
    let all = fisher::fit_modes(net)?;
    let (modes, left_out) = model_modes(prep, &all);
    let fastest = prep.tau_fast;
    let cx = Cx {
        inp,
        prep,
        s,
        modes,
        sigma,
        level: start_level(inp),
        budget: s.target_error.unwrap_or(DEFAULT_BUDGET),
        times: fisher::window_times(fastest, prep.run),
        max_averages: inp
            .bench
            .capture
            .as_ref()
            .and_then(|c| c.max_averages)
            .unwrap_or(f64::INFINITY),
    };
    let min_width = inp.bench.generator.as_ref().and_then(|g| g.min_width);
    let w_lo = (prep.tau_plan / s.width_ratio).max(min_width.unwrap_or(0.0));
    let slow = prep.tau_slow.unwrap_or(10.0 * prep.tau_plan);
    let w_hi = (3.0 * slow).max(10.0 * w_lo);
    let ratio = (w_hi / w_lo).powf(1.0 / (GRID - 1) as f64);
    let grid: Vec<f64> = (0..GRID).map(|k| w_lo * ratio.powi(k as i32)).collect();
    let tried: Vec<Candidate> = grid.iter().map(|&w| cx.candidate(w)).collect();
    let best = (0..tried.len())
        .reduce(|a, b| {
            if better(cx.score(&tried[b]), cx.score(&tried[a])) {
                b
            } else {
                a
            }
        })
        .unwrap_or(0);
    if tried[best].bounds.is_none() {
        return Err(if tried.iter().all(|c| c.modes.is_empty()) {
            Unbounded::Unresolved
        } else {
            Unbounded::Singular
        });
    }
    let chosen = refine(&cx, &grid, best, tried[best].clone());
    finish(cx, chosen, &tried, left_out, net.direct, reference)
}

/// The averages for the chosen width, the bench plan at them, the checks and the figures.
fn finish(
    mut cx: Cx,
    chosen: Candidate,
    tried: &[Candidate],
    left_out: Vec<FitMode>,
    direct: f64,
    reference: &Reference,
) -> Result<FitPlan, Unbounded> {
    let (n, met) = cx.averages(&chosen).ok_or(Unbounded::Singular)?;
    let planned = chosen.bench.planned;
    let bench = bench::fit_for(cx.inp, cx.prep, &planned, true, Some(n));
    let sampling = cx.sampling(&bench);
    let noise_n = cx.sigma / (n as f64).sqrt();
    let mut warnings = Vec::new();
    let mut notes = Vec::new();
    let unresolved = drop_unresolved(&mut cx.modes, sampling.interval, &mut warnings);
    let bounds = Bounds::new(&cx.modes, &bench.pulse, &sampling)?;
    let (mut intervals, weak) = mode_intervals(&cx.modes, &bounds, noise_n, &mut warnings);
    order_checks(&cx.modes, &bounds, noise_n, &mut warnings);
    let out_modes: Vec<FitMode> = left_out.into_iter().chain(unresolved).chain(weak).collect();
    let out_share = share(&out_modes, cx.normaliser());
    left_out_notices(&out_modes, out_share, cx.budget, &mut warnings, &mut notes);
    if direct != 0.0 {
        notes.push(Note::FitDirectTerm { direct });
    }
    let h_ok = out_share <= cx.budget;
    intervals.extend(h_intervals(&cx, &bounds, noise_n, h_ok));
    let predicted = cx.quantity(&bounds, &cx.modes) / (n as f64).sqrt();
    let delivered = match cx.s.fit_quantity {
        FitQuantity::TimeConstants => intervals.iter().all(|i| i.delivered),
        _ => h_ok,
    };
    let test_time = n as f64 * period_of(&bench);
    if !met {
        warnings.push(Warning::FitBudgetUnreachable {
            best: predicted,
            budget: cx.budget,
            averages: n,
            test_time,
        });
    }
    let fit_row = fit_row(&bench, predicted, n, met);
    let rows = [
        raw_row(&cx, Which::RuleOfThumb, reference.rule, test_time),
        raw_row(&cx, Which::Budget, reference.budget, test_time),
        fit_row,
    ];
    let fewer = match (rows[1].averages, fit_row.averages.filter(|_| delivered)) {
        (Some(a), Some(b)) => Some(a as f64 / b as f64),
        _ => None,
    };
    let curve = curve(&cx, tried, test_time);
    Ok(FitPlan {
        quantity: cx.s.fit_quantity,
        budget: cx.budget,
        budget_stated: cx.s.target_error.is_some(),
        noise: cx.sigma,
        averages: n,
        test_time,
        max_test_time: cx.s.max_test_time,
        predicted,
        met: met && delivered,
        delivered,
        intervals,
        narrower_interval: rows[1].at_equal_time / predicted.max(f64::MIN_POSITIVE),
        comparison: rows.to_vec(),
        fewer_averages: fewer,
        curve,
        bench,
        warnings,
        notes,
    })
}

/// The fit plan's row of the comparison: `n` averages (`met`: they reach the budget) with
/// the `predicted` interval.
fn fit_row(bench: &BenchPlan, predicted: f64, n: u64, met: bool) -> PlanRow {
    PlanRow {
        plan: Which::Fit,
        reading: ReadingKind::Fit,
        width: bench.pulse.width_50(),
        amplitude: bench.pulse.amplitude,
        period: bench.period.as_ref().map(|p| p.period),
        bias: 0.0,
        noise: predicted * (n as f64).sqrt(),
        averages: met.then_some(n),
        at_equal_time: predicted,
    }
}

/// Take the modes a record sampled every `interval` cannot resolve out of the model, warning
/// about each; returns them.
fn drop_unresolved(
    modes: &mut Vec<FitMode>,
    interval: f64,
    warnings: &mut Vec<Warning>,
) -> Vec<FitMode> {
    let kept = resolved(modes, interval);
    let unresolved: Vec<FitMode> = modes
        .iter()
        .copied()
        .filter(|m| !kept.contains(m))
        .collect();
    for m in &unresolved {
        warnings.push(Warning::FitModeUnresolved {
            pole: m.pole,
            decay: 1.0 / -m.pole.re,
            interval,
        });
    }
    *modes = kept;
    unresolved
}

/// Each mode's time-constant interval at the planned noise; modes too weak to deliver theirs
/// are returned (and warned about).
fn mode_intervals(
    modes: &[FitMode],
    bounds: &Bounds,
    noise_n: f64,
    warnings: &mut Vec<Warning>,
) -> (Vec<Interval>, Vec<FitMode>) {
    let mut intervals = Vec::new();
    let mut weak = Vec::new();
    for (k, m) in modes.iter().enumerate() {
        let tau = 1.0 / -m.pole.re;
        let half = Z95 * noise_n * bounds.tau_std(k);
        let ok = half / tau <= WEAK;
        if !ok {
            weak.push(*m);
            warnings.push(Warning::FitModeWeak {
                pole: m.pole,
                relative: half / tau,
                amplitude: m.weight() * bounds.amplitudes()[k].norm(),
                noise: noise_n,
            });
        }
        intervals.push(Interval {
            of: IntervalOf::TimeConstant { pole: m.pole },
            value: tau,
            half_width: half,
            relative: half / tau,
            delivered: ok,
        });
    }
    (intervals, weak)
}

/// The warning (or note) for modes the fit leaves out, by the share of h they carry.
fn left_out_notices(
    out: &[FitMode],
    share: f64,
    budget: f64,
    warnings: &mut Vec<Warning>,
    notes: &mut Vec<Note>,
) {
    if out.is_empty() {
        return;
    }
    if share > budget {
        warnings.push(Warning::FitLeftOutBias { share, budget });
    } else {
        notes.push(Note::FitModesLeftOut {
            count: out.len(),
            share,
        });
    }
}

/// The intervals of h(0⁺) and of h(t) where it is widest over the window.
fn h_intervals(cx: &Cx, bounds: &Bounds, noise_n: f64, delivered: bool) -> [Interval; 2] {
    let h0 = bounds.h_std(0.0) * Z95 * noise_n;
    let h0_value: f64 = cx.modes.iter().map(|m| m.weight() * m.residue.re).sum();
    let first = Interval {
        of: IntervalOf::H0,
        value: h0_value,
        half_width: h0,
        relative: h0 / cx.normaliser(),
        delivered,
    };
    let (wstd, at) = bounds.window_std(&cx.times);
    let second = Interval {
        of: IntervalOf::WindowWidest { at },
        value: cx.prep.estimator.ideal().at(at),
        half_width: Z95 * noise_n * wstd,
        relative: Z95 * noise_n * wstd / cx.normaliser(),
        delivered,
    };
    [first, second]
}

/// Pairs of poles closer than the sum of their 95 % half-widths.
fn order_checks(modes: &[FitMode], b: &Bounds, noise: f64, warnings: &mut Vec<Warning>) {
    let half = |k: usize| {
        let (re, im) = b.pole_std(k);
        Z95 * noise * re.hypot(im)
    };
    for i in 0..modes.len() {
        for j in i + 1..modes.len() {
            let sep = (modes[i].pole - modes[j].pole).norm();
            let res = half(i) + half(j);
            if sep < res {
                warnings.push(Warning::FitOrderAmbiguous {
                    first: modes[i].pole,
                    second: modes[j].pole,
                    separation: sep,
                    resolution: res,
                });
            }
        }
    }
}

/// The metric the comparison reads a raw/aligned plan by: the one that plan was made for (the
/// fit's time constants have no raw counterpart).
fn raw_metric(s: &PlanSettings) -> Metric {
    s.metric
}

/// A raw/aligned plan's figures: bias, 95 % noise in one acquisition, averages for the budget
/// and the interval at the fit's test time.
fn raw_row(cx: &Cx, which: Which, b: &BenchPlan, test_time: f64) -> PlanRow {
    let m = raw_metric(cx.s);
    let bias = b.estimate.metric(m);
    let noise = Z95 * cx.sigma / (b.pulse.area().abs() * cx.normaliser());
    let room = cx.budget - bias;
    let averages = (room > 0.0).then(|| ((noise / room).powi(2)).ceil().max(1.0) as u64);
    let period = b.period.as_ref().map(|p| p.period);
    let n_eq = period.map_or(1.0, |p| (test_time / p).floor().clamp(1.0, cx.max_averages));
    PlanRow {
        plan: which,
        reading: if m == Metric::T0Aligned {
            ReadingKind::Aligned
        } else {
            ReadingKind::Raw
        },
        width: b.pulse.width_50(),
        amplitude: b.pulse.amplitude,
        period,
        bias,
        noise,
        averages,
        at_equal_time: bias + noise / n_eq.sqrt(),
    }
}

/// The three readings against width at the fit plan's test time.
fn curve(cx: &Cx, tried: &[Candidate], test_time: f64) -> WidthCurve {
    let raw_m = match raw_metric(cx.s) {
        Metric::T0Aligned => Metric::T0,
        m => m,
    };
    let window = raw_m == Metric::Window;
    let mut c = WidthCurve {
        widths: Vec::new(),
        raw: Vec::new(),
        aligned: (!window).then(Vec::new),
        fit: Vec::new(),
        fit_widths: Vec::new(),
        test_time,
    };
    for t in tried {
        let b = &t.bench;
        let n = cx
            .max_n(b.period.as_ref().map(|p| p.period))
            .min(
                b.period
                    .as_ref()
                    .map_or(1.0, |p| (test_time / p.period).floor().max(1.0)),
            )
            .max(1.0);
        let noise = Z95 * cx.sigma / (b.pulse.area().abs() * cx.normaliser()) / n.sqrt();
        let raw = b.estimate.metric(raw_m) + noise;
        if !raw.is_finite() {
            continue;
        }
        c.widths.push(t.width);
        c.raw.push(raw);
        if let Some(a) = c.aligned.as_mut() {
            a.push(b.estimate.metric(Metric::T0Aligned) + noise);
        }
        if let Some(one) = t.one.filter(|v| v.is_finite()) {
            c.fit_widths.push(t.width);
            c.fit.push(one / n.sqrt());
        }
    }
    c
}
