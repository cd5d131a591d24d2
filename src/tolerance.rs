//! Part tolerances: the spread of the fastest and slowest time scales and of h(0⁺) over the
//! corners (few parts) or a seeded Monte Carlo sample, which parts dominate it, and the
//! extreme networks a robust plan must satisfy.

use crate::netlist::{self, NetlistError, NetlistSpec, Part, PartKind};
use crate::network::Network;

/// At most this many toleranced parts are enumerated corner by corner (2ⁿ analyses).
pub const MAX_CORNER_PARTS: usize = 10;
/// Above this many toleranced parts, sensitivities come from the Monte Carlo sample
/// (regression slopes) instead of two extra analyses per part.
pub const MAX_DIFFERENCED_PARTS: usize = 40;
/// Relative difference below which two cases' time scales are the same (rounding).
const TIE: f64 = 1e-12;
/// Relative step of the central differences behind the sensitivities.
const SENSITIVITY_STEP: f64 = 1e-4;

/// Nominal value and range over the cases examined.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Spread {
    /// Value with every part nominal.
    pub nominal: f64,
    /// Smallest over the cases.
    pub min: f64,
    /// Largest over the cases.
    pub max: f64,
}

impl Spread {
    fn new(nominal: f64) -> Spread {
        Spread {
            nominal,
            min: nominal,
            max: nominal,
        }
    }

    fn add(&mut self, v: f64) {
        if v.is_finite() {
            self.min = self.min.min(v);
            self.max = self.max.max(v);
        }
    }
}

/// Normalised sensitivities (∂ln q/∂ln x) of the three quantities to one part.
#[derive(Debug, Clone, PartialEq)]
pub struct Sensitivity {
    /// Part name.
    pub part: String,
    /// Its tolerance (fraction).
    pub tolerance: f64,
    /// ∂ln τ_fast/∂ln x (fastest significant time scale).
    pub tau_fast: f64,
    /// ∂ln τ_slow/∂ln x.
    pub tau_slow: f64,
    /// ∂ln |h(0⁺)|/∂ln x (0 when h(0⁺) = 0).
    pub h0: f64,
}

impl Sensitivity {
    /// The largest share of spread this part can cause: max |S|·tolerance.
    pub fn influence(&self) -> f64 {
        self.tau_fast
            .abs()
            .max(self.tau_slow.abs())
            .max(self.h0.abs())
            * self.tolerance
    }
}

/// How the cases were chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Every combination of each toleranced part at its two band edges.
    Corners {
        /// Number of corners.
        count: usize,
    },
    /// Values drawn uniformly within each band (seeded, reproducible).
    MonteCarlo {
        /// Number of samples.
        samples: usize,
        /// Seed.
        seed: u64,
    },
}

/// The spread and the extreme cases.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ToleranceReport {
    /// How the cases were chosen.
    pub method: Method,
    /// Fastest significant time scale, s.
    #[serde(rename = "tau_fast_significant")]
    pub tau_fast: Spread,
    /// Slowest time constant, s.
    pub tau_slow: Spread,
    /// h(0⁺).
    #[serde(rename = "h0_plus")]
    pub h0: Spread,
    /// Per-part sensitivities, most influential first.
    #[serde(rename = "sensitivity")]
    pub sensitivities: Vec<Sensitivity>,
    /// The case with the fastest significant time scale (the width must suit it).
    #[serde(skip)]
    pub fastest: Network,
    /// The case with the slowest time constant (the run must cover it).
    #[serde(skip)]
    pub slowest: Network,
    /// Cases that could not be analysed (e.g. a corner that makes the circuit singular).
    pub failures: usize,
}

/// The three quantities of one case.
#[derive(Debug, Clone, Copy)]
struct Figures {
    tau_fast: f64,
    tau_slow: f64,
    h0: f64,
}

fn figures(net: &Network, threshold: f64) -> Figures {
    Figures {
        tau_fast: net.significance(threshold).tau,
        tau_slow: net.tau_slow().unwrap_or(f64::NAN),
        h0: net.h0_plus(),
    }
}

