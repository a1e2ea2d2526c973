//! fickfit: diffusion coefficients with honest uncertainties.
//!
//! The pipeline: load measurements ([`data`]) → describe the experiment → build the forward
//! model ([`model`]) → solve the 1-D diffusion equation ([`solver`]) → fit → statistics →
//! report. SI units everywhere inside; units are converted at the edges.
#![deny(missing_docs)]

pub mod data;
pub mod error;
pub mod experiment;
pub mod model;
pub mod solver;
pub mod units;

pub use error::{Error, InputKind, Location, Result};
