//! The collector every rule reports to, and the small checks the rules
//! share: a value finite, positive, non-negative, a usable frequency, a
//! list of times increasing; how elements, values and lists of names are
//! written in messages.

use std::cell::OnceCell;
use std::collections::HashSet;

use crate::circuit::Circuit;
use crate::error::Problem;

/// The circuit under check and every problem found so far, in order.
pub(super) struct Checker<'a> {
    /// The circuit under check.
    pub(super) circuit: &'a Circuit,
    /// How each element is named in messages (see [`label`]).
    pub(super) labels: Vec<String>,
    /// The problems found, in the order of the checks.
    pub(super) out: Vec<Problem>,
    /// The circuit's node names, built on first use: looking an output up
    /// in [`Circuit::nodes`] each time made checking thousands of outputs
    /// on thousands of nodes take seconds.
    pub(super) nodes: OnceCell<HashSet<String>>,
}

impl<'a> Checker<'a> {
    /// A checker of `circuit` that has found nothing yet.
    pub(super) fn new(circuit: &'a Circuit) -> Self {
        Checker {
            circuit,
            labels: circuit
                .elements
                .iter()
                .enumerate()
                .map(|(i, e)| label(e.name(), "elements", i))
                .collect(),
            out: Vec::new(),
            nodes: OnceCell::new(),
        }
    }
}

impl Checker<'_> {
    /// Reports `message` about `field` of `element`.
    pub(super) fn field(&mut self, element: &str, field: &str, message: String) {
        self.out.push(Problem::field(element, field, message));
    }

    /// Reports a problem of the run settings at `field` (no element).
    pub(super) fn run_problem(&mut self, field: &str, message: String) {
        self.out.push(Problem {
            element: None,
            field: Some(field.into()),
            node: None,
            message,
        });
    }

    /// Reports every time in `times` that does not follow its predecessor
    /// (`what`: "point" or "transition"; `field` names entry i).
    pub(super) fn strictly_increasing(
        &mut self,
        element: &str,
        times: &[f64],
        what: &str,
        field: impl Fn(usize) -> String,
    ) {
        for i in 1..times.len() {
            let (a, b) = (times[i - 1], times[i]);
            if b <= a {
                self.field(
                    element,
                    &field(i),
                    format!(
                        "{what} times must be strictly increasing: {} follows {}",
                        num(b),
                        num(a)
                    ),
                );
            }
        }
    }

    /// Reports a non-finite value; true if the value is finite.
    pub(super) fn finite(&mut self, element: &str, field: &str, v: f64) -> bool {
        if v.is_finite() {
            true
        } else {
            self.field(element, field, format!("must be a finite number, got {v}"));
            false
        }
    }

    /// Reports a frequency that is not positive, or so small that its
    /// period 1/f is not a finite number of seconds (below about 5.6e-309
    /// Hz: a schedule of k·T would be ∞ or NaN); true if it is fine.
    pub(super) fn frequency(&mut self, element: &str, field: &str, f: f64) -> bool {
        if !self.positive(element, field, f) {
            return false;
        }
        if !(1.0 / f).is_finite() {
            self.field(
                element,
                field,
                format!(
                    "must exceed about {} Hz (its period 1/f must be a finite number of seconds), got {}",
                    num(1.0 / f64::MAX),
                    num(f)
                ),
            );
            return false;
        }
        true
    }

    /// Reports a positive value whose reciprocal is not finite (below
    /// about 5.6e-309): a conductance, an inverse inductance or capacitance
    /// (or the inverse inductance matrix of coupled windings) would not
    /// exist in f64. True if it is fine.
    pub(super) fn invertible(&mut self, element: &str, field: &str, v: f64) -> bool {
        if (1.0 / v).is_finite() {
            return true;
        }
        self.field(
            element,
            field,
            format!(
                "must exceed about {} (its reciprocal must be a finite number), got {}",
                num(1.0 / f64::MAX),
                num(v)
            ),
        );
        false
    }

    /// Reports a value that is not finite and positive; true if it is.
    pub(super) fn positive(&mut self, element: &str, field: &str, v: f64) -> bool {
        if !self.finite(element, field, v) {
            return false;
        }
        if v <= 0.0 {
            self.field(element, field, format!("must be positive, got {}", num(v)));
            return false;
        }
        true
    }

    /// Reports a value that is not finite or is negative; true if it is fine.
    pub(super) fn non_negative(&mut self, element: &str, field: &str, v: f64) -> bool {
        if !self.finite(element, field, v) {
            return false;
        }
        if v < 0.0 {
            self.field(
                element,
                field,
                format!("must not be negative, got {}", num(v)),
            );
            return false;
        }
        true
    }

    /// [`Checker::finite`] for a value that may be absent.
    pub(super) fn optional_finite(&mut self, element: &str, field: &str, v: Option<f64>) {
        if let Some(v) = v {
            self.finite(element, field, v);
        }
    }

    /// [`Checker::non_negative`] for a value that may be absent.
    pub(super) fn optional_non_negative(&mut self, element: &str, field: &str, v: Option<f64>) {
        if let Some(v) = v {
            self.non_negative(element, field, v);
        }
    }
}

/// How an element is named in problems: its name, or its position when the
/// name is empty.
pub(super) fn label(name: &str, list: &str, index: usize) -> String {
    if name.is_empty() {
        format!("{list}[{index}]")
    } else {
        name.to_string()
    }
}

/// Why a name (element, gate, winding or node) cannot be used, if it cannot.
pub(super) fn name_rule(name: &str) -> Option<&'static str> {
    if name.is_empty() {
        Some("is empty")
    } else if name.contains('.') {
        // Outputs and gate signals use '.' to name a part: `L1.current`,
        // `X1.primary.current`, `hb.high`.
        Some("must not contain '.'")
    } else if name.chars().any(char::is_whitespace) {
        Some("must not contain whitespace")
    } else {
        None
    }
}

/// A value as it appears in messages: plain for everyday magnitudes,
/// scientific otherwise (`1e-5` reads better than `0.00001`).
pub(super) fn num(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 || !v.is_finite() || (1e-3..1e6).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// How many names a problem lists before it only counts the rest: a
/// message naming all of 2,000 signals helps nobody.
const NAMES_SHOWN: usize = 12;

/// Names in quotes, separated by commas, the first [`NAMES_SHOWN`] only.
pub(super) fn quoted(names: &[&str]) -> String {
    let mut text = names
        .iter()
        .take(NAMES_SHOWN)
        .map(|n| format!("'{n}'"))
        .collect::<Vec<_>>()
        .join(", ");
    if names.len() > NAMES_SHOWN {
        text.push_str(&format!(" and {} more", names.len() - NAMES_SHOWN));
    }
    text
}
