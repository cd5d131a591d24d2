//! Choosing the pulse: the rule of thumb, the widest pulse within an error budget, the run
//! length, and the warnings a pulse deserves against the network. The bench stage (limits,
//! noise, repetition, capture) comes after, in [`crate::bench`].

use crate::estimate::{ErrorEstimate, Estimator, IdealShape, Metric, NormalisedBy};
use crate::network::{Form, Network, NetworkSpec};
use crate::notice::{Note, Warning};
use crate::pulse::Trapezoid;
use crate::tolerance::ToleranceReport;
use num_complex::Complex64;
use serde::Serialize;

/// The `[plan]` settings with defaults applied.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanSettings {
    /// Error budget as a fraction; `None` → rule of thumb.
    pub target_error: Option<f64>,
    /// Metric the budget applies to.
    pub metric: Metric,
    /// Whether the user chose the metric or the network did (see [`default_metric`]).
    pub metric_choice: MetricChoice,
    /// Fastest time scale / width for the rule of thumb.
    pub width_ratio: f64,
    /// Width / 10–90 % edge.
    pub edge_ratio: f64,
    /// When set, the planned width never exceeds τ_fast / this (and a wider pulse is warned
    /// about). Unset, a budget alone sets the width.
    pub min_width_ratio: Option<f64>,
    /// A mode whose share of Σ dominance is below this does not set the pulse's time scale.
    pub significance: f64,
    /// Monte Carlo samples for tolerances (None: corners when parts are few).
    pub samples: Option<usize>,
    /// Seed of the Monte Carlo draw.
    pub seed: u64,
    /// Whether the parts' tolerances are analysed (off for work on the nominal network only).
    pub tolerances: bool,
    /// Run length in slowest time constants.
    pub settle_multiple: f64,
    /// How h will be read from the capture.
    pub reading: ReadingKind,
    /// For the fit reading: the quantity whose predicted interval the budget applies to.
    pub fit_quantity: FitQuantity,
    /// Longest test (averages × period) the fit reading may plan, s.
    pub max_test_time: Option<f64>,
}

/// How h will be read from the capture: y/area (raw), shifted by the pulse's centroid
/// (aligned), or by the modal fit that removes the pulse exactly (`recover`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ReadingKind {
    /// y(t)/area.
    Raw,
    /// y(t + centroid)/area.
    Aligned,
    /// The modal fit of the record after the pulse, with the pulse removed exactly.
    Fit,
}

impl ReadingKind {
    /// Name as written in scenarios and reports.
    pub fn name(self) -> &'static str {
        match self {
            ReadingKind::Raw => "raw",
            ReadingKind::Aligned => "aligned",
            ReadingKind::Fit => "fit",
        }
    }
}

/// What the fit reading's budget applies to: the 95 % interval of each significant mode's
/// time constant (relative to it), of h(0⁺), or of h(t) over the window (both relative to
/// the estimator's normaliser).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FitQuantity {
    /// Time constants −1/Re p.
    TimeConstants,
    /// h(0⁺).
    H0,
    /// h(t) over the window.
    Window,
}

impl FitQuantity {
    /// Name as written in scenarios (`metric`) and reports.
    pub fn name(self) -> &'static str {
        match self {
            FitQuantity::TimeConstants => "tau",
            FitQuantity::H0 => "t0",
            FitQuantity::Window => "window",
        }
    }

    /// The fit's counterpart of a raw/aligned metric.
    pub fn of_metric(m: Metric) -> FitQuantity {
        match m {
            Metric::T0 | Metric::T0Aligned => FitQuantity::H0,
            Metric::Window => FitQuantity::Window,
        }
    }
}

