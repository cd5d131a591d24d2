//! Quantities in engineering notation: parsing "4.7 nF", "50 µs", "10k", "1 %" into SI `f64`
//! values and formatting SI values back with a prefix.
//!
//! Everything inside the library is SI; this module is the only place where prefixes exist.

use num_complex::Complex64;
use thiserror::Error;

/// The physical dimension a field expects; decides which unit symbols are accepted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dim {
    /// Plain number, no unit symbol allowed (gains, ratios, counts).
    Number,
    /// Seconds.
    Time,
    /// Volts.
    Voltage,
    /// Amperes.
    Current,
    /// Ohms.
    Resistance,
    /// Siemens.
    Conductance,
    /// Farads.
    Capacitance,
    /// Henries.
    Inductance,
    /// Hertz.
    Frequency,
    /// Radians per second (pole and zero locations).
    AngularFrequency,
    /// A fraction, written with "%" or "ppm" or as a plain number.
    Fraction,
}

impl Dim {
    /// Unit symbols accepted for this dimension (an empty symbol is always accepted).
    pub fn symbols(self) -> &'static [&'static str] {
        match self {
            Dim::Number => &[],
            Dim::Time => &["s"],
            Dim::Voltage => &["V"],
            Dim::Current => &["A"],
            Dim::Resistance => &["Ω", "ohm", "Ohm", "R"],
            Dim::Conductance => &["S"],
            Dim::Capacitance => &["F"],
            Dim::Inductance => &["H"],
            Dim::Frequency => &["Hz"],
            Dim::AngularFrequency => &["rad/s"],
            Dim::Fraction => &["%", "ppm"],
        }
    }

    /// The symbol used when printing values of this dimension.
    pub fn print_symbol(self) -> &'static str {
        match self {
            Dim::Number | Dim::Fraction => "",
            Dim::Time => "s",
            Dim::Voltage => "V",
            Dim::Current => "A",
            Dim::Resistance => "Ω",
            Dim::Conductance => "S",
            Dim::Capacitance => "F",
            Dim::Inductance => "H",
            Dim::Frequency => "Hz",
            Dim::AngularFrequency => "rad/s",
        }
    }
}

/// What a signal is: the stimulus (drive) and the observed output are each a voltage or a current.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Signal {
    /// Volts.
    Voltage,
    /// Amperes.
    Current,
}

impl Signal {
    /// Its dimension.
    pub fn dim(self) -> Dim {
        match self {
            Signal::Voltage => Dim::Voltage,
            Signal::Current => Dim::Current,
        }
    }

    /// Its unit symbol.
    pub fn symbol(self) -> &'static str {
        match self {
            Signal::Voltage => "V",
            Signal::Current => "A",
        }
    }

    /// Unit of a pulse area of this signal.
    pub fn area_unit(self) -> &'static str {
        match self {
            Signal::Voltage => "V·s",
            Signal::Current => "A·s",
        }
    }
}

/// Unit of h(t) for a drive and an output: output/(drive·s), written "/s" when the two cancel.
pub fn h_unit(drive: Signal, output: Signal) -> String {
    if drive == output {
        "/s".to_string()
    } else {
        format!("{}/({}·s)", output.symbol(), drive.symbol())
    }
}

/// Why a quantity string could not be read.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum UnitError {
    /// Nothing that looks like a number at the start.
    #[error("\"{0}\" is not a number (expected e.g. \"4.7n\", \"50 us\", \"2.5e-3\")")]
    NotANumber(String),
    /// A suffix that is neither a known prefix nor an accepted unit.
    #[error("\"{text}\": unknown unit \"{unit}\"{hint}")]
    UnknownUnit {
        /// The whole text.
        text: String,
        /// The suffix that was not understood.
        unit: String,
        /// A suggestion, already formatted (may be empty).
        hint: String,
    },
    /// NaN or infinite.
    #[error("\"{0}\" is not a finite number")]
    NotFinite(String),
}

const PREFIXES: &[(&str, f64)] = &[
    ("T", 1e12),
    ("G", 1e9),
    ("M", 1e6),
    ("k", 1e3),
    ("m", 1e-3),
    ("µ", 1e-6),
    ("μ", 1e-6),
    ("u", 1e-6),
    ("n", 1e-9),
    ("p", 1e-12),
    ("f", 1e-15),
];

