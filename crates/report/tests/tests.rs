//! The report's integration tests, one binary:
//!
//! - `common`: building example reports, reading the page's marked numbers,
//!   parsing shown numbers back;
//! - `page`: the page without a browser (self-contained, size, limits and
//!   their banner, numbers equal to the summary, loss sections);
//! - `browser`: the page in headless Chromium (no console errors, every
//!   section, SVGs with a size, no overflow at 1280 px and at the A4
//!   printable width, numbers equal to the summary, a screenshot).

mod browser;
mod common;
mod page;
