//! seedline: exact genealogies, diversity and sampling design under dormancy.
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod dormancy;
pub mod theory;