/// A part's main value scaled by a factor (R, C, L values; coupling k, kept inside ±1;
/// source gains; an op-amp's open-loop gain).
fn scaled(part: &Part, value: f64, factor: f64) -> f64 {
    match part.kind {
        PartKind::Coupling { .. } => (value * factor).clamp(-0.999_999, 0.999_999),
        _ => value * factor,
    }
}

/// The main values of every part with the toleranced ones scaled by `factors`.
fn values_with(
    spec: &NetlistSpec,
    nominal: &[f64],
    toleranced: &[usize],
    factors: &[f64],
) -> Vec<f64> {
    let mut v = nominal.to_vec();
    for (&i, &f) in toleranced.iter().zip(factors) {
        v[i] = scaled(&spec.parts[i], nominal[i], f);
    }
    v
}

/// SplitMix64 (Steele, Lea & Flood 2014): a small, well-mixed generator; one stream per
/// sample index so results do not depend on how samples are split across threads.
fn uniform(seed: u64, index: u64, k: u64) -> f64 {
    let mut z = seed
        .wrapping_add(index.wrapping_mul(0x9E37_79B9_7F4A_7C15))
        .wrapping_add(k.wrapping_mul(0xD1B5_4A32_D192_ED03));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 53) as f64
}

/// Run `f` over 0..n on every core (std scoped threads), keeping the results in order.
fn parallel_map<T: Send>(n: usize, f: &(dyn Fn(usize) -> T + Sync)) -> Vec<T> {
    let threads = std::thread::available_parallelism()
        .map_or(1, |c| c.get())
        .min(n.max(1));
    let chunk = n.div_ceil(threads);
    std::thread::scope(|scope| {
        let handles: Vec<_> = (0..threads)
            .map(|t| {
                scope.spawn(move || {
                    (t * chunk..((t + 1) * chunk).min(n))
                        .map(f)
                        .collect::<Vec<T>>()
                })
            })
            .collect();
        handles
            .into_iter()
            .flat_map(|h| h.join().expect("a tolerance worker panicked"))
            .collect()
    })
}

fn analyse_net(spec: &NetlistSpec) -> Result<Network, NetlistError> {
    netlist::analyse(spec).map(Network::from_circuit)
}

/// Number of toleranced parts in a netlist.
pub fn toleranced_parts(spec: &NetlistSpec) -> usize {
    spec.parts
        .iter()
        .filter(|p| p.tolerance.is_some_and(|t| t > 0.0))
        .count()
}

/// One tolerance study: the netlist validated once, its toleranced parts and how the cases
/// vary them.
struct Study<'a> {
    spec: &'a NetlistSpec,
    validated: netlist::Validated,
    /// Indices of the toleranced parts, and their tolerances.
    toleranced: Vec<usize>,
    tols: Vec<f64>,
    /// Every part's nominal main value.
    base: Vec<f64>,
    threshold: f64,
    corners: bool,
    seed: u64,
    nominal: Figures,
}

/// Per case: its figures and its index (`None` when the case could not be analysed).
type Outcome = Option<(Figures, usize)>;

