//! Numbers as circuit designers write them: `4.7u`, `10kohm`, `1nF`, `2M`, `3ms`.
//!
//! A value is a decimal number, then an optional SI prefix, then an optional unit. `M` is always mega and
//! `m` always milli. The unit, when given, must fit the quantity (a capacitance takes `F`, never `H`), so a
//! typo such as `1nH` on a capacitor is caught instead of silently read.

use std::fmt;

/// What a number measures; decides which unit spellings are accepted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Quantity {
    Resistance,
    Capacitance,
    Inductance,
    Voltage,
    Current,
    Time,
    Frequency,
    Temperature,
    /// Gains, coefficients, angles in degrees, and other plain numbers.
    Plain,
    /// A transconductance (A/V) such as a vccs gain.
    Conductance,
    /// A transresistance (V/A) such as a ccvs gain.
    Transresistance,
    /// A value whose unit depends on context (a waveform level: volts or amperes).
    Level,
}

impl Quantity {
    fn units(self) -> &'static [&'static str] {
        match self {
            Quantity::Resistance | Quantity::Transresistance => &["ohm", "ohms", "Ω"],
            Quantity::Capacitance => &["F"],
            Quantity::Inductance => &["H"],
            Quantity::Voltage => &["V"],
            Quantity::Current => &["A"],
            Quantity::Time => &["s"],
            Quantity::Frequency => &["Hz"],
            Quantity::Temperature => &["K"],
            Quantity::Conductance => &["S"],
            Quantity::Level => &["V", "A"],
            Quantity::Plain => &[],
        }
    }

    /// A human name for messages.
    pub fn describe(self) -> &'static str {
        match self {
            Quantity::Resistance => "a resistance (ohm)",
            Quantity::Capacitance => "a capacitance (F)",
            Quantity::Inductance => "an inductance (H)",
            Quantity::Voltage => "a voltage (V)",
            Quantity::Current => "a current (A)",
            Quantity::Time => "a time (s)",
            Quantity::Frequency => "a frequency (Hz)",
            Quantity::Temperature => "a temperature (K)",
            Quantity::Plain => "a plain number",
            Quantity::Conductance => "a transconductance (S)",
            Quantity::Transresistance => "a transresistance (ohm)",
            Quantity::Level => "a level (V or A)",
        }
    }
}

/// Why a value could not be read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ValueError {
    pub text: String,
    pub reason: String,
}

impl fmt::Display for ValueError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "cannot read the value '{}': {}", self.text, self.reason)
    }
}

impl std::error::Error for ValueError {}

/// SI prefixes and their decimal exponents.
const PREFIXES: &[(char, i32)] = &[
    ('f', -15),
    ('p', -12),
    ('n', -9),
    ('u', -6),
    ('µ', -6),
    ('μ', -6),
    ('m', -3),
    ('k', 3),
    ('M', 6),
    ('G', 9),
    ('T', 12),
];

/// Length in bytes of the longest prefix of `s` that is a decimal floating-point number.
fn number_len(s: &str) -> usize {
    let b = s.as_bytes();
    let mut i = 0;
    if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
        i += 1;
    }
    let digits_start = i;
    while i < b.len() && b[i].is_ascii_digit() {
        i += 1;
    }
    let mut saw_digits = i > digits_start;
    if i < b.len() && b[i] == b'.' {
        i += 1;
        let frac_start = i;
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        saw_digits |= i > frac_start;
    }
    if !saw_digits {
        return 0;
    }
    // An exponent only counts when digits follow it.
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        let mut j = i + 1;
        if j < b.len() && (b[j] == b'+' || b[j] == b'-') {
            j += 1;
        }
        let exp_start = j;
        while j < b.len() && b[j].is_ascii_digit() {
            j += 1;
        }
        if j > exp_start {
            i = j;
        }
    }
    i
}

