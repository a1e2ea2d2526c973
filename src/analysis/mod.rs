//! The whole job for one experiment: the experiment as a least-squares problem
//! ([`problem`]), fitted with the weighting it needs ([`run`]), from start values the data suggest where the file gives
//! none ([`starts`]), beside the classic shortcut estimates ([`shortcuts`]). The result is plain data for
//! the report writers.

pub mod compare;
pub mod derived;
pub mod problem;
pub mod run;
pub mod shortcuts;
pub mod starts;
pub mod thickness;

pub use problem::ExperimentProblem;
pub use run::{analyse, Analysis, AnalysisOptions};