impl Default for PlanSettings {
    fn default() -> Self {
        // The trade's rule of thumb (common practice, no source): width ≈ τ_fast/100,
        // edges ≈ width/100, run ≥ 5 τ_slow. A budget, when given, decides the width.
        PlanSettings {
            target_error: None,
            metric: Metric::T0,
            metric_choice: MetricChoice::ByNetwork,
            width_ratio: 100.0,
            edge_ratio: 100.0,
            min_width_ratio: None,
            // Modes under 1 % of the response's L1 bound are not significant (our choice).
            significance: 0.01,
            samples: None,
            seed: 1,
            tolerances: true,
            settle_multiple: 5.0,
            reading: ReadingKind::Raw,
            fit_quantity: FitQuantity::H0,
            max_test_time: None,
        }
    }
}

/// The level a generator is assumed to deliver when the scenario gives no `[drive] area`: 5 V
/// for a voltage drive, 10 mA for a current drive (our choice: levels any bench generator
/// reaches and no circuit of the trade minds).
pub const DEFAULT_LEVEL_VOLTS: f64 = 5.0;
/// See [`DEFAULT_LEVEL_VOLTS`].
pub const DEFAULT_LEVEL_AMPS: f64 = 0.01;

/// How the pulse's area is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "rule", rename_all = "snake_case")]
pub enum AreaRule {
    /// `[drive] area`, honoured as given (read h(t) ≈ y(t)/area).
    Given {
        /// V·s or A·s.
        area: f64,
    },
    /// No area given: the pulse has a fixed amplitude, so area = level × width.
    FromLevel {
        /// Amplitude, V or A.
        level: f64,
    },
}

impl AreaRule {
    /// The default when `[drive] area` is absent: the stated default generator level.
    pub fn default_for(drive: crate::units::Signal) -> AreaRule {
        AreaRule::FromLevel {
            level: match drive {
                crate::units::Signal::Voltage => DEFAULT_LEVEL_VOLTS,
                crate::units::Signal::Current => DEFAULT_LEVEL_AMPS,
            },
        }
    }

    /// The area for a pulse of 50 % width `width`.
    pub fn area(&self, width: f64) -> f64 {
        match *self {
            AreaRule::Given { area } => area,
            AreaRule::FromLevel { level } => level * width,
        }
    }

    /// The fixed amplitude, when the rule fixes one.
    pub fn level(&self) -> Option<f64> {
        match *self {
            AreaRule::Given { .. } => None,
            AreaRule::FromLevel { level } => Some(level),
        }
    }
}

/// Who chose the metric.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MetricChoice {
    /// `[plan] metric`.
    Given,
    /// The default for the network ([`default_metric`]).
    ByNetwork,
}

/// The metric that means something for a network: the raw reading at 0⁺ when h(0⁺) ≠ 0 (the
/// reading the rule of thumb is about), and the error over the window, against the peak |h|,
/// when h(0⁺) = 0 (every low-pass of relative degree ≥ 2): a reading at 0⁺ would be compared
/// with zero.
pub fn default_metric(net: &Network) -> Metric {
    if net.h0_negligible() {
        Metric::Window
    } else {
        Metric::T0
    }
}

/// One mode as the planner sees it: its figures and its share of the response.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModeFigures {
    /// Pole, rad/s.
    pub pole: Complex64,
    /// Multiplicity.
    pub multiplicity: usize,
    /// Laurent coefficients r₁, r₂… (None when the residues are unknown).
    pub residues: Option<Vec<Complex64>>,
    /// Decay time constant 1/|Re p|, s (None on the imaginary axis).
    pub time_constant: Option<f64>,
    /// |p|, rad/s.
    pub natural_frequency: f64,
    /// Damping ratio (None at the origin).
    pub damping: Option<f64>,
    /// Share of Σ dominance.
    pub share: f64,
    /// Whether the mode sizes the pulse.
    pub significant: bool,
}

