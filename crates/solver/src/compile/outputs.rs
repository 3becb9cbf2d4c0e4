//! The last steps of compiling: the named outputs (every node voltage,
//! every branch current and voltage, every compensator's output), the
//! compensators, and the output indices that compensators, switch
//! transitions and comparators read.

use fluxstep_netlist::Circuit;

use super::inputs::{PendingComparator, RealisedCompensator, SetPoint};
use super::{Branch, BranchKind, Compiled, CompiledComparator, CompiledCompensator, OutputDef};
use crate::error::SolverError;

/// Every node voltage, then every branch's current and voltage.
pub(super) fn network_outputs(nodes: &[String], branches: &[Branch]) -> Vec<(String, OutputDef)> {
    let mut outputs = vec![];
    for (i, n) in nodes.iter().enumerate() {
        // Internal nodes of expanded series resistances (`C1.esr`) are
        // named with a '.', which no circuit node may contain; they are
        // not outputs (an output `C1.esr` would read as a part name).
        if !n.contains('.') {
            outputs.push((n.clone(), OutputDef::Node(i)));
        }
    }
    for (i, b) in branches.iter().enumerate() {
        if let BranchKind::Transformer { .. } = b.kind {
            outputs.push((
                format!("{}.primary.current", b.name),
                OutputDef::BranchCurrent(i),
            ));
            outputs.push((
                format!("{}.primary.voltage", b.name),
                OutputDef::BranchVoltage(i),
            ));
            outputs.push((
                format!("{}.secondary.current", b.name),
                OutputDef::SecondaryCurrent(i),
            ));
            outputs.push((
                format!("{}.secondary.voltage", b.name),
                OutputDef::SecondaryVoltage(i),
            ));
        } else {
            outputs.push((format!("{}.current", b.name), OutputDef::BranchCurrent(i)));
            outputs.push((format!("{}.voltage", b.name), OutputDef::BranchVoltage(i)));
        }
    }
    outputs
}

/// The compensators, each adding its output `NAME.output` to `outputs`;
/// their measured inputs are set later by [`connect`].
pub(super) fn compensators(
    circuit: &Circuit,
    realised: Vec<RealisedCompensator>,
    set_points: Vec<SetPoint>,
    outputs: &mut Vec<(String, OutputDef)>,
) -> Vec<CompiledCompensator> {
    let mut compiled = vec![];
    for (k, ((comp, r), set_point)) in circuit
        .compensators
        .iter()
        .zip(realised)
        .zip(set_points)
        .enumerate()
    {
        outputs.push((format!("{}.output", comp.name), OutputDef::Compensator(k)));
        compiled.push(CompiledCompensator {
            name: comp.name.clone(),
            states: r.states,
            a: r.a,
            b: r.b,
            c: r.c,
            d: r.d,
            reference_z: set_point.z,
            reference_source: set_point.source,
            input: usize::MAX,
        });
    }
    compiled
}

/// Looks up, by name, the outputs that compensators measure, that switch
/// transitions follow and that comparators sense; adds the comparators.
///
/// # Errors
///
/// [`SolverError::UnknownOutput`] for a name that reads nothing.
pub(super) fn connect(
    c: &mut Compiled,
    circuit: &Circuit,
    comparators: Vec<PendingComparator>,
) -> Result<(), SolverError> {
    for k in 0..c.compensators.len() {
        let input = &circuit.compensators[k].input;
        c.compensators[k].input = c.output_index(input)?;
    }
    for k in 0..c.switches.len() {
        if c.switches[k].transition.is_some() {
            let name = c.switches[k].name.clone();
            let current_out = c.output_index(&format!("{name}.current"))?;
            let voltage_out = c.output_index(&format!("{name}.voltage"))?;
            let t = c.switches[k].transition.as_mut().expect("checked");
            t.current_out = current_out;
            t.voltage_out = voltage_out;
        }
    }
    for p in comparators {
        let sense = c.output_index(&p.spec.sense)?;
        c.comparators.push(CompiledComparator {
            signal: p.signal,
            spec: p.spec,
            sense,
            turn_off: p.turn_off,
            turn_on: p.turn_on,
        });
    }
    Ok(())
}
