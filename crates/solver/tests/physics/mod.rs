mod control;
mod converters;
mod crosscheck;
mod exact;
mod structure;
pub mod util;
