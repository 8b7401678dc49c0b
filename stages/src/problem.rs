//! A configuration problem found while checking: where (key path), what was found, what is
//! accepted. The pipeline adds the file, line and column.

use std::fmt;

/// One problem in a config or run record, located by its key path.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// Key path relative to the item checked, such as `aperture.radius_mm`; empty for the
    /// item itself.
    pub key: String,
    /// The value found, as written (or `missing`).
    pub found: String,
    /// What would be accepted.
    pub expected: String,
}

impl Problem {
    /// A problem at `key`: `found` is the offending value, `expected` what is accepted.
    pub fn new(key: impl Into<String>, found: impl fmt::Display, expected: impl Into<String>) -> Self {
        Problem { key: key.into(), found: found.to_string(), expected: expected.into() }
    }

    /// The same problem seen from a parent item: `prefix` goes in front of the key path.
    #[must_use]
    pub fn under(mut self, prefix: &str) -> Self {
        self.key = join_key(prefix, &self.key);
        self
    }
}

/// Join two key-path parts: `join_key("detectors[2]", "aperture")` is
/// `detectors[2].aperture`; an index part (`[3]`) joins without a dot.
pub fn join_key(prefix: &str, key: &str) -> String {
    match (prefix.is_empty(), key.is_empty()) {
        (true, _) => key.to_string(),
        (_, true) => prefix.to_string(),
        _ if key.starts_with('[') => format!("{prefix}{key}"),
        _ => format!("{prefix}.{key}"),
    }
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: found {}, expected {}", self.key, self.found, self.expected)
    }
}

/// Collects problems from range checks on numbers, so a `validate` function reads as a list
/// of rules.
#[derive(Debug, Default)]
pub struct Checks {
    /// Problems found so far.
    pub problems: Vec<Problem>,
}

impl Checks {
    /// Record a problem unless `ok`; the same problem again (one `calibration.all` checked
    /// for every detector, say) is recorded once.
    pub fn require(&mut self, ok: bool, key: &str, found: impl fmt::Display, expected: &str) {
        if !ok {
            let p = Problem::new(key, found, expected);
            if !self.problems.contains(&p) {
                self.problems.push(p);
            }
        }
    }

    /// `value` must be finite and > 0.
    pub fn positive(&mut self, key: &str, value: f64) {
        self.require(value.is_finite() && value > 0.0, key, value, "a finite number > 0");
    }

    /// `value` must be finite and ≥ 0.
    pub fn non_negative(&mut self, key: &str, value: f64) {
        self.require(value.is_finite() && value >= 0.0, key, value, "a finite number >= 0");
    }

    /// `value` must lie in the half-open interval (0, 1].
    pub fn fraction(&mut self, key: &str, value: f64) {
        self.require(value > 0.0 && value <= 1.0, key, value, "a number in (0, 1]");
    }

    /// `value` must be a relative uncertainty in [0, 1).
    pub fn rel_err(&mut self, key: &str, value: f64) {
        self.require((0.0..1.0).contains(&value), key, value, "a relative uncertainty in [0, 1)");
    }

    /// Add the problems of a nested item, with their keys under `prefix`.
    pub fn nested(&mut self, prefix: &str, problems: Vec<Problem>) {
        self.problems.extend(problems.into_iter().map(|p| p.under(prefix)));
    }
}
