//! Statistics of a least-squares fit: covariance with a rank check, confidence intervals,
//! goodness of fit and information criteria, residual randomness checks, identifiability
//! warnings and delta-method propagation to derived quantities.
//!
//! References: see the submodules.

pub mod covariance;
pub mod derived;
pub mod goodness;
pub mod identifiability;
pub mod intervals;
pub mod residual_tests;

pub use covariance::Covariance;
pub use derived::{delta_method, DerivedValue, ExtraInput};
pub use goodness::Goodness;
pub use identifiability::{FitWarning, WarningKind};
pub use intervals::Interval;
pub use residual_tests::{residual_checks, ResidualChecks, ResidualVerdict};
