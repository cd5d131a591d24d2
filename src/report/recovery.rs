//! The recovery's renderers: the text report, the JSON object (the `Recovery` serialised, with
//! worded warnings beside their codes) and the recovered h(t) with its band as CSV.

use super::words::Units;
use crate::measure::{
    self, Estimate, Recovery, Warning,
    compare::{Quantity, Verdict},
};
use crate::scenario::Scenario;
use crate::units::{self, Dim, eng_sig, percent};
use std::fmt::Write as _;
use std::path::Path;

pub fn to_json(rec: &Recovery, sc: &Scenario) -> serde_json::Value {
    let mut v = serde_json::to_value(rec).unwrap_or(serde_json::Value::Null);
    if let serde_json::Value::Object(m) = &mut v {
        m.insert("scenario".into(), sc.file.clone().into());
        let worded: Vec<serde_json::Value> = rec
            .warnings
            .iter()
            .map(|w| serde_json::json!({"code": w.code(), "message": word(w, sc)}))
            .collect();
        m.insert("worded_warnings".into(), worded.into());
    }
    v
}

/// The recovered h(t) with its 95 % band on the capture's grid (t > 0 since time zero),
/// beside the raw and aligned readings and the instants they refer to.
pub fn write_csv(path: &Path, cap: &measure::Capture, rec: &Recovery) -> std::io::Result<()> {
    let c = &rec.curves;
    let mut buf = Vec::new();
    {
        let mut w = csv::Writer::from_writer(&mut buf);
        w.write_record([
            "t_s",
            "h_fit_per_s",
            "h_low_per_s",
            "h_high_per_s",
            "raw_tau_s",
            "raw_per_s",
            "aligned_tau_s",
            "aligned_per_s",
        ])?;
        let area = c.pulse.area();
        let (cen, var, end) = (c.pulse.centroid(), c.pulse.variance(), c.end);
        let corr = rec.readings.aligned_corrected.is_some();
        for i in 0..cap.len() {
            let t = cap.time[i] - c.zero;
            if t <= 0.0 {
                continue;
            }
            let (h, half) = c.h_band(t);
            let f = |v: f64| format!("{v:.12e}");
            let mut row = vec![f(t), f(h), f(h - half), f(h + half)];
            if t >= end && !rec.clipping.is_clipped(i) {
                let y = (cap.output.values[i] - c.baseline(t)) / area;
                let a = if corr {
                    y - 0.5 * var * c.modes.set.tail(t - end, 2) / area
                } else {
                    y
                };
                row.extend([f(t - end), f(y), f(t - cen), f(a)]);
            } else {
                row.extend([String::new(), String::new(), String::new(), String::new()]);
            }
            w.write_record(&row)?;
        }
        w.flush()?;
    }
    super::files::write_atomic(path, &buf)
}

/// Units of h: output per (input × second), from the drive's and the output's kinds.
fn h_unit(sc: &Scenario) -> String {
    Units::of(sc.drive, sc.output).h
}

/// Digits that the uncertainty supports: two significant digits of the 95 % half-width.
fn digits(value: f64, half: Option<f64>) -> usize {
    match half {
        Some(u) if u > 0.0 && value != 0.0 => {
            ((value.abs() / u).log10().floor() as i64 + 2).clamp(2, 10) as usize
        }
        Some(_) => 8,
        None => 4,
    }
}

/// "v ± U unit" with U the 95 % half-width.
fn est(e: &Estimate, dim: Dim) -> String {
    let half = e.std.map(|s| s * measure::stats::z95());
    let v = eng_sig(e.value, dim, digits(e.value, half));
    match half {
        Some(u) => format!("{v} ± {}", eng_sig(u, dim, 2)),
        None => format!("{v} (no interval)"),
    }
}

fn est_unit(e: &Estimate, unit: &str) -> String {
    let half = e.std.map(|s| s * measure::stats::z95());
    let v = units::eng_plain(e.value, digits(e.value, half));
    match half {
        Some(u) => format!("{v} ± {} {unit}", units::eng_plain(u, 2)),
        None => format!("{v} {unit} (no interval)"),
    }
}

fn out_dim(rec: &Recovery) -> Dim {
    match rec.capture.channel_unit.as_str() {
        u if u.ends_with('A') => Dim::Current,
        _ => Dim::Voltage,
    }
}

