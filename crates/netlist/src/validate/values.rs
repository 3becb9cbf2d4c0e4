//! Value rules of each element: positive, finite and in range, as each
//! field requires; coupled inductors need a realisable (positive definite)
//! inductance matrix; waveforms need ordered times.

use std::collections::HashMap;

use super::checker::{num, quoted, Checker};
use crate::element::*;
use crate::loss_data::CoreModel;
use crate::stimulus::Stimulus;

impl Checker<'_> {
    /// The values of element `i`, as its kind requires.
    pub(super) fn element_values(&mut self, i: usize) {
        let label = self.labels[i].clone();
        let l = label.as_str();
        match &self.circuit.elements[i] {
            Element::Resistor(r) => {
                // A value without a finite reciprocal (below about
                // 5.6e-309) would put ∞ in the network or state equations.
                if self.positive(l, "resistance", r.resistance) {
                    self.invertible(l, "resistance", r.resistance);
                }
            }
            Element::Inductor(x) => {
                if self.positive(l, "inductance", x.inductance) {
                    self.invertible(l, "inductance", x.inductance);
                }
                self.optional_finite(l, "initial_current", x.initial_current);
                self.optional_non_negative(l, "winding_resistance", x.winding_resistance);
                if let Some(c) = &x.core {
                    self.core(l, c);
                }
            }
            Element::Capacitor(x) => {
                if self.positive(l, "capacitance", x.capacitance) {
                    self.invertible(l, "capacitance", x.capacitance);
                }
                self.optional_finite(l, "initial_voltage", x.initial_voltage);
                self.optional_non_negative(l, "esr", x.esr);
            }
            Element::CoupledInductors(x) => self.coupled(l, x),
            Element::IdealTransformer(x) => {
                self.positive(l, "turns_ratio", x.turns_ratio);
            }
            Element::VoltageSource(x) => self.waveform(l, &x.waveform),
            Element::CurrentSource(x) => self.waveform(l, &x.waveform),
            Element::Switch(x) => {
                self.optional_non_negative(l, "on_resistance", x.on_resistance);
                if let Some(d) = &x.body_diode {
                    self.optional_non_negative(l, "body_diode.forward_voltage", d.forward_voltage);
                    self.optional_non_negative(l, "body_diode.on_resistance", d.on_resistance);
                    self.optional_non_negative(
                        l,
                        "body_diode.recovered_charge",
                        d.recovered_charge,
                    );
                }
                if let Some(e) = &x.switching_energy {
                    for (edge, t) in [("turn_on", &e.turn_on), ("turn_off", &e.turn_off)] {
                        if let Some((at, why)) = t.problem() {
                            self.field(l, &format!("switching_energy.{edge}.{at}"), why);
                        }
                    }
                }
                if let Some(t) = &x.thermal {
                    self.thermal(l, t);
                }
                if let Some(t) = &x.transition {
                    for (edge, r) in [("turn_off", &t.turn_off), ("turn_on", &t.turn_on)] {
                        self.positive(
                            l,
                            &format!("transition.{edge}.voltage_rate"),
                            r.voltage_rate,
                        );
                        self.positive(
                            l,
                            &format!("transition.{edge}.current_rate"),
                            r.current_rate,
                        );
                    }
                }
            }
            Element::Diode(x) => {
                self.optional_non_negative(l, "forward_voltage", x.model.forward_voltage);
                self.optional_non_negative(l, "on_resistance", x.model.on_resistance);
                self.optional_non_negative(l, "recovered_charge", x.model.recovered_charge);
                if let Some(t) = &x.thermal {
                    self.thermal(l, t);
                }
            }
        }
    }

    /// Core-loss parameters: k, N, A and volume positive; α and β inside
    /// [`CoreModel::ALPHA`] and [`CoreModel::BETA`].
    fn core(&mut self, l: &str, c: &CoreModel) {
        self.positive(l, "core.k", c.k);
        self.positive(l, "core.turns", c.turns);
        self.positive(l, "core.area", c.area);
        self.positive(l, "core.volume", c.volume);
        for (field, v, (lo, hi)) in [
            ("core.alpha", c.alpha, CoreModel::ALPHA),
            ("core.beta", c.beta, CoreModel::BETA),
        ] {
            if self.finite(l, field, v) && !(lo..=hi).contains(&v) {
                self.field(
                    l,
                    field,
                    format!(
                        "must be between {} and {} (where published Steinmetz fits lie), got {}",
                        num(lo),
                        num(hi),
                        num(v)
                    ),
                );
            }
        }
    }

    /// A thermal network: at least one junction–case stage, every R and τ
    /// positive, temperatures finite.
    fn thermal(&mut self, l: &str, t: &ThermalNetwork) {
        if t.junction_case.is_empty() {
            self.field(
                l,
                "thermal.junction_case",
                "needs at least one Foster stage (resistance and time_constant)".into(),
            );
        }
        for (list, stages) in [
            ("junction_case", &t.junction_case),
            ("case_ambient", &t.case_ambient),
        ] {
            for (k, p) in stages.iter().enumerate() {
                self.positive(l, &format!("thermal.{list}[{k}].resistance"), p.resistance);
                self.positive(
                    l,
                    &format!("thermal.{list}[{k}].time_constant"),
                    p.time_constant,
                );
            }
        }
        self.optional_finite(l, "thermal.ambient", t.ambient);
        self.optional_finite(l, "thermal.max_junction", t.max_junction);
    }

    /// Coupled inductors: two or more windings, known and distinct
    /// coupled pairs, each coupling as k or M, and a positive definite
    /// inductance matrix.
    fn coupled(&mut self, l: &str, x: &CoupledInductors) {
        let mut ok = true;
        if x.windings.len() < 2 {
            self.field(
                l,
                "windings",
                format!(
                    "coupled inductors need at least two windings, got {} (use an inductor for one)",
                    x.windings.len()
                ),
            );
            ok = false;
        }
        for (k, w) in x.windings.iter().enumerate() {
            let field = format!("windings[{k}].inductance");
            ok &=
                self.positive(l, &field, w.inductance) && self.invertible(l, &field, w.inductance);
            self.optional_finite(
                l,
                &format!("windings[{k}].initial_current"),
                w.initial_current,
            );
        }
        let names: Vec<&str> = x.windings.iter().map(|w| w.name.as_str()).collect();
        let mut pairs: HashMap<(usize, usize), usize> = HashMap::new();
        for (j, c) in x.couplings.iter().enumerate() {
            let f = format!("couplings[{j}]");
            let mut idx = [None, None];
            for (m, wname) in c.windings.iter().enumerate() {
                idx[m] = names.iter().position(|n| n == wname);
                if idx[m].is_none() {
                    self.field(
                        l,
                        &format!("{f}.windings[{m}]"),
                        format!("unknown winding '{wname}' (windings: {})", quoted(&names)),
                    );
                    ok = false;
                }
            }
            if let [Some(a), Some(b)] = idx {
                if a == b {
                    self.field(
                        l,
                        &format!("{f}.windings"),
                        format!("couples winding '{}' with itself", names[a]),
                    );
                    ok = false;
                } else if let Some(prev) = pairs.insert((a.min(b), a.max(b)), j) {
                    self.field(
                        l,
                        &format!("{f}.windings"),
                        format!(
                            "windings '{}' and '{}' are already coupled by couplings[{prev}]",
                            names[a], names[b]
                        ),
                    );
                    ok = false;
                }
            }
            match (c.k, c.mutual) {
                (Some(_), Some(_)) => {
                    self.field(l, &f, "give either k or mutual, not both".into());
                    ok = false;
                }
                (None, None) => {
                    self.field(l, &f, "give the coupling as k or as mutual".into());
                    ok = false;
                }
                (Some(k), None) => {
                    let kf = format!("{f}.k");
                    if !self.finite(l, &kf, k) {
                        ok = false;
                    } else if k.abs() > 1.0 {
                        self.field(
                            l,
                            &kf,
                            format!("coupling coefficient must lie in [-1, 1], got {}", num(k)),
                        );
                        ok = false;
                    }
                }
                (None, Some(m)) => ok &= self.finite(l, &format!("{f}.mutual"), m),
            }
        }
        // The matrix test only means something once every entry is sound;
        // otherwise it would repeat the problems above in other words.
        if ok && !positive_definite(&x.inductance_matrix()) {
            self.field(
                l,
                "couplings",
                "inductance matrix is not positive definite: the couplings are too strong \
                 (|k| must stay below 1, and |M| below the square root of the two self \
                 inductances; leakage is what k < 1 leaves)"
                    .into(),
            );
        }
    }

    /// A source waveform: finite values, increasing times within the
    /// period, a usable frequency.
    fn waveform(&mut self, l: &str, w: &Stimulus) {
        match w {
            Stimulus::Constant { value } => {
                self.finite(l, "waveform.value", *value);
            }
            Stimulus::PiecewiseLinear { points, period } => {
                if points.is_empty() {
                    self.field(
                        l,
                        "waveform.points",
                        "a piecewise-linear waveform needs at least one point".into(),
                    );
                }
                let mut times_ok = true;
                for (i, p) in points.iter().enumerate() {
                    times_ok &= self.finite(l, &format!("waveform.points[{i}].time"), p.time);
                    self.finite(l, &format!("waveform.points[{i}].value"), p.value);
                }
                if times_ok {
                    let times: Vec<f64> = points.iter().map(|p| p.time).collect();
                    self.strictly_increasing(l, &times, "point", |i| {
                        format!("waveform.points[{i}].time")
                    });
                }
                if let Some(p) = *period {
                    if self.positive(l, "waveform.period", p) && times_ok {
                        for (i, pt) in points.iter().enumerate() {
                            if !(0.0..=p).contains(&pt.time) {
                                self.field(
                                    l,
                                    &format!("waveform.points[{i}].time"),
                                    format!(
                                        "time {} lies outside one period [0, {}] of a repeating waveform",
                                        num(pt.time),
                                        num(p)
                                    ),
                                );
                            }
                        }
                    }
                }
            }
            Stimulus::Sine {
                offset,
                amplitude,
                frequency,
                phase,
            } => {
                self.finite(l, "waveform.offset", *offset);
                self.finite(l, "waveform.amplitude", *amplitude);
                self.frequency(l, "waveform.frequency", *frequency);
                self.finite(l, "waveform.phase", *phase);
            }
        }
    }
}

