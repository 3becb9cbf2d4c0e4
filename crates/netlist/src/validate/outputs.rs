//! Whether an output name (`out`, `L1.current`, `X1.primary.voltage`,
//! `G1.output`, …) names something the circuit has: used by the gates,
//! the compensators and the run settings alike.

use super::checker::Checker;
use crate::circuit::OutputName;
use crate::element::Element;

impl Checker<'_> {
    /// Why an output name is unusable, if it is.
    pub(super) fn output_problem(&self, text: &str) -> Option<String> {
        match OutputName::parse(text) {
            Err(p) => Some(p.message),
            Ok(OutputName::Node(n)) => (!self
                .nodes
                .get_or_init(|| self.circuit.nodes().into_iter().collect())
                .contains(&n))
            .then(|| format!("output {text:?} names no node of the circuit")),
            Ok(OutputName::Current(e)) | Ok(OutputName::Voltage(e)) => self
                .output_target(&e)
                .err()
                .map(|why| format!("output {text:?}: {why}")),
            Ok(OutputName::Signal(e)) => (!self.circuit.compensators.iter().any(|k| k.name == e))
                .then(|| format!("output {text:?}: no compensator is named '{e}'")),
        }
    }

    /// Whether `target` (the part before `.current` / `.voltage`) names
    /// something with a current and a voltage.
    fn output_target(&self, target: &str) -> Result<(), String> {
        let (name, part) = match target.split_once('.') {
            Some((e, p)) => (e, Some(p)),
            None => (target, None),
        };
        let Some(e) = self.circuit.element(name) else {
            return Err(format!("no element is named '{name}'"));
        };
        match (e, part) {
            (Element::CoupledInductors(c), Some(w)) => {
                if c.windings.iter().any(|x| x.name == w) {
                    Ok(())
                } else {
                    Err(format!("coupled inductors '{name}' have no winding '{w}'"))
                }
            }
            (Element::CoupledInductors(c), None) => {
                let w = c.windings.first().map(|w| w.name.as_str()).unwrap_or("WINDING");
                Err(format!(
                    "coupled inductors have one current per winding: name one, e.g. '{name}.{w}.current'"
                ))
            }
            (Element::IdealTransformer(_), Some("primary" | "secondary")) => Ok(()),
            (Element::IdealTransformer(_), _) => Err(format!(
                "an ideal transformer has a primary and a secondary: use '{name}.primary.current' or '{name}.secondary.current'"
            )),
            (Element::Switch(s), Some("body_diode")) => {
                if s.body_diode.is_some() {
                    Ok(())
                } else {
                    Err(format!("switch '{name}' has no body_diode"))
                }
            }
            (_, None) => Ok(()),
            (_, Some(p)) => Err(format!(
                "{} '{name}' has no part '{p}'",
                e.kind_name().replace('_', " ")
            )),
        }
    }
}