/// Split the leading decimal number (with optional exponent) off `s`.
fn split_number(s: &str) -> Option<(f64, &str)> {
    let bytes = s.as_bytes();
    let mut i = 0;
    if i < bytes.len() && (bytes[i] == b'+' || bytes[i] == b'-') {
        i += 1;
    }
    let digits_start = i;
    while i < bytes.len() && (bytes[i].is_ascii_digit() || bytes[i] == b'.' || bytes[i] == b'_') {
        i += 1;
    }
    if i == digits_start || !s[digits_start..i].bytes().any(|b| b.is_ascii_digit()) {
        return None;
    }
    // Exponent only when followed by a digit (so "5e" is not swallowed, and "1 exa" never occurs).
    if i < bytes.len() && (bytes[i] == b'e' || bytes[i] == b'E') {
        let mut j = i + 1;
        if j < bytes.len() && (bytes[j] == b'+' || bytes[j] == b'-') {
            j += 1;
        }
        if j < bytes.len() && bytes[j].is_ascii_digit() {
            while j < bytes.len() && bytes[j].is_ascii_digit() {
                j += 1;
            }
            i = j;
        }
    }
    let text: String = s[..i].chars().filter(|&c| c != '_').collect();
    text.parse::<f64>().ok().map(|v| (v, &s[i..]))
}

fn suggest(unit: &str, dim: Dim) -> String {
    let lower = unit.to_lowercase();
    if lower.starts_with("meg") {
        return " (write \"M\" for mega: prefixes are SI and case-sensitive, M mega, m milli)"
            .into();
    }
    if unit.starts_with('K') {
        return " (write \"k\" for kilo: prefixes are SI and case-sensitive)".into();
    }
    // Among the spellings that differ only in case, the one that keeps the most of the user's
    // own letters (so "mh" is mH, not MH).
    let same_case = |c: &str| c.chars().zip(unit.chars()).filter(|(a, b)| a == b).count();
    let best = PREFIXES
        .iter()
        .flat_map(|(p, _)| dim.symbols().iter().map(move |sym| format!("{p}{sym}")))
        .filter(|cand| cand.to_lowercase() == lower && cand != unit)
        .max_by_key(|cand| same_case(cand));
    if let Some(cand) = best {
        return format!(" (did you mean \"{cand}\"?)");
    }
    for sym in dim.symbols() {
        if sym.to_lowercase() == lower && *sym != unit {
            return format!(" (did you mean \"{sym}\"?)");
        }
    }
    let accepted: Vec<&str> = dim.symbols().to_vec();
    if accepted.is_empty() {
        " (a plain number with an optional SI prefix is expected here)".to_string()
    } else {
        format!(
            " (expected an SI prefix and/or {})",
            accepted
                .iter()
                .map(|s| format!("\"{s}\""))
                .collect::<Vec<_>>()
                .join(", ")
        )
    }
}

/// Parse a quantity such as "4.7 nF", "50 µs", "10k", "2.5e-3", "1 %" into SI.
///
/// The unit symbol is optional; when given it must belong to `dim`. A bare prefix ("10k")
/// is accepted. For [`Dim::Fraction`], "%" divides by 100 and "ppm" by 10⁶.
pub fn parse_quantity(text: &str, dim: Dim) -> Result<f64, UnitError> {
    // Typographic minus (U+2212) reads as a hyphen-minus.
    let normalised = text.trim().replace('\u{2212}', "-");
    let s = normalised.as_str();
    let lowered = s.to_ascii_lowercase();
    if lowered.contains("nan") || lowered.contains("inf") {
        return Err(UnitError::NotFinite(text.to_string()));
    }
    let (value, rest) = split_number(s).ok_or_else(|| UnitError::NotANumber(text.to_string()))?;
    let rest = rest.trim();
    let scaled = apply_suffix(value, rest, dim).ok_or_else(|| UnitError::UnknownUnit {
        text: text.to_string(),
        unit: rest.to_string(),
        hint: suggest(rest, dim),
    })?;
    if !scaled.is_finite() {
        return Err(UnitError::NotFinite(text.to_string()));
    }
    Ok(scaled)
}

fn apply_suffix(value: f64, rest: &str, dim: Dim) -> Option<f64> {
    if rest.is_empty() {
        return Some(value);
    }
    if dim == Dim::Fraction {
        return match rest {
            "%" => Some(value / 100.0),
            "ppm" => Some(value * 1e-6),
            _ => None,
        };
    }
    if dim.symbols().contains(&rest) {
        return Some(value);
    }
    for (p, mult) in PREFIXES {
        if let Some(after) = rest.strip_prefix(p) {
            let after = after.trim();
            if after.is_empty() || dim.symbols().contains(&after) {
                return Some(value * mult);
            }
        }
    }
    None
}

