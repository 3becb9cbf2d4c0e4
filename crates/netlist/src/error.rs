//! The netlist crate's error type.

use std::fmt;

/// One problem found in a circuit, naming where it is.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Problem {
    /// The element or gate the problem belongs to, if any.
    pub element: Option<String>,
    /// The field (e.g. `inductance`, `nodes[1]`), if any.
    pub field: Option<String>,
    /// The node involved, if any.
    pub node: Option<String>,
    /// What is wrong, in lowercase plain words.
    pub message: String,
}

impl Problem {
    /// A problem of an element's field.
    pub fn field(element: &str, field: &str, message: impl Into<String>) -> Self {
        Problem {
            element: Some(element.into()),
            field: Some(field.into()),
            node: None,
            message: message.into(),
        }
    }

    /// A problem of the circuit as a whole.
    pub fn circuit(message: impl Into<String>) -> Self {
        Problem {
            element: None,
            field: None,
            node: None,
            message: message.into(),
        }
    }

    /// The same problem, also naming a node.
    pub fn at_node(mut self, node: &str) -> Self {
        self.node = Some(node.into());
        self
    }
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match (&self.element, &self.field) {
            (Some(e), Some(fl)) => write!(f, "{e}.{fl}: ")?,
            (Some(e), None) => write!(f, "{e}: ")?,
            (None, Some(fl)) => write!(f, "{fl}: ")?,
            (None, None) => {}
        }
        write!(f, "{}", self.message)?;
        if let Some(n) = &self.node {
            if !self.message.contains(&format!("'{n}'")) {
                write!(f, " (node '{n}')")?;
            }
        }
        Ok(())
    }
}

/// Everything that can go wrong reading or checking a circuit.
#[derive(Debug, thiserror::Error)]
pub enum NetlistError {
    /// The file could not be read.
    #[error("cannot read {path}: {source}")]
    Io {
        /// The path as given.
        path: String,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// The text is not valid JSON or does not match the format.
    #[error("{path}: {message}")]
    Json {
        /// Where in the document (e.g. `elements[2].inductance`), or `line L column C`.
        path: String,
        /// What is wrong.
        message: String,
    },
    /// The circuit was read but breaks one or more rules; all are listed.
    #[error("invalid circuit: {}", .0.iter().map(|p| p.to_string()).collect::<Vec<_>>().join("; "))]
    Invalid(Vec<Problem>),
}
