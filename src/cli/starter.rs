//! `pulseplan new NAME`: a commented starter scenario, never overwriting a file.

use super::output::{InputError, Outcome};
use anyhow::{Context, Result, bail};
use std::path::PathBuf;

/// The commented starter scenario written by `pulseplan new NAME`.
pub fn starter_scenario(name: &str) -> String {
    let file = format!("{name}.toml");
    let title = serde_json::to_string(name).unwrap_or_else(|_| "\"starter\"".into());
    STARTER.replace("{FILE}", &file).replace("{TITLE}", &title)
}

const STARTER: &str = r#"# A pulseplan scenario. Edit the values, then run
#   pulseplan plan {FILE}             (add --report for figures and an HTML page)
# Quantities are plain SI numbers or quoted strings with a prefix and unit:
# "4.7 nF", "50 us", "10k", "1 %". The example network below is only a placeholder.
title = {TITLE}

[network]
# Give exactly ONE of the four forms.
# Form 1 (active): H(s) = gain·Π(s − z)/Π(s − p), in rad/s; complex values as "re+imj",
# conjugate pairs complete.
poles = ["-2k", "-15k+40kj", "-15k-40kj"]
zeros = ["-500", "-8k"]
gain  = "30k"
# Form 2: H(s) as polynomials in s, descending powers, SI units.
# numerator   = [1.0, 500.0]
# denominator = [1.0, 2000.0]
# Form 3: only time constants known (residues unknown; errors are given per mode).
# time_constants = ["5 ms", "80 us"]
# Form 4: a circuit. input/output are node names; ground is "gnd" (or "ground").
# input  = "in"
# output = "out"             # or ["a", "b"], or { current_through = "R1" }
# parts = [
#   { name = "R1", kind = "resistor",  nodes = ["in", "out"], value = "10k", tolerance = "1 %" },
#   { name = "C1", kind = "capacitor", nodes = ["out", "gnd"], value = "10n", tolerance = "5 %" },
# ]

[drive]
kind = "voltage"          # or "current" (the area is then in A·s)
area = "10 uV·s"          # pulse area; the reading is divided by it

[plan]
target_error = "0.5 %"    # error budget; remove it to get the rule of thumb only
metric = "t0-aligned"     # "t0", "t0-aligned" or "window"
# width_ratio = 100       # rule of thumb: width = fastest time scale / width_ratio
# edge_ratio = 100        # 50 % width / 10–90 % edge
# settle_multiple = 5     # run ≥ settle_multiple × slowest time constant
# min_width_ratio = 10    # never plan wider than fastest time scale / min_width_ratio

# [pulse]                 # a pulse you already have, for `pulseplan assess`
# amplitude = "5 V"
# width = "20 us"         # 50 % duration
# rise = "200 ns"         # 10–90 % transition durations
# fall = "200 ns"
# convention = "generator"  # or "ramp": width is the flat top, rise/fall the full ramps
# run = "10 ms"           # your record length

# The bench (all optional; without them the plan is for an unconstrained simulator).
# [generator]
# max_amplitude = "10 V"
# min_width = "20 ns"
# min_edge = "8 ns"
# time_step = "1 ns"
# output_resistance = "50"
# load_setting = "high-z"   # or "50"
# [capture]
# noise = "0.5 mV"          # rms at the output, one acquisition
# max_sample_rate = "2.5 GHz"
# max_points = 20_000_000
# max_averages = 1024
# [limits]
# max_input = "5 V"
# max_output = "4 V"
"#;

pub(crate) fn new_scenario(name: &str) -> Result<Outcome> {
    let stem = name.strip_suffix(".toml").unwrap_or(name);
    if stem.is_empty() || stem.contains(['/', '\\']) {
        bail!(InputError(format!(
            "new: \"{name}\" is not a plain scenario name (no folders; the file is NAME.toml)"
        )));
    }
    let path = PathBuf::from(format!("{stem}.toml"));
    let text = starter_scenario(stem);
    let mut f = match std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&path)
    {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            bail!(InputError(format!(
                "{} already exists: not overwriting it (choose another name or remove the file)",
                path.display()
            )))
        }
        Err(e) => {
            return Err(anyhow::Error::new(e).context(format!("cannot write {}", path.display())));
        }
    };
    use std::io::Write;
    f.write_all(text.as_bytes())
        .and_then(|()| f.sync_all())
        .with_context(|| format!("cannot write {}", path.display()))?;
    eprintln!("wrote {}", path.display());
    Ok(Outcome::Clean)
}