/// Parse a complex number written as "re+imj", "-1.58k+31.6kj", "5kj", "-3" (rad/s for poles).
///
/// Each part may carry an SI prefix; a trailing " rad/s" is accepted.
pub fn parse_complex(text: &str) -> Result<Complex64, UnitError> {
    let normalised = text.trim().replace('\u{2212}', "-");
    let s = normalised.as_str();
    let s = s.strip_suffix("rad/s").unwrap_or(s).trim();
    let compact: String = s.chars().filter(|c| !c.is_whitespace()).collect();
    if let Some(body) = compact
        .strip_suffix('j')
        .or_else(|| compact.strip_suffix('i'))
    {
        // Find the split between the real and imaginary parts: the last sign that is not
        // the first character and does not follow an exponent marker.
        let b = body.as_bytes();
        let mut split = None;
        for k in (1..b.len()).rev() {
            if (b[k] == b'+' || b[k] == b'-') && !matches!(b[k - 1], b'e' | b'E') {
                split = Some(k);
                break;
            }
        }
        let (re_text, im_text) = match split {
            Some(k) => (&body[..k], &body[k..]),
            None => ("0", body),
        };
        let im_text = match im_text {
            "" | "+" => "1",
            "-" => "-1",
            t => t,
        };
        let re = parse_quantity(re_text, Dim::AngularFrequency).map_err(|_| bad_complex(text))?;
        let im = parse_quantity(im_text, Dim::AngularFrequency).map_err(|_| bad_complex(text))?;
        Ok(Complex64::new(re, im))
    } else {
        let re = parse_quantity(&compact, Dim::AngularFrequency).map_err(|e| match e {
            UnitError::NotFinite(_) => e,
            _ => bad_complex(text),
        })?;
        Ok(Complex64::new(re, 0.0))
    }
}

fn bad_complex(text: &str) -> UnitError {
    UnitError::UnknownUnit {
        text: text.to_string(),
        unit: String::new(),
        hint: " is not a complex number (write e.g. \"-1.58k+31.6kj\" or \"-200\")".to_string(),
    }
}

/// Format an SI value with an engineering prefix and `sig` significant digits: 4.7e-9 → "4.7 n".
/// The unit symbol is appended by [`eng`].
pub fn eng_number(value: f64, sig: usize) -> String {
    if value == 0.0 {
        return "0 ".to_string();
    }
    if !value.is_finite() {
        return format!("{value} ");
    }
    if value.abs() < 1e-15 || value.abs() >= 1e15 {
        return format!("{:.prec$e} ", value, prec = sig.saturating_sub(1));
    }
    let exp3 = ((value.abs().log10() / 3.0).floor() as i32).clamp(-5, 4);
    // Rounding may carry into the next prefix (999.96 → 1000): redo with the carried exponent.
    let render = |e3: i32| {
        let scaled = value / 10f64.powi(3 * e3);
        let int_digits = if scaled.abs() >= 1.0 {
            scaled.abs().log10().floor() as usize + 1
        } else {
            1
        };
        let decimals = sig.saturating_sub(int_digits);
        (format!("{scaled:.decimals$}"), scaled)
    };
    let (mut text, _) = render(exp3);
    let mut e3 = exp3;
    if text.trim_start_matches('-').starts_with("1000") && e3 < 4 {
        e3 += 1;
        text = render(e3).0;
    }
    if text.contains('.') {
        text = text.trim_end_matches('0').trim_end_matches('.').to_string();
    }
    let prefix = match e3 {
        -5 => "f",
        -4 => "p",
        -3 => "n",
        -2 => "µ",
        -1 => "m",
        0 => "",
        1 => "k",
        2 => "M",
        3 => "G",
        _ => "T",
    };
    format!("{text} {prefix}")
}

/// [`eng_number`] without the trailing space (for values whose unit is printed elsewhere).
pub fn eng_plain(value: f64, sig: usize) -> String {
    eng_number(value, sig).trim_end().to_string()
}