impl Study<'_> {
    /// The factors of case `case` on the toleranced parts: band edges for corners, uniform
    /// within the band (seeded per case) for a sample.
    fn factors(&self, case: usize) -> Vec<f64> {
        let corner = |k: usize, t: f64| if case >> k & 1 == 1 { 1.0 + t } else { 1.0 - t };
        let draw =
            |k: usize, t: f64| 1.0 + t * (2.0 * uniform(self.seed, case as u64, k as u64) - 1.0);
        (self.tols.iter().enumerate())
            .map(|(k, &t)| {
                if self.corners {
                    corner(k, t)
                } else {
                    draw(k, t)
                }
            })
            .collect()
    }

    fn values(&self, case: usize) -> Vec<f64> {
        values_with(self.spec, &self.base, &self.toleranced, &self.factors(case))
    }

    /// The figures of a variant by the case path (projected where it can be).
    fn case_figures(&self, values: &[f64]) -> Option<Figures> {
        let net = self
            .validated
            .analyse_values(values)
            .map(Network::from_circuit);
        net.ok().map(|n| figures(&n, self.threshold))
    }

    /// Every case on every core, in case order.
    fn run(&self, count: usize, progress: &(dyn Fn(usize) + Sync)) -> Vec<Outcome> {
        let done = std::sync::atomic::AtomicUsize::new(0);
        parallel_map(count, &|case| {
            let f = self.case_figures(&self.values(case));
            progress(done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1);
            f.map(|f| (f, case))
        })
    }

    /// The network of a case by the full path (the nominal when there is no such case).
    fn network(&self, case: Option<usize>, nominal: &Network) -> Network {
        case.and_then(|c| analyse_net(&netlist::with_values(self.spec, &self.values(c))).ok())
            .unwrap_or_else(|| nominal.clone())
    }

    /// Sensitivities by central differences, one part at a time; both sides by the same
    /// (case) path, so its rounding cancels in the difference.
    fn differenced(&self) -> Vec<Sensitivity> {
        let nominal = self.nominal;
        let rel = |a: f64, b: f64, base: f64| {
            if base == 0.0 || !base.is_finite() {
                0.0
            } else {
                (a - b) / (2.0 * SENSITIVITY_STEP * base)
            }
        };
        parallel_map(self.toleranced.len(), &|k| {
            let i = self.toleranced[k];
            let values = |f: f64| values_with(self.spec, &self.base, &[i], &[f]);
            let case = |f: f64| self.case_figures(&values(f));
            let full = |f: f64| {
                let net = analyse_net(&netlist::with_values(self.spec, &values(f)));
                net.ok().map(|n| figures(&n, self.threshold))
            };
            let of = |fig: &dyn Fn(f64) -> Option<Figures>| {
                let (up, down) = match (fig(1.0 + SENSITIVITY_STEP), fig(1.0 - SENSITIVITY_STEP)) {
                    (Some(u), Some(d)) => (u, d),
                    _ => (nominal, nominal),
                };
                Sensitivity {
                    part: self.spec.parts[i].name.clone(),
                    tolerance: self.tols[k],
                    tau_fast: rel(up.tau_fast, down.tau_fast, nominal.tau_fast),
                    tau_slow: rel(up.tau_slow, down.tau_slow, nominal.tau_slow),
                    h0: rel(up.h0, down.h0, nominal.h0),
                }
            };
            // A degenerate variant the case path cannot difference (a figure not finite) is
            // differenced on the full path instead.
            let s = of(&case);
            if [s.tau_fast, s.tau_slow, s.h0].iter().all(|x| x.is_finite()) {
                s
            } else {
                of(&full)
            }
        })
    }

    /// Regression slopes of ln q on ln x over the sample (independent inputs), only when the
    /// sample is large enough for them to mean something (≥ 10 cases per part).
    fn regressed(&self, results: &[Outcome]) -> Vec<Sensitivity> {
        let ok: Vec<(Figures, Vec<f64>)> = results
            .iter()
            .flatten()
            .map(|(f, case)| (*f, self.factors(*case)))
            .collect();
        if ok.len() < 10 * self.toleranced.len() {
            return Vec::new();
        }
        (0..self.toleranced.len())
            .map(|k| Sensitivity {
                part: self.spec.parts[self.toleranced[k]].name.clone(),
                tolerance: self.tols[k],
                tau_fast: log_slope(&ok, k, &|f| f.tau_fast),
                tau_slow: log_slope(&ok, k, &|f| f.tau_slow),
                h0: log_slope(&ok, k, &|f| f.h0.abs()),
            })
            .collect()
    }
}

/// Least-squares slope of ln q(figures) on ln x[k] over the cases with a positive q.
fn log_slope(ok: &[(Figures, Vec<f64>)], k: usize, q: &dyn Fn(&Figures) -> f64) -> f64 {
    let pts: Vec<(f64, f64)> = ok
        .iter()
        .filter_map(|(f, x)| {
            let v = q(f);
            (v.is_finite() && v > 0.0).then(|| (x[k].ln(), v.ln()))
        })
        .collect();
    let n = pts.len() as f64;
    if n < 3.0 {
        return 0.0;
    }
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    if sxx > 0.0 { sxy / sxx } else { 0.0 }
}

