//! Names: every element, winding, gate and node name usable, element and
//! winding names unique.

use std::collections::{HashMap, HashSet};

use super::checker::{name_rule, Checker};
use crate::element::Element;
use crate::error::Problem;

impl Checker<'_> {
    /// Element names usable and unique; winding names of coupled
    /// inductors usable and unique within their element.
    pub(super) fn element_names(&mut self) {
        let mut first: HashMap<&str, usize> = HashMap::new();
        for (i, e) in self.circuit.elements.iter().enumerate() {
            let name = e.name();
            if let Some(why) = name_rule(name) {
                let label = self.labels[i].clone();
                self.field(&label, "name", format!("element name {name:?} {why}"));
            }
            if !name.is_empty() {
                match first.get(name) {
                    Some(&j) => self.field(
                        name,
                        "name",
                        format!(
                            "duplicate element name '{name}': elements[{j}] and elements[{i}] both use it"
                        ),
                    ),
                    None => {
                        first.insert(name, i);
                    }
                }
            }
            if let Element::CoupledInductors(c) = e {
                let name = self.labels[i].clone();
                let name = name.as_str();
                let mut seen: HashMap<&str, usize> = HashMap::new();
                for (k, w) in c.windings.iter().enumerate() {
                    let field = format!("windings[{k}].name");
                    if let Some(why) = name_rule(&w.name) {
                        self.field(name, &field, format!("winding name {:?} {why}", w.name));
                    } else if let Some(&j) = seen.get(w.name.as_str()) {
                        self.field(
                            name,
                            &field,
                            format!(
                                "duplicate winding name '{}': windings[{j}] and windings[{k}] both use it",
                                w.name
                            ),
                        );
                    } else {
                        seen.insert(&w.name, k);
                    }
                }
            }
        }
    }

    /// Node names follow the element-name rules ('.' would make an output
    /// such as `a.b` ambiguous); each bad name is reported once, where it is
    /// first used.
    pub(super) fn node_names(&mut self) {
        let mut reported: HashSet<&str> = HashSet::new();
        for (i, e) in self.circuit.elements.iter().enumerate() {
            for (field, node) in e.terminals() {
                if let Some(why) = name_rule(node) {
                    if reported.insert(node) {
                        let p = Problem::field(
                            &self.labels[i],
                            &field,
                            format!("node name {node:?} {why}"),
                        )
                        .at_node(node);
                        self.out.push(p);
                    }
                }
            }
        }
    }
}
