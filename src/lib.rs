//! fickfit: diffusion coefficients with honest uncertainties.
//!
//! The pipeline: load measurements ([`data`], [`units`]) → describe the experiment → build the
//! forward model ([`model`]) → solve the 1-D diffusion equation ([`solver`]) → fit → statistics
//! → report. Closed-form solutions ([`analytic`]) serve as test oracles and start values; the
//! classic shortcut estimators ([`shortcuts`]) are reported beside the full fit. SI units
//! everywhere inside; units are converted at the edges.
#![deny(missing_docs)]

pub mod analysis;
pub mod analytic;
pub mod arrhenius;
pub mod batch;
pub mod data;
pub mod error;
pub mod experiment;
pub mod fit;
pub mod model;
pub mod report;
pub mod shortcuts;
pub mod simulate;
pub mod solver;
pub mod stats;
pub mod units;

pub use error::{Error, InputKind, Location, Result};