/// The spreads over the cases, the failures, and the cases with the fastest significant and
/// the slowest time scale.
struct Extremes {
    tau_fast: Spread,
    tau_slow: Spread,
    h0: Spread,
    failures: usize,
    fastest: Option<usize>,
    slowest: Option<usize>,
}

fn extremes(nominal: &Figures, results: &[Outcome]) -> Extremes {
    let mut x = Extremes {
        tau_fast: Spread::new(nominal.tau_fast),
        tau_slow: Spread::new(nominal.tau_slow),
        h0: Spread::new(nominal.h0),
        failures: 0,
        fastest: None,
        slowest: None,
    };
    let (mut fastest, mut slowest) = (None::<(f64, usize)>, None::<(f64, usize)>);
    for r in results {
        let Some((f, case)) = r else {
            x.failures += 1;
            continue;
        };
        x.tau_fast.add(f.tau_fast);
        x.tau_slow.add(f.tau_slow);
        x.h0.add(f.h0);
        // Cases equal to rounding (parts that do not move the figure) are ties: the first case
        // keeps them, so rounding noise cannot pick the extreme network.
        if fastest.is_none_or(|(t, _)| f.tau_fast < t * (1.0 - TIE)) {
            fastest = Some((f.tau_fast, *case));
        }
        if f.tau_slow.is_finite() && slowest.is_none_or(|(t, _)| f.tau_slow > t * (1.0 + TIE)) {
            slowest = Some((f.tau_slow, *case));
        }
    }
    x.fastest = fastest.map(|(_, c)| c);
    x.slowest = slowest.map(|(_, c)| c);
    x
}

/// Analyse the tolerances of a netlist. `None` when no part carries a tolerance, or when
/// there are too many parts for corners and no Monte Carlo sample count was given.
///
/// Corners are used when at most [`MAX_CORNER_PARTS`] parts are toleranced and no sample
/// count is asked for; otherwise `samples` Monte Carlo cases with values uniform within each
/// band. `progress` is called with the number of cases finished.
pub fn analyse(
    spec: &NetlistSpec,
    threshold: f64,
    samples: Option<usize>,
    seed: u64,
    progress: &(dyn Fn(usize) + Sync),
) -> Result<Option<ToleranceReport>, NetlistError> {
    let toleranced: Vec<usize> = (spec.parts.iter().enumerate())
        .filter(|(_, p)| p.tolerance.is_some_and(|t| t > 0.0))
        .map(|(i, _)| i)
        .collect();
    if toleranced.is_empty() || (samples.is_none() && toleranced.len() > MAX_CORNER_PARTS) {
        return Ok(None);
    }
    let nominal_net = analyse_net(spec)?;
    let nominal = figures(&nominal_net, threshold);
    // Spreads are relative to the nominal figures: a network without a decaying mode (an
    // undamped tank, say) has no slowest time constant to spread, so no tolerance report.
    if !(nominal.tau_slow.is_finite() && nominal.tau_fast.is_finite() && nominal.h0.is_finite()) {
        return Ok(None);
    }
    let corners = samples.is_none();
    let (method, count) = if corners {
        let count = 1usize << toleranced.len();
        (Method::Corners { count }, count)
    } else {
        let n = samples.unwrap_or(1).max(1);
        (Method::MonteCarlo { samples: n, seed }, n)
    };
    let study = Study {
        spec,
        validated: netlist::Validated::new(spec)?,
        tols: toleranced
            .iter()
            .map(|&i| spec.parts[i].tolerance.unwrap_or(0.0))
            .collect(),
        toleranced,
        base: netlist::main_values(spec),
        threshold,
        corners,
        seed,
        nominal,
    };
    let results = study.run(count, progress);
    let x = extremes(&nominal, &results);
    let mut sensitivities = if corners || study.toleranced.len() <= MAX_DIFFERENCED_PARTS {
        study.differenced()
    } else {
        study.regressed(&results)
    };
    sensitivities.sort_by(|a, b| b.influence().total_cmp(&a.influence()));
    Ok(Some(ToleranceReport {
        method,
        tau_fast: x.tau_fast,
        tau_slow: x.tau_slow,
        h0: x.h0,
        sensitivities,
        fastest: study.network(x.fastest, &nominal_net),
        slowest: study.network(x.slowest, &nominal_net),
        failures: x.failures,
    }))
}