/// The network's figures for reports: modes, zeros, direct term, h(0⁺), shape, time scales.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NetworkFacts {
    /// Scenario form.
    pub form: Form,
    /// Order (poles with multiplicity).
    pub order: usize,
    /// Each distinct pole.
    pub modes: Vec<ModeFigures>,
    /// Zeros, rad/s.
    pub zeros: Vec<Complex64>,
    /// Direct term D.
    pub direct: f64,
    /// Coefficients of s, s², … beyond D.
    pub improper: Vec<f64>,
    /// Whether the residues are known.
    pub residues_known: bool,
    /// h(0⁺) from the modes (None when residues are unknown).
    pub h0_plus: Option<f64>,
    /// h(0⁺) by the initial-value theorem.
    pub h0_plus_ivt: Option<f64>,
    /// Peak |h| and settling.
    #[serde(flatten)]
    pub shape: IdealShape,
    /// Fastest time scale 1/max|p|, s.
    pub tau_fast: f64,
    /// Fastest significant time scale, s.
    pub tau_fast_significant: f64,
    /// Slowest decay 1/min|Re p|, s.
    pub tau_slow: Option<f64>,
    /// Every pole in the open left half-plane.
    pub stable: bool,
}

/// What set the run length, with its numbers.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "rule", rename_all = "kebab-case")]
pub enum RunBasis {
    /// |h| stays below 0.1 % of its peak after `settle`, longer than `multiple` × τ_slow.
    Settle {
        /// Settling time, s.
        settle: f64,
        /// The multiple of τ_slow it exceeds.
        multiple: f64,
    },
    /// `multiple` × the slowest time constant.
    TimeConstants {
        /// The multiple.
        multiple: f64,
        /// τ_slow, s.
        tau: f64,
    },
    /// Unstable or marginal networks: `multiple` × the slowest decaying time constant.
    DecayingModes {
        /// The multiple.
        multiple: f64,
        /// τ of the slowest decaying mode, s.
        tau: f64,
    },
    /// No mode decays: `multiple` × the slowest time scale 1/|p|.
    SlowestScale {
        /// The multiple.
        multiple: f64,
        /// 1/|p|, s.
        scale: f64,
    },
}

/// A network prepared for planning: its ideal shape, time scales and the exact estimator.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// The figures reports show.
    pub facts: NetworkFacts,
    /// Fastest time scale 1/max|p| over all modes, s.
    pub tau_fast: f64,
    /// Fastest time scale over the significant modes, s: what the pulse is sized against.
    pub tau_plan: f64,
    /// Each mode's share of the summed dominance (aligned with `Network::modes`).
    pub shares: Vec<f64>,
    /// Whether each mode is significant (share ≥ the threshold).
    pub significant: Vec<bool>,
    /// Slowest decay 1/min|Re p| over decaying modes, s.
    pub tau_slow: Option<f64>,
    /// Ideal response shape (peak, settling).
    pub shape: IdealShape,
    /// Run length, s.
    pub run: f64,
    /// What set the run length.
    pub run_basis: RunBasis,
    /// The exact estimator.
    pub estimator: Estimator,
    /// Warnings that belong to the network itself.
    pub warnings: Vec<Warning>,
}

/// The usual figures of one mode.
fn mode_figures(net: &Network, shares: &[f64], significant: &[bool]) -> Vec<ModeFigures> {
    net.modes
        .iter()
        .enumerate()
        .map(|(i, m)| ModeFigures {
            pole: m.pole,
            multiplicity: m.multiplicity(),
            residues: net.residues_known.then(|| m.residues.clone()),
            time_constant: (m.pole.re != 0.0).then(|| m.time_constant()),
            natural_frequency: m.natural_frequency(),
            damping: m.damping(),
            share: shares[i],
            significant: significant[i],
        })
        .collect()
}

fn network_facts(
    net: &Network,
    shape: &IdealShape,
    sig: &crate::network::Significance,
) -> NetworkFacts {
    let known = net.residues_known;
    NetworkFacts {
        form: net.form,
        order: net.order(),
        modes: mode_figures(net, &sig.shares, &sig.significant),
        zeros: net.zeros.clone(),
        direct: net.direct,
        improper: net.improper.clone(),
        residues_known: known,
        h0_plus: known.then(|| net.h0_plus()),
        h0_plus_ivt: known.then_some(net.h0_ivt),
        shape: shape.clone(),
        tau_fast: net.tau_fast(),
        tau_fast_significant: sig.tau,
        tau_slow: net.tau_slow(),
        stable: net.stable(),
    }
}

