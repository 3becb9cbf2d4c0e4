//! What can go wrong setting up, running, sharding or merging a sweep.
//!
//! These are errors of the sweep as a whole (the input cannot be used). A
//! point that fails — a corner the circuit's validation rejects, a run
//! stopped by a diagnostic — is not an error: it is recorded in its row.

/// Everything that stops a sweep before or instead of producing its table.
#[derive(Debug, thiserror::Error)]
pub enum SweepError {
    /// A file could not be read or written.
    #[error("cannot {action} {path}: {source}")]
    Io {
        /// "read" or "write".
        action: &'static str,
        /// The path as given.
        path: String,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// The sweep file is not JSON or does not match the format.
    #[error("{path}: {message}")]
    Json {
        /// Where in the sweep file (e.g. `parameters[0].values`).
        path: String,
        /// What is wrong.
        message: String,
    },
    /// The base circuit cannot be read, or is invalid as written.
    #[error("base circuit {path}: {source}")]
    Circuit {
        /// The circuit file.
        path: String,
        /// The circuit's own error (every problem listed).
        #[source]
        source: fluxstep_netlist::NetlistError,
    },
    /// The base circuit is valid but the solver cannot compile it.
    #[error("base circuit: {0}")]
    Compile(String),
    /// A parameter path does not name a number of the circuit.
    #[error("unknown parameter path {path:?}: {reason}; valid paths: {}", valid.join(", "))]
    UnknownPath {
        /// The path as written.
        path: String,
        /// What is wrong with it.
        reason: String,
        /// Every path to a number of the base circuit.
        valid: Vec<String>,
    },
    /// A field of the sweep file has a value that cannot be used.
    #[error("{field}: {message}")]
    Invalid {
        /// The field (e.g. `parameters[1].values.count`).
        field: String,
        /// What is wrong, with the value given.
        message: String,
    },
    /// `--shard I/N` with I not in 0..N or N = 0.
    #[error("shard {index}/{count} is out of range: need a count of at least 1 and an index from 0 to count − 1")]
    Shard {
        /// The index given.
        index: u64,
        /// The count given.
        count: u64,
    },
    /// Shard outputs that do not add up to one sweep.
    #[error("cannot merge: {0}")]
    Merge(String),
    /// A result table that cannot be read back.
    #[error("{path}: {message}")]
    Table {
        /// The table file.
        path: String,
        /// What is wrong (with the line).
        message: String,
    },
    /// The thread pool could not be built.
    #[error("cannot start {threads} threads: {message}")]
    Threads {
        /// Threads requested.
        threads: usize,
        /// The reason.
        message: String,
    },
}
