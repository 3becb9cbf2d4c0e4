mod control;
mod converters;
mod crosscheck;
mod exact;
mod issue_13;
mod issue_19;
mod structure;
pub mod util;