/// The run length and what set it: the longer of k·τ_slow and the settling time for stable
/// networks; k times the slowest decaying (or slowest) time scale otherwise.
fn run_length(net: &Network, shape: &IdealShape, k: f64) -> (f64, RunBasis) {
    let tau_slow = net.tau_slow();
    if net.stable() {
        let slow = tau_slow.unwrap_or_else(|| net.tau_fast());
        let by_tau = k * slow;
        return match shape.settle {
            Some(settle) if settle > by_tau => (
                settle,
                RunBasis::Settle {
                    settle,
                    multiple: k,
                },
            ),
            _ => (
                by_tau,
                RunBasis::TimeConstants {
                    multiple: k,
                    tau: slow,
                },
            ),
        };
    }
    match tau_slow {
        Some(tau) => (k * tau, RunBasis::DecayingModes { multiple: k, tau }),
        None => {
            let w = net
                .modes
                .iter()
                .map(|m| m.natural_frequency())
                .filter(|&w| w > 0.0)
                .fold(f64::INFINITY, f64::min);
            (
                k / w,
                RunBasis::SlowestScale {
                    multiple: k,
                    scale: 1.0 / w,
                },
            )
        }
    }
}

/// Relative accuracy every figure is held to; a bound above it is warned about.
pub const ACCURACY_LIMIT: f64 = 1e-7;

/// Warnings that belong to the network itself, whatever the pulse.
fn network_warnings(
    net: &Network,
    shape: &IdealShape,
    estimator: &Estimator,
    run: f64,
) -> Vec<Warning> {
    let mut warnings = Vec::new();
    // Modal sums lose digits when large residues cancel, and the residues of close poles
    // follow the poles' errors: the a-priori bounds (network::accuracy) say by how much.
    let floor = estimator.rounding_floor();
    let bound = net.figure_bound(run, shape.peak, estimator.normaliser());
    if bound.figures > ACCURACY_LIMIT || bound.residues > ACCURACY_LIMIT {
        warnings.push(Warning::RoundingLoss {
            amplification: floor / f64::EPSILON,
            floor,
            bound: bound.figures,
            residue_bound: bound.residues,
        });
    }
    for m in net.unstable_modes().filter(|m| m.pole.im >= 0.0) {
        warnings.push(Warning::NetworkUnstable {
            pole: m.pole,
            doubling: std::f64::consts::LN_2 / m.pole.re,
        });
    }
    for m in net.marginal_modes().filter(|m| m.pole.im >= 0.0) {
        warnings.push(Warning::NetworkMarginal { pole: m.pole });
    }
    if net.is_improper() {
        warnings.push(Warning::NetworkImproper {
            coefficients: net.improper.clone(),
        });
    }
    let h0_modes = net.h0_plus();
    let scale = shape.peak.max(h0_modes.abs()).max(net.h0_ivt.abs());
    if (h0_modes - net.h0_ivt).abs() > 1e-6 * scale {
        warnings.push(Warning::H0Disagrees {
            from_modes: h0_modes,
            from_ivt: net.h0_ivt,
        });
    }
    if estimator.normalised_by() == NormalisedBy::Peak {
        warnings.push(Warning::H0Zero {
            peak: shape.peak,
            t_peak: shape.t_peak,
        });
    }
    warnings
}

/// Analyse the network's time scales and prepare the estimator.
pub fn prepare(net: &Network, settings: &PlanSettings) -> Prepared {
    let h = crate::response::Modal::new(net).impulse();
    let shape = IdealShape::of(net, &h);
    let estimator = Estimator::new(net, &shape);
    let sig = net.significance(settings.significance);
    let (run, run_basis) = run_length(net, &shape, settings.settle_multiple);
    Prepared {
        facts: network_facts(net, &shape, &sig),
        warnings: network_warnings(net, &shape, &estimator, run),
        tau_fast: net.tau_fast(),
        tau_plan: sig.tau,
        shares: sig.shares,
        significant: sig.significant,
        tau_slow: net.tau_slow(),
        shape,
        run,
        run_basis,
        estimator,
    }
}