/// The text report.
pub fn render(rec: &Recovery, sc: &Scenario) -> String {
    let mut s = String::new();
    let title = sc.title.as_deref().unwrap_or(&sc.name);
    let _ = writeln!(
        s,
        "pulseplan recover — {} against {}: {title}\n",
        rec.capture.file, sc.file
    );
    capture_section(&mut s, rec);
    pulse_section(&mut s, rec, sc);
    fit_section(&mut s, rec, sc);
    readings_section(&mut s, rec, sc);
    if let Some(c) = &rec.comparison {
        comparison_section(&mut s, rec, c, sc);
    }
    warnings_section(&mut s, rec, sc);
    s.push('\n');
    s
}

fn capture_section(s: &mut String, rec: &Recovery) {
    let c = &rec.capture;
    let d = out_dim(rec);
    let step = c
        .uniform_step_s
        .map_or("non-uniform steps".to_string(), |dt| {
            format!("uniform step {}", units::eng(dt, Dim::Time))
        });
    let _ = writeln!(s, "Capture");
    let stim = c.stimulus.as_ref().map_or(String::new(), |(n, k)| {
        format!(", stimulus \"{n}\" (column {k})")
    });
    let _ = writeln!(
        s,
        "  channel \"{}\" (column {}){stim}; {} samples, {step}",
        c.channel.0, c.channel.1, c.samples
    );
    let tz = &rec.time_zero;
    let why = match tz.source {
        measure::condition::TimeZeroSource::Stimulus => "stimulus 50 % crossing less half its rise",
        measure::condition::TimeZeroSource::Given => "--t0",
        measure::condition::TimeZeroSource::Trigger => "the trigger (t = 0 of the file's time)",
        measure::condition::TimeZeroSource::PlannedPreTrigger => "the planned pre-trigger",
        measure::condition::TimeZeroSource::FirstSample => "the first sample (nothing else said)",
    };
    let _ = writeln!(
        s,
        "  time zero    {} capture time, from {why}",
        units::eng(tz.capture_time_s, Dim::Time)
    );
    let n = &rec.noise;
    let src = match (n.source, &n.pre_trigger) {
        (measure::NoiseSource::PreTrigger, Some(p)) => format!(
            "from {} pre-trigger samples (lag-1 autocorrelation {:+.3}, limit ±{:.3})",
            p.samples, p.lag1, p.lag1_limit
        ),
        _ => "from the fit's residual".to_string(),
    };
    let _ = writeln!(
        s,
        "  noise σ      {} per sample, {src}",
        eng_sig(n.sigma, d, 3)
    );
    let drift = rec.baseline.1.map_or("no drift fitted".into(), |e| {
        format!("drift {}/s", est(&e, d))
    });
    let _ = writeln!(
        s,
        "  baseline     offset {}, {drift}",
        est(&rec.baseline.0, d)
    );
    let clip = if rec.clipping.samples == 0 {
        "none".to_string()
    } else {
        format!(
            "{} samples in {} run(s), left out of every fit",
            rec.clipping.samples, rec.clipping.runs
        )
    };
    let _ = writeln!(s, "  clipping     {clip}\n");
}

fn pulse_section(s: &mut String, rec: &Recovery, sc: &Scenario) {
    let p = &rec.pulse;
    let ad = sc.drive.dim();
    let how = match (&p.measured, p.stated_is_given) {
        (Some(_), _) => "measured on the stimulus channel (IEEE Std 181 levels and durations)",
        (None, true) => "as stated in the scenario's [pulse]",
        (None, false) => "as planned for the scenario (no [pulse] and no stimulus channel)",
    };
    let _ = writeln!(s, "Pulse applied, {how}");
    let st = &p.stated;
    let (amp, dur, rise, fall) = match &p.measured {
        Some(m) => (m.amplitude, m.duration_50_s, m.rise_10_90_s, m.fall_10_90_s),
        None => (
            st.amplitude,
            st.duration_50_s,
            st.rise_10_90_s,
            st.fall_10_90_s,
        ),
    };
    let t = |v: f64| units::eng(v, Dim::Time);
    let _ = writeln!(
        s,
        "  amplitude {}   area {}{}   50 % duration {}   rise 10–90 % {}   fall 90–10 % {}",
        units::eng(amp, ad),
        units::eng_number(p.area, 4),
        sc.drive.area_unit(),
        t(dur),
        t(rise),
        t(fall)
    );
    let _ = writeln!(
        s,
        "  centroid {} after time zero, ends at {}",
        t(p.centroid_s),
        t(p.end_s)
    );
    if let Some(d) = &p.differences {
        let _ = writeln!(
            s,
            "  measured vs {}: area {}, amplitude {}, duration {}, rise {}, fall {}",
            if p.stated_is_given {
                "stated"
            } else {
                "planned"
            },
            percent(d.area),
            percent(d.amplitude),
            percent(d.duration_50),
            percent(d.rise_10_90),
            percent(d.fall_10_90)
        );
    }
    s.push('\n');
}