impl serde::Serialize for Sensitivity {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut st = ser.serialize_struct("Sensitivity", 6)?;
        st.serialize_field("part", &self.part)?;
        st.serialize_field("tolerance", &self.tolerance)?;
        st.serialize_field("d_tau_fast", &self.tau_fast)?;
        st.serialize_field("d_tau_slow", &self.tau_slow)?;
        st.serialize_field("d_h0_plus", &self.h0)?;
        st.serialize_field("influence", &self.influence())?;
        st.end()
    }
}

impl serde::Serialize for Method {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut st = ser.serialize_struct("Method", 4)?;
        match *self {
            Method::Corners { count } => {
                st.serialize_field("kind", "corners")?;
                st.serialize_field("cases", &count)?;
            }
            Method::MonteCarlo { samples, seed } => {
                st.serialize_field("kind", "monte-carlo")?;
                st.serialize_field("cases", &samples)?;
                st.serialize_field("seed", &seed)?;
                st.serialize_field("distribution", "uniform within each tolerance band")?;
            }
        }
        st.end()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::netlist::{Output, Stimulus};

    fn rc(tol_r: f64, tol_c: f64) -> NetlistSpec {
        let part = |name: &str, kind: PartKind, tol: f64| Part {
            name: name.into(),
            kind,
            line: 1,
            tolerance: Some(tol),
        };
        NetlistSpec {
            input: "in".into(),
            output: Output::Node("out".into()),
            source_resistance: None,
            stimulus: Stimulus::Voltage,
            parts: vec![
                part(
                    "R1",
                    PartKind::Resistor {
                        nodes: ["in".into(), "out".into()],
                        value: 10e3,
                    },
                    tol_r,
                ),
                part(
                    "C1",
                    PartKind::Capacitor {
                        nodes: ["out".into(), "gnd".into()],
                        value: 100e-9,
                    },
                    tol_c,
                ),
            ],
        }
    }

    #[test]
    fn rc_corners_and_sensitivities() {
        // τ = RC (handbook closed form): the corners span (1 ± tR)(1 ± tC)·RC, and
        // ∂ln τ/∂ln R = ∂ln τ/∂ln C = 1, ∂ln h(0⁺)/∂ln x = −1 since h(0⁺) = 1/RC.
        let (tr, tc) = (0.01, 0.1);
        let rep = analyse(&rc(tr, tc), 0.01, None, 1, &|_| {})
            .unwrap()
            .unwrap();
        let tau = 10e3 * 100e-9;
        assert_eq!(rep.method, Method::Corners { count: 4 });
        assert!((rep.tau_slow.min - tau * (1.0 - tr) * (1.0 - tc)).abs() < 1e-12 * tau);
        assert!((rep.tau_slow.max - tau * (1.0 + tr) * (1.0 + tc)).abs() < 1e-12 * tau);
        assert_eq!(rep.sensitivities[0].part, "C1");
        for s in &rep.sensitivities {
            assert!((s.tau_slow - 1.0).abs() < 1e-6, "{s:?}");
            assert!((s.h0 + 1.0).abs() < 1e-6, "{s:?}");
        }
        assert!((rep.slowest.tau_slow().unwrap() - rep.tau_slow.max).abs() < 1e-15);
    }

    #[test]
    fn monte_carlo_is_seeded_and_within_the_bands() {
        let spec = rc(0.05, 0.05);
        let a = analyse(&spec, 0.01, Some(64), 42, &|_| {})
            .unwrap()
            .unwrap();
        let b = analyse(&spec, 0.01, Some(64), 42, &|_| {})
            .unwrap()
            .unwrap();
        assert_eq!(a.tau_slow, b.tau_slow);
        let tau = 1e-3;
        assert!(a.tau_slow.min >= tau * 0.95 * 0.95 - 1e-15);
        assert!(a.tau_slow.max <= tau * 1.05 * 1.05 + 1e-15);
        assert!(a.tau_slow.max > a.tau_slow.min);
    }
}