/// A dimensionless number with at most six significant digits and no prefix (a prefix would
/// read as a unit): 0.995025, 1.5e-5.
pub fn plain(v: f64) -> String {
    if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e6) {
        format!("{v:.5e}")
    } else {
        let t = format!("{v:.6}");
        t.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

/// Format an SI value in engineering notation with its unit: `eng(4.7e-9, Dim::Capacitance)` → "4.7 nF".
pub fn eng(value: f64, dim: Dim) -> String {
    eng_sig(value, dim, 4)
}

/// As [`eng`] with a chosen number of significant digits.
pub fn eng_sig(value: f64, dim: Dim, sig: usize) -> String {
    format!("{}{}", eng_number(value, sig), dim.print_symbol())
        .trim_end()
        .to_string()
}

/// Format a signed fraction as a percentage with sensible digits: 0.01234 → "+1.234 %".
pub fn percent(fraction: f64) -> String {
    let p = fraction * 100.0;
    if p == 0.0 {
        return "0 %".to_string();
    }
    let mag = p.abs();
    let text = if mag >= 0.01 {
        format!("{p:+.4}")
    } else {
        format!("{p:+.3e}")
    };
    format!("{text} %")
}

/// Format a magnitude (budget, RMS) as a percentage without sign: 0.01 → "1 %".
pub fn percent_unsigned(fraction: f64) -> String {
    let p = fraction.abs() * 100.0;
    // Very small and very large shares in exponent form (a 36-digit percentage reads as noise).
    if p != 0.0 && !(0.01..1e6).contains(&p) {
        return format!("{p:.3e} %");
    }
    let text = format!("{p:.4}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    format!("{text} %")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_the_documented_forms() {
        // SI prefixes per the SI Brochure (BIPM, 9th ed.), table 7.
        let cases: &[(&str, Dim, f64)] = &[
            ("4.7 nF", Dim::Capacitance, 4.7e-9),
            ("4.7n", Dim::Capacitance, 4.7e-9),
            ("50 us", Dim::Time, 50e-6),
            ("50 µs", Dim::Time, 50e-6),
            ("50µs", Dim::Time, 50e-6),
            ("10k", Dim::Resistance, 10e3),
            ("10 kΩ", Dim::Resistance, 10e3),
            ("2.5e-3", Dim::Time, 2.5e-3),
            ("2.5E+3 s", Dim::Time, 2.5e3),
            ("1 %", Dim::Fraction, 0.01),
            ("0.5", Dim::Fraction, 0.5),
            ("2 kV", Dim::Voltage, 2e3),
            ("1 MHz", Dim::Frequency, 1e6),
            ("1 mS", Dim::Conductance, 1e-3),
            ("12 ms", Dim::Time, 12e-3),
            ("330u", Dim::Inductance, 330e-6),
            ("1.2 mH", Dim::Inductance, 1.2e-3),
            ("20_000_000", Dim::Number, 2e7),
            ("-3.3", Dim::Voltage, -3.3),
            ("2.5 GHz", Dim::Frequency, 2.5e9),
            ("1 MΩ", Dim::Resistance, 1e6),
        ];
        for (text, dim, want) in cases {
            let got = parse_quantity(text, *dim).unwrap();
            assert!(
                ((got - want) / want).abs() < 1e-15,
                "{text}: got {got}, want {want}"
            );
        }
    }

    #[test]
    fn rejects_with_hints() {
        let e = parse_quantity("4.7 nf", Dim::Capacitance).unwrap_err();
        assert!(e.to_string().contains("did you mean \"nF\""), "{e}");
        assert!(parse_quantity("abc", Dim::Time).is_err());
        assert!(parse_quantity("5 V", Dim::Time).is_err());
        assert!(matches!(
            parse_quantity("nan", Dim::Number),
            Err(UnitError::NotFinite(_))
        ));
        assert!(parse_quantity("1e999", Dim::Number).is_err());
        // Prefixes are SI and case-sensitive: the suggestion keeps the user's own letters.
        let e = parse_quantity("250 mh", Dim::Inductance).unwrap_err();
        assert!(e.to_string().contains("did you mean \"mH\""), "{e}");
        for (text, hint) in [("1meg", "\"M\" for mega"), ("10K", "\"k\" for kilo")] {
            let e = parse_quantity(text, Dim::Resistance).unwrap_err();
            assert!(e.to_string().contains(hint), "{text}: {e}");
        }
    }

    #[test]
    fn complex_numbers() {
        let cases: &[(&str, f64, f64)] = &[
            ("-1.58k+31.6kj", -1580.0, 31600.0),
            ("-1.58k-31.6kj", -1580.0, -31600.0),
            ("0", 0.0, 0.0),
            ("-200", -200.0, 0.0),
            ("5kj", 0.0, 5000.0),
            ("-2e3-4e-1j", -2000.0, -0.4),
            ("-1e-3+2e+3j", -1e-3, 2e3),
            ("-3 + 4j", -3.0, 4.0),
            ("-100 rad/s", -100.0, 0.0),
            ("\u{2212}2k\u{2212}3kj", -2000.0, -3000.0),
        ];
        for (text, re, im) in cases {
            let z = parse_complex(text).unwrap();
            assert_eq!((z.re, z.im), (*re, *im), "{text}");
        }
        assert!(parse_complex("-3+xj").is_err());
    }

    #[test]
    fn formats_engineering() {
        assert_eq!(eng(4.7e-9, Dim::Capacitance), "4.7 nF");
        assert_eq!(eng(50e-6, Dim::Time), "50 µs");
        assert_eq!(eng(2000.0, Dim::Voltage), "2 kV");
        assert_eq!(eng(0.0, Dim::Time), "0 s");
        assert_eq!(eng(999.99, Dim::Number), "1 k");
        assert_eq!(eng(-1.234567e-3, Dim::Time), "-1.235 ms");
        assert_eq!(percent(0.01), "+1.0000 %");
        assert_eq!(eng(2.5e-18, Dim::Time), "2.500e-18 s");
    }
}