fn pole_text(m: &measure::FittedMode) -> String {
    let z = measure::stats::z95();
    let half = |e: &Estimate| {
        e.std
            .map_or("?".to_string(), |v| units::eng_plain(z * v, 2))
    };
    if m.pair {
        format!(
            "{} ± {} ± j({} ± {})",
            units::eng_plain(
                m.pole_re.value,
                digits(m.pole_re.value, m.pole_re.std.map(|v| z * v))
            ),
            half(&m.pole_re),
            units::eng_plain(
                m.pole_im.value,
                digits(m.pole_im.value, m.pole_im.std.map(|v| z * v))
            ),
            half(&m.pole_im)
        )
    } else {
        est_unit(&m.pole_re, "").trim_end().to_string()
    }
}

fn fit_section(s: &mut String, rec: &Recovery, sc: &Scenario) {
    let f = &rec.fit;
    let _ = writeln!(
        s,
        "Modal fit (matrix pencil, then variable projection weighted by σ)"
    );
    if let Some(p) = &f.pencil {
        let gap = p
            .gap
            .map_or("—".into(), |g| format!("{}×", units::eng_plain(g, 3)));
        let _ = writeln!(
            s,
            "  pencil order {} (MDL {}), singular-value gap {gap}",
            p.order, p.order_mdl
        );
    }
    let rows = if f.block > 1 {
        format!("{} rows (block means of up to {} samples)", f.rows, f.block)
    } else {
        format!("{} samples", f.rows)
    };
    let _ = writeln!(
        s,
        "  {} mode(s) over {rows}; χ²/dof {:.4} ({} dof), {} iterations{}",
        rec.modes.len(),
        f.chi2_reduced,
        f.dof,
        f.iterations,
        if f.converged { "" } else { " (not converged)" }
    );
    let _ = writeln!(
        s,
        "  residual whiteness: Ljung–Box Q = {:.1} over {} lags, p = {:.3}",
        f.whiteness.0, f.whiteness.1, f.whiteness.2
    );
    modes_text(s, rec, sc);
}

/// The fitted modes, h(0⁺) and D.
fn modes_text(s: &mut String, rec: &Recovery, sc: &Scenario) {
    let hu = &h_unit(sc);
    let _ = writeln!(s, "\nFitted modes (± is the 95 % interval)");
    for (k, m) in rec.modes.iter().enumerate() {
        let _ = writeln!(s, "  {}  pole {} rad/s", k + 1, pole_text(m));
        if m.pair {
            let _ = writeln!(
                s,
                "     τ {}   |p| {} rad/s   ζ {}",
                est(&m.time_constant, Dim::Time),
                est_unit(&m.natural_frequency, "").trim_end(),
                est_unit(&m.damping, "").trim_end()
            );
        } else {
            let _ = writeln!(s, "     τ {}", est(&m.time_constant, Dim::Time));
        }
        let res = if m.pair {
            format!(
                "{} {hu}, imaginary part {} {hu}",
                est_unit(&m.residue_re, "").trim_end(),
                est_unit(&m.residue_im, "").trim_end()
            )
        } else {
            est_unit(&m.residue_re, hu)
        };
        let flag = if m.faster_than_pulse {
            "   (faster than the pulse)"
        } else {
            ""
        };
        let _ = writeln!(s, "     residue {res}{flag}");
    }
    let _ = writeln!(s, "  h(0⁺) = Σ r  {}", est_unit(&rec.h0, hu));
    match (&rec.direct.estimate, &rec.direct.reason) {
        (Some(d), _) => {
            let _ = writeln!(
                s,
                "  direct term D {}   (from {} samples during the pulse)",
                est_unit(d, "").trim_end(),
                rec.direct.samples
            );
        }
        _ => {
            let _ = writeln!(
                s,
                "  direct term D not estimated: fewer than 3 samples during the pulse"
            );
        }
    }
    s.push('\n');
}