/// Reads a value written with an optional SI prefix and unit, for the given quantity.
pub fn parse_value(text: &str, quantity: Quantity) -> Result<f64, ValueError> {
    let err = |reason: String| ValueError {
        text: text.to_string(),
        reason,
    };
    let s = text.trim();
    let n = number_len(s);
    if n == 0 {
        return Err(err(
            "it does not start with a number (write e.g. 4.7u, 10k or 1e-9)".into(),
        ));
    }
    let number = &s[..n];
    let mut value: f64 = number
        .parse()
        .map_err(|_| err("the number part is not a valid decimal".into()))?;
    let mut rest = s[n..].trim_start();
    let units = quantity.units();
    let unit_matches = |r: &str| units.contains(&r);
    if !rest.is_empty() && !unit_matches(rest) {
        let c = rest.chars().next().unwrap_or(' ');
        if let Some(&(_, exp)) = PREFIXES.iter().find(|(p, _)| *p == c) {
            // Shift the decimal exponent rather than multiply, so that 5u is exactly the double nearest 5e-6.
            let (mantissa, e0) = match number.find(['e', 'E']) {
                Some(i) => (&number[..i], number[i + 1..].parse::<i32>().unwrap_or(0)),
                None => (number, 0),
            };
            value = format!("{mantissa}e{}", e0 + exp)
                .parse()
                .map_err(|_| err("the number part is not a valid decimal".into()))?;
            rest = &rest[c.len_utf8()..];
        }
    }
    if !rest.is_empty() && !unit_matches(rest) {
        let expected = if units.is_empty() {
            "no unit".to_string()
        } else {
            format!("the unit {}", units.join(" or "))
        };
        return Err(err(format!(
            "'{rest}' is neither an SI prefix (f p n u m k M G T) nor a unit for {} (expected {expected})",
            quantity.describe()
        )));
    }
    if !value.is_finite() {
        return Err(err("the value is not finite".into()));
    }
    Ok(value)
}

/// Formats a number as the shortest text that reads back to the same `f64`.
pub fn shortest(x: f64) -> String {
    let a = x.abs();
    if x == 0.0 || (1e-5..1e16).contains(&a) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// Formats a number with an SI prefix for people (3 significant digits), e.g. `4.70u`.
pub fn engineering(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    let table: &[(f64, &str)] = &[
        (1e12, "T"),
        (1e9, "G"),
        (1e6, "M"),
        (1e3, "k"),
        (1.0, ""),
        (1e-3, "m"),
        (1e-6, "u"),
        (1e-9, "n"),
        (1e-12, "p"),
        (1e-15, "f"),
    ];
    for &(f, p) in table {
        if a >= f * 0.9995 {
            return format!("{:.3}{p}", x / f);
        }
    }
    format!("{x:e}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes_and_units() {
        let c = Quantity::Capacitance;
        assert_eq!(parse_value("1n", c).unwrap(), 1e-9);
        assert_eq!(parse_value("1nF", c).unwrap(), 1e-9);
        assert_eq!(parse_value("4.7µ", c).unwrap(), 4.7e-6);
        assert_eq!(parse_value("4.7u", c).unwrap(), 4.7e-6);
        assert_eq!(parse_value("1F", c).unwrap(), 1.0);
        assert_eq!(parse_value("1f", c).unwrap(), 1e-15);
        let r = Quantity::Resistance;
        assert_eq!(parse_value("10kohm", r).unwrap(), 10e3);
        assert_eq!(parse_value("2M", r).unwrap(), 2e6);
        assert_eq!(parse_value("3m", r).unwrap(), 3e-3);
        assert_eq!(parse_value("1e3", r).unwrap(), 1e3);
        assert_eq!(parse_value("1.5e-3k", r).unwrap(), 1.5);
        assert_eq!(parse_value("5u", Quantity::Time).unwrap(), 5e-6);
        assert_eq!(parse_value("0.1n", Quantity::Time).unwrap(), 1e-10);
        assert_eq!(parse_value("3ms", Quantity::Time).unwrap(), 3e-3);
        assert_eq!(parse_value("2MHz", Quantity::Frequency).unwrap(), 2e6);
        assert_eq!(parse_value("-5V", Quantity::Level).unwrap(), -5.0);
        assert_eq!(parse_value("1mA", Quantity::Level).unwrap(), 1e-3);
    }

    #[test]
    fn refuses_wrong_units_and_garbage() {
        assert!(parse_value("1nH", Quantity::Capacitance).is_err());
        assert!(parse_value("abc", Quantity::Plain).is_err());
        assert!(parse_value("1x", Quantity::Plain).is_err());
        assert!(parse_value("", Quantity::Plain).is_err());
        assert!(parse_value("1e400", Quantity::Plain).is_err());
        assert!(parse_value("10meg", Quantity::Resistance).is_err());
    }

    #[test]
    fn shortest_round_trips() {
        for x in [1e-9, 0.1, 1.0 / 3.0, 123456.789, 1e300, -2.5e-7, 0.0] {
            assert_eq!(shortest(x).parse::<f64>().unwrap(), x);
        }
        assert_eq!(shortest(1e-9), "1e-9");
    }
}