/// Without a budget to vouch for it, a pulse wider than the fastest significant time scale / 10
/// is warned about (common practice, no source).
pub const RULE_MAX_WIDTH_RATIO: f64 = 10.0;

/// What stopped the budget search from going wider.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "setting", rename_all = "snake_case")]
pub enum Cap {
    /// `[plan] min_width_ratio`: width ≤ fastest significant time scale / ratio.
    MinWidthRatio {
        /// The ratio.
        ratio: f64,
    },
    /// The run (record length): a pulse no longer than the record it is read in.
    RunLength {
        /// The run, s.
        run: f64,
    },
}

impl Cap {
    /// The widest width it allows, s.
    pub fn width(&self, tau_plan: f64) -> f64 {
        match *self {
            Cap::MinWidthRatio { ratio } => tau_plan / ratio,
            Cap::RunLength { run } => run,
        }
    }
}

/// The tighter of the user's `min_width_ratio` (when set) and the run.
pub fn width_cap(prep: &Prepared, s: &PlanSettings) -> Cap {
    let run = Cap::RunLength { run: prep.run };
    match s.min_width_ratio {
        Some(ratio) if prep.tau_plan / ratio < prep.run => Cap::MinWidthRatio { ratio },
        _ => run,
    }
}

/// A pulse of area `area` and 50 % width `w` with edges tied by the edge ratio.
pub fn tied_pulse(area: f64, width: f64, edge_ratio: f64) -> Trapezoid {
    Trapezoid::with_area(area, width, width / edge_ratio)
        .expect("edge_ratio > 1.25 always leaves a flat top")
}

/// Outcome of the error-budget search.
#[derive(Debug, Clone, PartialEq)]
pub enum Target {
    /// The widest width meeting the budget.
    Met {
        /// Planned 50 % width, s.
        width: f64,
        /// Metric value there (fraction).
        value: f64,
    },
    /// The budget allows a wider pulse than a stated cap; the width is capped there.
    Capped {
        /// Planned (capped) width, s.
        width: f64,
        /// Metric value there.
        value: f64,
        /// The setting that capped it.
        cap: Cap,
    },
    /// Even the narrowest width tried misses the budget.
    Unreachable {
        /// Narrowest width tried, s.
        width: f64,
        /// Metric value there.
        value: f64,
    },
}

/// The budget search as a report states it (the widening is the planned width over the
/// rule-of-thumb width).
#[derive(Debug, Clone, PartialEq)]
pub struct Budget {
    /// The search's outcome.
    pub target: Target,
    /// Planned width / rule-of-thumb width, when the budget was met.
    pub widening: Option<f64>,
}

impl Serialize for Budget {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = ser.serialize_map(None)?;
        match self.target {
            Target::Met { width, value } => {
                m.serialize_entry("met", &true)?;
                m.serialize_entry("capped", &false)?;
                m.serialize_entry("width", &width)?;
                m.serialize_entry("value", &value)?;
                m.serialize_entry("widening", &self.widening)?;
            }
            Target::Capped { width, value, cap } => {
                m.serialize_entry("met", &true)?;
                m.serialize_entry("capped", &true)?;
                m.serialize_entry("width", &width)?;
                m.serialize_entry("value", &value)?;
                m.serialize_entry("widening", &self.widening)?;
                m.serialize_entry("capped_by", &cap)?;
            }
            Target::Unreachable { width, value } => {
                m.serialize_entry("met", &false)?;
                m.serialize_entry("capped", &false)?;
                m.serialize_entry("narrowest_tried", &width)?;
                m.serialize_entry("value", &value)?;
            }
        }
        m.end()
    }
}

/// The most steps each stage of the width search takes (a bound, never reached for finite
/// widths within the scenario domain).
const MAX_SEARCH_STEPS: usize = 4000;