fn readings_section(s: &mut String, rec: &Recovery, sc: &Scenario) {
    let r = &rec.readings;
    let hu = &h_unit(sc);
    let _ = writeln!(s, "Three readings of h");
    let _ = writeln!(
        s,
        "  raw      y(t + T)/area: the pulse taken as an impulse at its end T"
    );
    let _ = writeln!(
        s,
        "  aligned  y(t + c)/area − ½σₓ²h″: taken at its centroid c, second-order term removed"
    );
    let _ = writeln!(
        s,
        "  modal    Σ rₖ e^(pₖt): the fitted modes with the pulse removed exactly"
    );
    let corr = r
        .aligned_corrected
        .as_ref()
        .map_or("— (pulse too wide for the correction)".into(), |e| {
            est_unit(e, hu)
        });
    let _ = writeln!(
        s,
        "  at 0⁺:            raw {}   modal {}",
        est_unit(&r.raw_h0, hu),
        est_unit(&r.modal_h0, hu)
    );
    let _ = writeln!(
        s,
        "  at T − c = {}: aligned {}, corrected {corr}   modal {}",
        units::eng(r.aligned_at_s, Dim::Time),
        est_unit(&r.aligned, hu),
        est_unit(&r.modal_at_aligned, hu)
    );
    if let Some((h0, hal)) = r.model {
        let _ = writeln!(
            s,
            "  model:            h(0⁺) {} {hu}, h(T − c) {} {hu}",
            units::eng_plain(h0, 5),
            units::eng_plain(hal, 5)
        );
    }
    let _ = writeln!(
        s,
        "  {:>12}  {:>12}  {:>12}  {:>24}  {:>12}",
        "t", "raw", "aligned", "modal ± 95 %", "model"
    );
    let cell = |v: Option<f64>| v.map_or("—".into(), |x| units::eng_plain(x, 5));
    for row in &r.table {
        let _ = writeln!(
            s,
            "  {:>12}  {:>12}  {:>12}  {:>24}  {:>12}",
            units::eng(row.t_s, Dim::Time),
            cell(row.raw),
            cell(row.aligned),
            est_unit(&row.modal, "").trim_end(),
            cell(row.model)
        );
    }
    let _ = writeln!(
        s,
        "  (h in {hu}; raw and aligned read single samples, so they carry the noise σ/area)\n"
    );
}

fn quantity_name(q: Quantity) -> &'static str {
    match q {
        Quantity::TimeConstant => "time constant",
        Quantity::NaturalFrequency => "natural frequency",
        Quantity::Damping => "damping ratio",
        Quantity::ResidueRe => "residue (real part)",
        Quantity::ResidueIm => "residue (imaginary part)",
        Quantity::H0 => "h(0⁺)",
        Quantity::Direct => "direct term D",
    }
}

