//! General nonlinear least-squares engine: parameters with transforms and bounds, a
//! Levenberg–Marquardt search with a Nelder–Mead fallback and multi-start, profile-likelihood
//! and bootstrap intervals, and model comparison.
//!
//! The model is seen only through [`ResidualProblem`] (weighted residuals of a full SI
//! parameter vector), so the engine does not depend on the forward solver. Entry point:
//! [`fit`], which returns a [`FitResult`] holding estimates, standard errors, intervals,
//! correlation, goodness of fit, stop reason and warnings as plain serialisable data.
//!
//! References: see the submodules.

pub mod bootstrap;
pub mod compare;
pub mod engine;
pub mod jacobian;
pub mod lm;
pub mod nelder_mead;
pub mod params;
pub mod problem;
pub mod profile;
pub mod progress;
pub mod rfactor;

pub use bootstrap::{BootstrapOptions, BootstrapSummary};
pub use compare::{rank_models, ModelSummary, RankedModel};
pub use engine::{fit, FitOptions, FitResult, ParameterResult, Weighting};
pub use jacobian::Difference;
pub use lm::{LmOptions, StopReason};
pub use params::{ParamSet, ParamSpec, Transform};
pub use problem::{DatasetRange, FnProblem, ResidualProblem};
pub use profile::{ProfileEnd, ProfileInterval, ProfileOptions, ProfilePoint, ProfileStatistic};
