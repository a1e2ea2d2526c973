//! fickfit: diffusion coefficients with honest uncertainties.
//!
//! The pipeline: load measurements ([`data`]) → describe the experiment → build the forward
//! model ([`model`]) → solve the 1-D diffusion equation ([`solver`]) → fit → statistics →
//! report. SI units everywhere inside; units are converted at the edges.
#![deny(missing_docs)]

pub mod error;
pub mod model;
pub mod report;
pub mod solver;

pub use error::{Error, InputKind, Location, Result};
