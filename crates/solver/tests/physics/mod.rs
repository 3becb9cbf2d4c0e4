mod control;
mod converters;
mod crosscheck;
mod exact;
mod issue_13;
mod structure;
pub mod util;