fn comparison_section(
    s: &mut String,
    rec: &Recovery,
    c: &measure::compare::Comparison,
    sc: &Scenario,
) {
    let _ = writeln!(s, "Against the model ({})", sc.network.form.name());
    for d in &c.differences {
        let mode = d.mode.map_or(" ".repeat(7), |k| format!("mode {} ", k + 1));
        let rel = match (d.relative, d.relative_std) {
            (Some(r), Some(u)) => format!("{} ± {}", percent(r), units::percent_unsigned(1.96 * u)),
            _ => "—".into(),
        };
        let show = |v: f64| match d.quantity {
            Quantity::TimeConstant => eng_sig(v, Dim::Time, 6),
            Quantity::NaturalFrequency => eng_sig(v, Dim::AngularFrequency, 6),
            Quantity::ResidueRe | Quantity::ResidueIm | Quantity::H0 => {
                format!("{} {}", units::eng_plain(v, 6), h_unit(sc))
            }
            Quantity::Damping | Quantity::Direct => units::eng_plain(v, 6),
        };
        let _ = writeln!(
            s,
            "  {mode}{:<26} measured {:>14}  model {:>14}  {rel:>24}  z = {:+.2}",
            quantity_name(d.quantity),
            show(d.measured),
            show(d.model),
            d.z
        );
    }
    if let Some(r) = &c.residual {
        if r.samples > 0 {
            let _ = writeln!(
                s,
                "  capture vs the model's predicted y(t): RMS {:.3} σ, largest {:.2} σ over {} samples",
                r.rms_sigma, r.max_sigma, r.samples
            );
        }
        if let (Some(d), Some(p)) = (r.delta_chi2, r.p_value) {
            let _ = writeln!(
                s,
                "  the model's modes in place of the fitted ones raise χ² by {d:.2} ({} parameters fixed, p = {p:.3})",
                r.dof
            );
        }
    }
    for (re, im) in &c.unmatched_model {
        let _ = writeln!(
            s,
            "  model pole {} {:+} j rad/s: not seen in the capture",
            units::eng_plain(*re, 5),
            units::eng_plain(*im, 5)
        );
    }
    for k in &c.extra_fitted {
        let _ = writeln!(s, "  fitted mode {} has no model partner", k + 1);
    }
    let _ = writeln!(s, "  verdict: {}", verdict_text(c));
    if let Some(a) = &c.parts {
        parts_text(s, a);
    }
    let _ = rec;
    s.push('\n');
}

fn verdict_text(c: &measure::compare::Comparison) -> String {
    let largest = c.largest.map(|k| &c.differences[k]);
    let what = largest.map_or(String::new(), |d| {
        let mode = d
            .mode
            .map_or(String::new(), |k| format!(" of mode {}", k + 1));
        match (d.relative, d.relative_std) {
            (Some(r), Some(u)) => format!(
                "the {}{mode} is {} ± {} {} the model's (z = {:+.1}, threshold {:.2})",
                quantity_name(d.quantity),
                units::percent_unsigned(r),
                units::percent_unsigned(1.96 * u),
                if r >= 0.0 { "above" } else { "below" },
                d.z,
                c.z_critical
            ),
            _ => format!("{} differs by z = {:+.1}", quantity_name(d.quantity), d.z),
        }
    });
    match c.verdict {
        Verdict::Consistent => format!("consistent with the model (largest difference: {what})"),
        Verdict::WithinTolerance => format!(
            "differs from the nominal model, explained by parts within their tolerances: {what}"
        ),
        Verdict::Inconsistent => format!("inconsistent with the model: {what}"),
    }
}

fn parts_text(s: &mut String, a: &measure::parts::Attribution) {
    let _ = writeln!(
        s,
        "  one part alone explaining the measurement ({} measured numbers):",
        a.measured
    );
    for f in a.single.iter().take(5) {
        let tol = match (f.tolerance, f.within_tolerance) {
            (Some(t), Some(true)) => format!("within its {} tolerance", units::percent_unsigned(t)),
            (Some(t), _) => format!("outside its {} tolerance", units::percent_unsigned(t)),
            _ => "no tolerance given".into(),
        };
        let mark = if a.culprit.as_deref() == Some(&f.part) {
            "  ← explains it"
        } else {
            ""
        };
        let u = f.value.std.map_or(String::new(), |v| {
            format!(" ± {}", units::percent_unsigned(1.96 * v / f.nominal))
        });
        let _ = writeln!(
            s,
            "    {:<8} ≈ {} ({}{u}), {tol}; misfit χ² {:.2} (p = {:.3}){mark}",
            f.part,
            units::eng_plain(f.value.value, 4),
            percent(f.change),
            f.chi2,
            f.p_value
        );
    }
    if let Some(j) = &a.joint {
        let list: Vec<String> = j
            .changes
            .iter()
            .map(|(n, c)| format!("{n} {}", percent(*c)))
            .collect();
        let _ = writeln!(
            s,
            "  all toleranced parts together: {} — misfit χ² {:.2} (p = {:.3}), {}",
            list.join(", "),
            j.chi2,
            j.p_value,
            if j.within_tolerance {
                "within tolerances"
            } else {
                "not within tolerances"
            }
        );
    }
}

/// A warning in words.
pub fn word(w: &Warning, sc: &Scenario) -> String {
    let _ = sc;
    word_record(w).unwrap_or_else(|| word_fit(w))
}

