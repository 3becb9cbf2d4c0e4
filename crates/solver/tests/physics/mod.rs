mod control;
mod converters;
mod crosscheck;
mod exact;
mod issue_13;
mod issue_19;
mod structure;
mod transition;
pub mod util;
