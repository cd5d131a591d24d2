//! The stages in order for one scenario: the plan stage chooses the pulse, the bench stage fits
//! it to the instruments, and the outcome holds both. `assess` runs the same stages on a pulse
//! the user already has.

use crate::bench::{self, BenchInput, BenchPlan};
use crate::estimate::ErrorEstimate;
use crate::fitplan::{self, FitPlan, Reference};
use crate::netlist::{self, NetlistSpec, Output, Stimulus};
use crate::network::{Network, NetworkSpec};
use crate::notice::{Note, Warning};
use crate::plan::{self, Budget, Prepared, Robust};
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::tolerance::ToleranceReport;

/// The recommended pulse for a scenario, with every stage's result.
#[derive(Debug, Clone)]
pub struct PlanOutcome {
    /// The prepared network.
    pub prep: Prepared,
    /// The rule-of-thumb pulse.
    pub rule: Trapezoid,
    /// The rule-of-thumb pulse's errors.
    pub rule_estimate: ErrorEstimate,
    /// The error-budget search, when a budget was given.
    pub budget: Option<Budget>,
    /// The pulse the plan chose, before the bench's limits (equal to `pulse` on an
    /// unconstrained simulator).
    pub ideal_pulse: Trapezoid,
    /// The recommended pulse, as delivered at the circuit's input.
    pub pulse: Trapezoid,
    /// Its errors.
    pub estimate: ErrorEstimate,
    /// The bench's view: limits, noise, period, capture.
    pub bench: BenchPlan,
    /// Tolerance spread, for netlists whose parts carry tolerances.
    pub tolerance: Option<ToleranceReport>,
    /// How tolerances narrowed the width and stretched the run.
    pub robust: Option<Robust>,
    /// Notes about the plan (the bench's own notes are in `bench`).
    pub notes: Vec<Note>,
    /// Every warning, from every stage.
    pub warnings: Vec<Warning>,
    /// The plan for the fit reading (`[plan] reading = "fit"`): its pulse and bench are then
    /// `pulse` and `bench`, and the raw/aligned plan is kept for comparison inside it.
    pub fit: Option<FitPlan>,
}

/// The evaluation of the scenario's own pulse.
#[derive(Debug, Clone)]
pub struct AssessOutcome {
    /// The prepared network.
    pub prep: Prepared,
    /// The pulse assessed.
    pub pulse: Trapezoid,
    /// Run used for the window (the stated one, or the planned run length).
    pub run: f64,
    /// Its errors.
    pub estimate: ErrorEstimate,
    /// The pulse checked against the bench.
    pub bench: BenchPlan,
    /// Warnings.
    pub warnings: Vec<Warning>,
}

fn bench_input<'a>(sc: &'a Scenario, terminal: Option<&'a Network>) -> BenchInput<'a> {
    BenchInput {
        drive: sc.drive,
        plan: &sc.plan,
        area: sc.area,
        bench: &sc.bench,
        residues_known: sc.network.residues_known,
        terminal,
    }
}

/// For a circuit driven by a voltage through a source resistance: the transfer from the
/// source's open-circuit voltage to the input terminals (the input node is a node of the
/// circuit), so limits and peaks can be stated where the circuit sees them.
pub fn terminal_network(sc: &Scenario) -> Option<Network> {
    let NetworkSpec::Netlist(spec) = &sc.network_spec else {
        return None;
    };
    if spec.stimulus != Stimulus::Voltage || spec.source_resistance.is_none_or(|r| r <= 0.0) {
        return None;
    }
    let port = NetlistSpec {
        output: Output::Node(spec.input.clone()),
        ..spec.clone()
    };
    match Network::from_spec(&NetworkSpec::Netlist(port.clone())) {
        Ok(net) => Some(net),
        // A purely resistive input has no poles: the terminals see a constant share.
        Err(_) => netlist::state_space(&port)
            .ok()
            .filter(|ss| ss.order() == 0)
            .map(|ss| Network::constant(ss.d)),
    }
}

/// Plan a pulse for the scenario.
pub fn plan(sc: &Scenario) -> PlanOutcome {
    plan_with_progress(sc, &|_, _| {})
}

