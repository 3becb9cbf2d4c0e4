//! Compensator rules: unique usable names, a measured output that exists
//! and a transfer law that can be realised.

use std::collections::HashMap;

use super::checker::{label, name_rule, Checker};
use crate::circuit::CompensatorLaw;

impl Checker<'_> {
    /// Compensators: unique names, a measured output that exists, a law
    /// that can be realised.
    pub(super) fn compensators(&mut self) {
        let mut seen: HashMap<&str, usize> = HashMap::new();
        for (i, k) in self.circuit.compensators.iter().enumerate() {
            let l = label(&k.name, "compensators", i);
            if let Some(why) = name_rule(&k.name) {
                self.field(&l, "name", format!("compensator name {:?} {why}", k.name));
            }
            // As for elements and gates: an empty name is reported once
            // (above), and a duplicate names the first user of the name.
            if !k.name.is_empty() {
                match seen.get(k.name.as_str()) {
                    Some(&j) => self.field(
                        &l,
                        "name",
                        format!(
                            "duplicate compensator name '{}': compensators[{j}] and compensators[{i}] both use it",
                            k.name
                        ),
                    ),
                    None => {
                        seen.insert(&k.name, i);
                    }
                }
            }
            self.finite(&l, "reference", k.reference);
            if let Some(why) = self.output_problem(&k.input) {
                self.field(&l, "input", why);
            }
            if k.input.ends_with(".output") {
                self.field(
                    &l,
                    "input",
                    "a compensator measures a circuit output, not another compensator".into(),
                );
            }
            match &k.law {
                CompensatorLaw::Pi { kp, ki } => {
                    self.finite(&l, "law.kp", *kp);
                    self.finite(&l, "law.ki", *ki);
                }
                CompensatorLaw::PolesZeros {
                    gain,
                    integrator,
                    zeros_hz,
                    poles_hz,
                } => {
                    self.finite(&l, "law.gain", *gain);
                    for (j, z) in zeros_hz.iter().enumerate() {
                        self.positive(&l, &format!("law.zeros_hz[{j}]"), *z);
                    }
                    for (j, p) in poles_hz.iter().enumerate() {
                        self.positive(&l, &format!("law.poles_hz[{j}]"), *p);
                    }
                    let den = poles_hz.len() + usize::from(*integrator);
                    if zeros_hz.len() > den {
                        self.field(
                            &l,
                            "law.zeros_hz",
                            format!(
                                "{} zeros but only {den} poles: the law would not be proper",
                                zeros_hz.len()
                            ),
                        );
                    }
                    if den == 0 {
                        self.field(
                            &l,
                            "law.poles_hz",
                            "a compensator needs at least one pole or the integrator".into(),
                        );
                    }
                }
                CompensatorLaw::StateSpace { a, b, c, d } => {
                    let n = a.len();
                    if n == 0 || a.iter().any(|r| r.len() != n) {
                        self.field(
                            &l,
                            "law.a",
                            "must be a square matrix with at least one row".into(),
                        );
                    }
                    if b.len() != n {
                        self.field(
                            &l,
                            "law.b",
                            format!("must have {n} entries, has {}", b.len()),
                        );
                    }
                    if c.len() != n {
                        self.field(
                            &l,
                            "law.c",
                            format!("must have {n} entries, has {}", c.len()),
                        );
                    }
                    let all = a
                        .iter()
                        .flatten()
                        .chain(b)
                        .chain(c)
                        .chain(std::iter::once(d));
                    if all.into_iter().any(|v| !v.is_finite()) {
                        self.field(&l, "law", "every entry must be a finite number".into());
                    }
                }
            }
        }
    }
}