/// Search for the widest pulse whose metric stays within the budget, with all narrower widths
/// also within it (the first crossing, scanning up in steps of √2 or longer far below the
/// budget, [`scan_step`]), never wider than the cap
/// ([`width_cap`]); the crossing is then closed in on with a bracketed regula falsi
/// ([`close_in`]).
pub fn widest_within(
    est: &Estimator,
    prep: &Prepared,
    settings: &PlanSettings,
    budget: f64,
) -> Target {
    let f = |w: f64| {
        let p = tied_pulse(1.0, w, settings.edge_ratio);
        let run = prep.run.max(p.end() * 2.0);
        est.metric(&p, settings.metric, run)
    };
    let step = 2f64.sqrt();
    let floor = prep.tau_plan * 1e-9;
    let cap = width_cap(prep, settings);
    let ceiling = cap.width(prep.tau_plan);
    let start = (prep.tau_plan / settings.width_ratio).min(ceiling);
    let f_start = f(start);
    let (lo, hi);
    if f_start <= budget {
        let (mut w, mut fw) = (start, f_start);
        let mut bracket = None;
        // Steps of at least √2 (4 000 of them span 600 decades, more than any finite pair of
        // widths); longer where the metric is far below the budget (`scan_step`).
        for _ in 0..MAX_SEARCH_STEPS {
            let next = w * scan_step(fw, budget);
            if next > ceiling || !next.is_finite() {
                let f_ceiling = f(ceiling);
                if f_ceiling <= budget {
                    return Target::Capped {
                        width: ceiling,
                        value: f_ceiling,
                        cap,
                    };
                }
                bracket = Some((ceiling, f_ceiling));
                break;
            }
            let f_next = f(next);
            if f_next > budget {
                bracket = Some((next, f_next));
                break;
            }
            (w, fw) = (next, f_next);
        }
        lo = (w, fw);
        hi = bracket.unwrap_or((ceiling, f64::INFINITY));
    } else {
        let (mut w, mut fw) = (start, f_start);
        let mut inside = None;
        for _ in 0..MAX_SEARCH_STEPS {
            let next = w / step;
            if next < floor || next == 0.0 {
                break;
            }
            let f_next = f(next);
            if f_next <= budget {
                inside = Some((next, f_next));
                break;
            }
            (w, fw) = (next, f_next);
        }
        let Some(found) = inside else {
            return Target::Unreachable {
                width: w,
                value: fw,
            };
        };
        lo = found;
        hi = (w, fw);
    }
    let (width, value) = close_in(&f, budget, lo, hi);
    Target::Met { width, value }
}

/// The upward scan's next step, a width factor: √2, or longer while the metric is far below
/// the budget: the factor k with k³·metric = budget/2, at most 16, so that a metric growing
/// as fast as the cube of the width (the window and aligned errors grow as its square, the
/// t = 0⁺ reading as the width itself) is still within the budget after the step; common
/// practice, no source.
fn scan_step(metric: f64, budget: f64) -> f64 {
    let k = (0.5 * budget / metric).cbrt();
    if k.is_finite() {
        k.clamp(2f64.sqrt(), 16.0)
    } else if metric == 0.0 {
        16.0
    } else {
        2f64.sqrt()
    }
}

/// Relative width the search closes in to: 10⁻⁵ of the width, finer than any generator sets
/// a width.
const WIDTH_RESOLUTION: f64 = 1e-5;

