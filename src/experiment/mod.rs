//! The experiment file: one plain TOML file that describes a sample, its ends, its initial
//! state, the parameters to fit and the runs (datasets) to fit them to, so that a fit can be
//! rerun, reviewed and shared.
//!
//! [`load`] reads the file, checks every key, reads the data files it names (relative to the
//! experiment file) and returns an [`Experiment`]: the parameter table and, per dataset, the
//! solver request, the observations and σ in SI, and [`Dataset::model_for`], which builds the
//! forward model for a parameter vector without parsing anything again.
//!
//! Every problem is an [`Error::Input`](crate::Error::Input) naming the experiment file, the
//! line, and the key path (`datasets[1].ends.right.value`), with the value found; a misspelt key
//! or choice gets a suggestion ([`suggest`]). The keys are described in
//! `docs/experiment-file.md`.
//!
//! References: TOML v1.0.0 specification (toml.io) — from memory; the `toml` crate parses.

pub mod build;
pub mod floor;
mod locate;
pub mod quantity;
pub mod schema;
pub mod suggest;

use std::path::Path;

pub use build::{
    Dataset, DerivedRequest, DerivedWhat, Experiment, FitOptions, Parameter, SigmaIter, Sigmas,
    Term, Weighting,
};
pub use floor::{BelowLimit, DetectionLimit};
pub use quantity::Kind;

use crate::error::{Error, InputKind, Location, Result};

/// Parse experiment-file text into its written form, checking syntax and keys only (no unit
/// conversion, no data files). `name` is used in error locations.
pub fn parse_str(text: &str, name: &Path) -> Result<schema::ExperimentFile> {
    parse_indexed(text, name).map(|(f, _)| f)
}

fn parse_indexed(text: &str, name: &Path) -> Result<(schema::ExperimentFile, locate::SpanIndex)> {
    // TOML allows LF and CRLF line endings only; a file saved with old-Mac CR endings is read
    // with LF so that it loads and its lines are counted as the user sees them. (A CR byte
    // is not allowed anywhere else in TOML, so nothing valid changes meaning.)
    let unified;
    let text = if text.contains('\r') {
        unified = text.replace("\r\n", "\n").replace('\r', "\n");
        unified.as_str()
    } else {
        text
    };
    let (index, syntax) = locate::SpanIndex::new(name, text);
    if let Some(e) = syntax {
        return Err(locate::syntax_error(&index, text, &e));
    }
    match toml::from_str::<schema::ExperimentFile>(text) {
        Ok(f) => Ok((f, index)),
        Err(e) => Err(locate::schema_error(&index, text, &e)),
    }
}

/// Read an experiment from text; data paths are relative to `base`. `name` is used in error
/// locations.
pub fn from_str(text: &str, name: &Path, base: &Path) -> Result<Experiment> {
    let (file, index) = parse_indexed(text, name)?;
    build::build(&file, &index, base)
}

/// Read an experiment file and the data files it names (relative to the experiment file's
/// directory).
pub fn load(path: impl AsRef<Path>) -> Result<Experiment> {
    let path = path.as_ref();
    if path.is_dir() {
        return Err(Error::input(
            InputKind::Unreadable,
            Location::file(path),
            "this is a folder, not an experiment file; name the .toml file inside it",
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| {
        Error::input(
            InputKind::Unreadable,
            Location::file(path),
            format!("cannot read the experiment file: {e}"),
        )
    })?;
    // UTF-16 text (with or without byte-order mark) has NUL bytes or invalid UTF-8, and
    // TOML allows neither: name the encoding rather than the first odd character.
    if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) || bytes.contains(&0) {
        let line = bytes
            .iter()
            .take_while(|&&c| c != 0)
            .filter(|&&c| c == b'\n')
            .count() as u64;
        return Err(Error::input(
            InputKind::Encoding,
            Location::file(path).with_line(line + 1),
            "the experiment file is not UTF-8 text: it starts with a UTF-16 byte-order mark \
             or has NUL bytes (UTF-16 text, or not text at all); save it as UTF-8 and try again",
        ));
    }
    let text = String::from_utf8(bytes).map_err(|e| {
        let offset = e.utf8_error().valid_up_to();
        let line = e.as_bytes()[..offset]
            .iter()
            .filter(|&&c| c == b'\n')
            .count() as u64
            + 1;
        Error::input(
            InputKind::Encoding,
            Location::file(path).with_line(line),
            "the experiment file is not valid UTF-8 text",
        )
    })?;
    let base = path.parent().unwrap_or_else(|| Path::new(""));
    from_str(&text, path, base)
}
