//! Reports: the report as plain data ([`data`]) and its writers — the terminal summary
//! ([`terminal`]), `fitted.csv` ([`fitted`]) — and the report folder that never loses a
//! user's file ([`folder`]).

pub mod data;
pub mod fitted;
pub mod folder;
pub mod terminal;
