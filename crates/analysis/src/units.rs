//! Units of outputs by their names.

/// The unit of an output by its name: currents in A, voltages (nodes,
/// `.voltage`) in V; compensator outputs have none.
pub(crate) fn unit_of(name: &str) -> &'static str {
    if name.ends_with(".current") {
        "A"
    } else if name.ends_with(".voltage") || !name.contains('.') {
        "V"
    } else {
        ""
    }
}
