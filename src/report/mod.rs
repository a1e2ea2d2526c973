//! The pieces of a fit report that are not numbers: figures first.
//!
//! Everything here takes plain data (vectors of numbers, labels with their units) and knows
//! nothing about models or fits, so the report code decides what to show and this module only
//! decides how it looks. [`plot`] renders x–y figures, residual and normal Q–Q plots,
//! profile-likelihood curves, Arrhenius plots and correlation heat maps, each as an SVG string
//! (to inline in a self-contained HTML page) and as a PNG file, with an embedded font so that
//! the output is the same on every machine.

pub mod plot;