/// Whether a symmetric matrix is positive definite, by Cholesky
/// factorisation.
///
/// A pivot below 1e-12 of its diagonal entry counts as zero: it is rounding
/// noise (k = 1 exactly leaves a pivot of a few ulps), and a matrix that
/// close to singular would make the solver's state equations meaningless.
fn positive_definite(m: &[Vec<f64>]) -> bool {
    let n = m.len();
    let mut l = vec![vec![0.0; n]; n];
    for j in 0..n {
        let d = m[j][j] - (0..j).map(|k| l[j][k] * l[j][k]).sum::<f64>();
        if d.is_nan() || d <= 1e-12 * m[j][j] {
            return false;
        }
        let d = d.sqrt();
        l[j][j] = d;
        for i in j + 1..n {
            l[i][j] = (m[i][j] - (0..j).map(|k| l[i][k] * l[j][k]).sum::<f64>()) / d;
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cholesky_accepts_leakage_and_rejects_perfect_coupling() {
        let m = |k: f64| vec![vec![1e-3, k * 1e-3 * 2.0], vec![k * 1e-3 * 2.0, 4e-3]];
        assert!(positive_definite(&m(0.99)));
        assert!(positive_definite(&m(-0.5)));
        assert!(!positive_definite(&m(1.0)));
        assert!(!positive_definite(&m(-1.0)));
        assert!(!positive_definite(&[vec![f64::NAN]]));
    }

    #[test]
    fn three_windings_each_below_one_can_still_be_unrealisable() {
        // k12 = k13 = 0.9 force windings 2 and 3 to be strongly alike;
        // k23 = −0.9 says they are opposite: no real core does both.
        let k = [[1.0, 0.9, 0.9], [0.9, 1.0, -0.9], [0.9, -0.9, 1.0]];
        let m: Vec<Vec<f64>> = k
            .iter()
            .map(|r| r.iter().map(|x| x * 1e-3).collect())
            .collect();
        assert!(!positive_definite(&m));
    }
}
