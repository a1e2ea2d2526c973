//! The whole job for one experiment: the experiment as a least-squares problem
//! ([`problem`]), fitted with the weighting it needs ([`run`]). The result is plain data for
//! the report writers.

pub mod problem;
pub mod run;

pub use problem::ExperimentProblem;
pub use run::{analyse, Analysis, AnalysisOptions};
