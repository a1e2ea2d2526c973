//! Reports: the report as plain data ([`data`]) and its writers — the terminal summary
//! ([`terminal`]), `fitted.csv` ([`fitted`]), the figures ([`figures`], drawn by [`plot`]) and
//! the self-contained `report.html` ([`html`]) — and the report folder that never loses a
//! user's file ([`folder`]).
//!
//! [`plot`] takes plain data (vectors of numbers, labels with their units) and knows nothing
//! about models or fits: it renders x–y figures, residual and normal Q–Q plots,
//! profile-likelihood curves, Arrhenius plots and correlation heat maps, each as an SVG string
//! and as a PNG file, with an embedded font so that the output is the same on every machine.

pub mod data;
pub mod figures;
pub mod fitted;
pub mod folder;
pub mod html;
pub mod plot;
pub mod terminal;
