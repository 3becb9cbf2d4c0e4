//! Small valid circuits and assertions on the problems validation reports.

use fluxstep_netlist::{Circuit, CircuitBuilder, NetlistError, Problem};

/// An asynchronous buck (24 V in, 200 kHz, 50 %): valid as built.
pub fn buck() -> CircuitBuilder {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 24.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 22e-6)
        .capacitor("C1", "out", "gnd", 47e-6)
        .resistor("Rload", "out", "gnd", 6.0)
        .pwm("drive", 200e3, 0.5)
}

/// Every problem of a circuit (empty if valid).
pub fn problems(c: &Circuit) -> Vec<Problem> {
    match c.validate() {
        Ok(()) => Vec::new(),
        Err(NetlistError::Invalid(p)) => p,
        Err(e) => panic!("validate returned a non-validation error: {e}"),
    }
}

/// Asserts that a problem names `element` and `field` and that its message
/// contains `text`; returns it. The displayed form must name both too.
pub fn expect(c: &Circuit, element: Option<&str>, field: Option<&str>, text: &str) -> Problem {
    let all = problems(c);
    let found = all.iter().find(|p| {
        p.element.as_deref() == element && p.field.as_deref() == field && p.message.contains(text)
    });
    let Some(p) = found else {
        panic!(
            "no problem with element {element:?}, field {field:?} and text {text:?}; got:\n{}",
            all.iter()
                .map(|p| format!("  {p}  [{p:?}]"))
                .collect::<Vec<_>>()
                .join("\n")
        );
    };
    let shown = p.to_string();
    for part in [element, field].into_iter().flatten() {
        assert!(shown.contains(part), "{shown:?} does not name {part:?}");
    }
    assert!(
        !p.message.starts_with(char::is_uppercase),
        "messages start lowercase: {:?}",
        p.message
    );
    p.clone()
}

/// Asserts that the circuit is valid.
pub fn valid(c: &Circuit) {
    let all = problems(c);
    assert!(
        all.is_empty(),
        "expected a valid circuit, got:\n{}",
        all.iter()
            .map(|p| format!("  {p}"))
            .collect::<Vec<_>>()
            .join("\n")
    );
}