/// Warnings about the record and the pulse.
fn word_record(w: &Warning) -> Option<String> {
    let t = |v: f64| units::eng(v, Dim::Time);
    let text = match w {
        Warning::Clipped { samples, runs } => format!(
            "{samples} samples in {runs} run(s) sit at the record's extreme code (clipped); they were left out of every fit — reduce the amplitude or widen the range"
        ),
        Warning::RecordShort {
            after_pulse_s,
            run_s,
        } => format!(
            "the record runs {} after the pulse, shorter than the planned run {}: slow modes are poorly determined",
            t(*after_pulse_s),
            t(*run_s)
        ),
        Warning::NoPreTrigger { samples } => format!(
            "only {samples} samples before the pulse: the noise σ comes from the fit's residual and the baseline from the fit alone"
        ),
        Warning::NoiseNotWhite { lag1, limit } => format!(
            "the pre-trigger noise is correlated (lag-1 autocorrelation {lag1:+.3}, beyond ±{limit:.3}): the intervals assume white noise and may be too narrow"
        ),
        Warning::TimeZeroFromPlan { capture_time_s } => format!(
            "time zero taken from the planned pre-trigger ({} capture time); give --t0 or a stimulus channel if the capture was set differently",
            t(*capture_time_s)
        ),
        Warning::TimeZeroAssumed { capture_time_s } => format!(
            "nothing located the pulse; time zero is the first sample ({}); give --t0 or a stimulus channel",
            t(*capture_time_s)
        ),
        Warning::PulseDiffers { area_relative } => format!(
            "the measured pulse's area differs from the stated one by {}: the measured pulse was used",
            percent(*area_relative)
        ),
        _ => return None,
    };
    Some(text)
}

/// Warnings about the fit and the model.
fn word_fit(w: &Warning) -> String {
    let t = |v: f64| units::eng(v, Dim::Time);
    match w {
        Warning::ResidualNotWhite { q, lags, p_value } => format!(
            "the fit's residual is not white (Ljung–Box Q = {q:.1} over {lags} lags, p = {p_value:.2e}): a mode may be missing or the baseline may drift"
        ),
        Warning::ResidualExceedsNoise { chi2_reduced } => format!(
            "the residual is {chi2_reduced:.2}× the pre-trigger noise power: the intervals were widened by that factor"
        ),
        Warning::OrderAmbiguous {
            modes,
            alternative,
            delta_bic,
        } => format!(
            "a fit with {alternative} mode(s) is almost as good as the chosen {modes} (BIC within {delta_bic:.2}); consider --order"
        ),
        Warning::PoleFasterThanPulse {
            pole_re,
            pole_im,
            time_scale_s,
            pulse_width_s,
        } => format!(
            "the pole {} {:+} j rad/s has time scale {}, shorter than the pulse ({}): the tail barely shows it",
            units::eng_plain(*pole_re, 4),
            units::eng_plain(*pole_im, 4),
            t(*time_scale_s),
            t(*pulse_width_s)
        ),
        Warning::ModelModeNotSeen {
            pole_re,
            pole_im,
            hidden_by_pulse,
        } => format!(
            "the model's pole {} {:+} j rad/s is not seen in the capture{}",
            units::eng_plain(*pole_re, 4),
            units::eng_plain(*pole_im, 4),
            if *hidden_by_pulse {
                ": it is faster than the pulse, whose end hides it"
            } else {
                ": its share of the tail is below the noise"
            }
        ),
        Warning::FitNotConverged { iterations } => format!(
            "the pole refinement stopped at its bound of {iterations} iterations without meeting its test"
        ),
        Warning::PulseSamplesMisfit { chi2_reduced } => format!(
            "the samples during the pulse do not fit the modes plus a direct term (χ²/dof {chi2_reduced:.2}): a mode faster than the pulse may be hidden"
        ),
        Warning::ModelInconsistent { z } => format!(
            "the capture is inconsistent with the model (largest difference {z:.1} standard uncertainties)"
        ),
        _ => String::new(),
    }
}

fn warnings_section(s: &mut String, rec: &Recovery, sc: &Scenario) {
    if rec.warnings.is_empty() {
        let _ = writeln!(s, "No warnings.");
        return;
    }
    let _ = writeln!(s, "Warnings");
    for w in &rec.warnings {
        let _ = writeln!(s, "  [{}] {}", w.code(), word(w, sc));
    }
}