/// Close in on a crossing of the budget between `lo` (within it) and `hi` (beyond it), each a
/// width with its metric: regula falsi on log metric against log width, with the Illinois
/// halving of a retained end (Dowell & Jarratt 1971), each trial kept a tenth of the
/// resolution inside the bracket so that the bracket itself closes, and a bisection whenever
/// the bracket has not halved in three trials. Returns the wider width within the budget and
/// its metric, within [`WIDTH_RESOLUTION`] of the crossing.
fn close_in(f: &dyn Fn(f64) -> f64, budget: f64, lo: (f64, f64), hi: (f64, f64)) -> (f64, f64) {
    let g = |v: f64| (v / budget).ln();
    let (mut w_lo, mut v_lo) = lo;
    let (mut x_lo, mut x_hi) = (lo.0.ln(), hi.0.ln());
    let (mut g_lo, mut g_hi) = (g(lo.1), g(hi.1));
    let tol = WIDTH_RESOLUTION.ln_1p();
    let margin = 0.1 * tol;
    let (mut side, mut last_width, mut trials) = (0i8, x_hi - x_lo, 0);
    for _ in 0..MAX_SEARCH_STEPS {
        let span = x_hi - x_lo;
        if span <= tol || !span.is_finite() {
            break;
        }
        trials += 1;
        let secant = x_lo - g_lo * span / (g_hi - g_lo);
        let stalled = trials % 3 == 0 && span > 0.5 * last_width;
        let x = if stalled || !secant.is_finite() || !g_lo.is_finite() || !g_hi.is_finite() {
            last_width = span;
            0.5 * (x_lo + x_hi)
        } else {
            if trials % 3 == 0 {
                last_width = span;
            }
            secant.clamp(x_lo + margin, x_hi - margin)
        };
        let w = x.exp();
        let v = f(w);
        if v <= budget {
            (x_lo, w_lo, v_lo, g_lo) = (x, w, v, g(v));
            if side == -1 {
                g_hi *= 0.5;
            }
            side = -1;
        } else {
            (x_hi, g_hi) = (x, g(v));
            if side == 1 {
                g_lo *= 0.5;
            }
            side = 1;
        }
    }
    (w_lo, v_lo)
}

/// How tolerances changed the plan.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Robust {
    /// Width the nominal network allows, s.
    pub nominal_width: f64,
    /// Width every examined case allows, s.
    pub width: f64,
    /// Run the nominal network needs, s.
    pub nominal_run: f64,
    /// Run covering the slowest case, s.
    pub run: f64,
}

/// The plan stage's choice: the rule-of-thumb pulse, the budget search, the tolerances, and
/// the pulse it recommends before the bench's limits.
#[derive(Debug, Clone)]
pub struct PulseChoice {
    /// The prepared network (its run may be stretched to cover the tolerance cases).
    pub prep: Prepared,
    /// The rule-of-thumb pulse.
    pub rule: Trapezoid,
    /// Its errors.
    pub rule_estimate: ErrorEstimate,
    /// The error-budget search, when a budget was given.
    pub budget: Option<Budget>,
    /// The recommended pulse (requested area, chosen width, tied edges).
    pub pulse: Trapezoid,
    /// Tolerance spread, for netlists whose parts carry tolerances.
    pub tolerance: Option<ToleranceReport>,
    /// How tolerances narrowed the width and stretched the run.
    pub robust: Option<Robust>,
    /// Notes.
    pub notes: Vec<Note>,
    /// Warnings from the network, the tolerances and the budget search.
    pub warnings: Vec<Warning>,
}

/// Width a prepared network allows: the budget search, or the rule of thumb without a budget.
fn allowed_width(prep: &Prepared, s: &PlanSettings) -> (Option<Target>, f64) {
    let rule_width = prep.tau_plan / s.width_ratio;
    let target = s
        .target_error
        .map(|budget| widest_within(&prep.estimator, prep, s, budget));
    let width = match target {
        Some(Target::Met { width, .. } | Target::Capped { width, .. }) => width,
        _ => rule_width,
    };
    (target, width)
}

/// The tolerance analysis of a netlist, with a note when corners are too many.
fn tolerances(
    spec: &NetworkSpec,
    s: &PlanSettings,
    progress: &(dyn Fn(usize, usize) + Sync),
    notes: &mut Vec<Note>,
) -> Option<ToleranceReport> {
    let NetworkSpec::Netlist(spec) = spec else {
        return None;
    };
    if !s.tolerances {
        return None;
    }
    let parts = crate::tolerance::toleranced_parts(spec);
    let total = match s.samples {
        Some(n) => n,
        None if parts <= crate::tolerance::MAX_CORNER_PARTS => 1 << parts,
        None => {
            notes.push(Note::TooManyCorners { parts });
            0
        }
    };
    crate::tolerance::analyse(spec, s.significance, s.samples, s.seed, &|k| {
        progress(k, total)
    })
    .ok()
    .flatten()
}