/// Plan a pulse, reporting progress of long steps (tolerance cases) as (done, total).
pub fn plan_with_progress(sc: &Scenario, progress: &(dyn Fn(usize, usize) + Sync)) -> PlanOutcome {
    let choice = plan::choose(&sc.network, &sc.network_spec, sc.area, &sc.plan, progress);
    let terminal = terminal_network(sc);
    let inp = bench_input(sc, terminal.as_ref());
    let mut notes = choice.notes.clone();
    let mut fitted = bench::fit(&inp, &choice.prep, &choice.pulse, true);
    if let Some(w) = bench::better_width(&inp, &choice.prep, &choice.pulse, &fitted) {
        let p = plan::tied_pulse(sc.area.area(w), w, sc.plan.edge_ratio);
        fitted = bench::fit(&inp, &choice.prep, &p, true);
        notes.push(Note::FewestAverages {
            width: w,
            bias_width: choice.pulse.width_50(),
        });
    }
    let mut warnings = choice.warnings.clone();
    warnings.extend(plan::pulse_warnings(
        &sc.plan,
        &choice.prep,
        &fitted.pulse,
        &fitted.estimate,
        None,
    ));
    warnings.extend(fitted.warnings.iter().cloned());
    let fit = (sc.plan.reading == plan::ReadingKind::Fit).then(|| {
        let rule = bench::fit(&inp, &choice.prep, &choice.rule, true);
        let reference = Reference {
            rule: &rule,
            budget: &fitted,
        };
        fitplan::design(&inp, &choice.prep, &sc.network, &reference)
    });
    let fit = match fit {
        Some(Ok(fp)) => {
            warnings = choice.warnings.clone();
            warnings.extend(fp.warnings.iter().cloned());
            warnings.extend(fp.bench.warnings.iter().cloned());
            notes.extend(fp.notes.iter().cloned());
            fitted = fp.bench.clone();
            Some(fp)
        }
        Some(Err(reason)) => {
            warnings.push(Warning::FitUnavailable { reason });
            None
        }
        None => None,
    };
    PlanOutcome {
        ideal_pulse: fitted.planned,
        pulse: fitted.pulse,
        estimate: fitted.estimate.clone(),
        prep: choice.prep,
        rule: choice.rule,
        rule_estimate: choice.rule_estimate,
        budget: choice.budget,
        bench: fitted,
        tolerance: choice.tolerance,
        robust: choice.robust,
        notes,
        warnings,
        fit,
    }
}

/// Assess a given pulse.
pub fn assess(sc: &Scenario, pulse: &Trapezoid, stated_run: Option<f64>) -> AssessOutcome {
    let prep = plan::prepare(&sc.network, &sc.plan);
    let run = stated_run.unwrap_or(prep.run);
    let estimate = prep.estimator.estimate(pulse, run);
    let mut warnings = prep.warnings.clone();
    warnings.extend(plan::pulse_warnings(
        &sc.plan, &prep, pulse, &estimate, stated_run,
    ));
    let terminal = terminal_network(sc);
    let bench = bench::fit(&bench_input(sc, terminal.as_ref()), &prep, pulse, false);
    warnings.extend(bench.warnings.iter().cloned());
    AssessOutcome {
        prep,
        pulse: *pulse,
        run,
        estimate,
        bench,
        warnings,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::Target;
    use crate::scenario::parse;

    #[test]
    fn single_pole_budget_width_matches_closed_form() {
        // For a rectangle-like pulse into one pole, the t0 error is 1 − (1 − e^(−x))/x
        // (handbook closed form); a 1 % budget is met at x ≈ 0.020135 (solved by hand with
        // Newton's method, from memory of the expansion x/2 − x²/6; checked by the assertion
        // that the closed form gives 1 % there).
        let text = "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n[plan]\ntarget_error = \"1 %\"\nedge_ratio = 1e6\n";
        let sc = parse("t.toml", "t", text).unwrap();
        let out = plan(&sc);
        let Some(Target::Met { width, value }) = out.budget.as_ref().map(|b| b.target.clone())
        else {
            panic!("budget must be met")
        };
        let x = width * 1000.0;
        let closed = 1.0 - (-(-x).exp_m1()) / x;
        assert!(
            (closed - 0.01).abs() < 1e-6,
            "x = {x}, closed form {closed}"
        );
        assert!(value <= 0.01);
        assert!(out.budget.unwrap().widening.unwrap() > 1.5);
    }
}