/// Choose the pulse for a network: rule of thumb, budget search, tolerance-robust width and
/// run. `progress` reports long steps (tolerance cases) as (done, total).
pub fn choose(
    net: &Network,
    spec: &NetworkSpec,
    area: AreaRule,
    s: &PlanSettings,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> PulseChoice {
    let mut prep = prepare(net, s);
    let rule_width = prep.tau_plan / s.width_ratio;
    let rule = tied_pulse(area.area(rule_width), rule_width, s.edge_ratio);
    let rule_estimate = prep.estimator.estimate(&rule, prep.run);
    let (target, mut width) = allowed_width(&prep, s);
    let widening = matches!(target, Some(Target::Met { .. } | Target::Capped { .. }))
        .then_some(width / rule_width);
    let mut notes = Vec::new();
    let mut warnings = prep.warnings.clone();
    let tolerance = tolerances(spec, s, progress, &mut notes);
    let mut robust = None;
    if let Some(rep) = &tolerance {
        let fast = prepare(&rep.fastest, s);
        let slow = prepare(&rep.slowest, s);
        let (_, w_fast) = allowed_width(&fast, s);
        let nominal = (width, prep.run);
        width = width.min(w_fast);
        prep.run = prep.run.max(slow.run).max(fast.run);
        robust = Some(Robust {
            nominal_width: nominal.0,
            width,
            nominal_run: nominal.1,
            run: prep.run,
        });
        if rep.failures > 0 {
            warnings.push(Warning::ToleranceCasesFailed {
                failures: rep.failures,
            });
        }
    }
    if let (Some(Target::Unreachable { width, value }), Some(budget)) = (&target, s.target_error) {
        warnings.push(Warning::BudgetUnreachable {
            metric: s.metric.name(),
            budget,
            width: *width,
            value: *value,
        });
    }
    PulseChoice {
        pulse: tied_pulse(area.area(width), width, s.edge_ratio),
        prep,
        rule,
        rule_estimate,
        budget: target.map(|target| Budget { target, widening }),
        tolerance,
        robust,
        notes,
        warnings,
    }
}

/// Warnings about one pulse against the network and the budget.
pub fn pulse_warnings(
    s: &PlanSettings,
    prep: &Prepared,
    pulse: &Trapezoid,
    estimate: &ErrorEstimate,
    stated_run: Option<f64>,
) -> Vec<Warning> {
    let mut out = Vec::new();
    let width = pulse.width_50();
    if let Some(budget) = s.target_error {
        let value = estimate.metric(s.metric);
        if value > budget * (1.0 + 1e-9) {
            out.push(Warning::PulseWideForBudget {
                metric: s.metric.name(),
                value,
                budget,
            });
        }
    }
    // A met budget vouches for a wide pulse; the user's own ratio, or without a budget the
    // rule of thumb, is held against it otherwise.
    let vouched = s
        .target_error
        .is_some_and(|b| estimate.metric(s.metric) <= b * (1.0 + 1e-9));
    let ratio = match s.min_width_ratio {
        Some(r) => Some(r),
        None if !vouched => Some(RULE_MAX_WIDTH_RATIO),
        None => None,
    };
    if let Some(ratio) = ratio.filter(|r| width > prep.tau_plan / r * (1.0 + 1e-9)) {
        out.push(Warning::PulseWideForNetwork {
            width,
            ratio,
            tau: prep.tau_plan,
        });
    }
    let edge = pulse.rise_10_90().max(pulse.fall_10_90());
    if edge > width / 10.0 {
        out.push(Warning::PulseSlowEdges { edge, width });
    }
    if width < prep.tau_plan * 1e-6 {
        out.push(Warning::PulseNarrow {
            width,
            tau: prep.tau_plan,
        });
    }
    if let (Some(run), Some(settle)) = (stated_run, prep.shape.settle) {
        let need = prep.run.max(settle);
        if run < need {
            out.push(Warning::RunShort { run, need });
        }
    }
    out
}
