//! Where things are in the experiment file: key paths ↔ byte spans ↔ lines, and the
//! translation of the TOML reader's errors into located [`Error::input`] errors.

use std::ops::Range;
use std::path::{Path, PathBuf};

use toml::de::{DeTable, DeValue};
use toml::Spanned;

use super::suggest;
use crate::error::{Error, InputKind, Location};

/// Key paths of a parsed file with the spans of their keys and values.
#[derive(Debug, Clone, Default)]
pub struct SpanIndex {
    file: PathBuf,
    /// (key path, key span, value span).
    entries: Vec<(String, Range<usize>, Range<usize>)>,
    /// Byte offset of the start of each line.
    line_starts: Vec<usize>,
}

impl SpanIndex {
    /// Index `text` (already known to be valid TOML syntax, or else only lines are indexed).
    pub fn new(file: &Path, text: &str) -> (Self, Option<toml::de::Error>) {
        let mut line_starts = vec![0];
        line_starts.extend(text.match_indices('\n').map(|(i, _)| i + 1));
        let mut index = SpanIndex {
            file: file.to_path_buf(),
            entries: Vec::new(),
            line_starts,
        };
        match DeTable::parse(text) {
            Ok(root) => {
                index.walk_table("", root.get_ref());
                (index, None)
            }
            Err(e) => (index, Some(e)),
        }
    }

    fn walk_table(&mut self, prefix: &str, table: &DeTable<'_>) {
        for (k, v) in table.iter() {
            let path = if prefix.is_empty() {
                k.get_ref().to_string()
            } else {
                format!("{prefix}.{}", k.get_ref())
            };
            self.walk_value(path, k.span(), v);
        }
    }

    fn walk_value(&mut self, path: String, key: Range<usize>, v: &Spanned<DeValue<'_>>) {
        self.entries.push((path.clone(), key, v.span()));
        match v.get_ref() {
            DeValue::Table(t) => self.walk_table(&path, t),
            DeValue::Array(a) => {
                for (i, item) in a.iter().enumerate() {
                    let p = format!("{path}[{i}]");
                    self.walk_value(p, item.span(), item);
                }
            }
            _ => {}
        }
    }

    /// Line (from 1) of a byte offset.
    pub fn line_of(&self, offset: usize) -> u64 {
        self.line_starts.partition_point(|&s| s <= offset) as u64
    }

    /// Column (from 1, in characters) of a byte offset in `text`.
    pub fn column_of(&self, text: &str, offset: usize) -> u64 {
        let line = self.line_of(offset) as usize;
        let start = self
            .line_starts
            .get(line.saturating_sub(1))
            .copied()
            .unwrap_or(0);
        text.get(start..offset.min(text.len()))
            .map(|s| s.chars().count() as u64 + 1)
            .unwrap_or(1)
    }

    /// The key path whose key or value holds the byte offset (the innermost one).
    pub fn path_at(&self, offset: usize) -> Option<&str> {
        if let Some((p, _, _)) = self.entries.iter().find(|(_, k, _)| k.contains(&offset)) {
            return Some(p);
        }
        self.entries
            .iter()
            .filter(|(_, _, v)| v.contains(&offset))
            .min_by_key(|(_, _, v)| v.len())
            .map(|(p, _, _)| p.as_str())
    }

    /// Line of a key path, or of its nearest written ancestor.
    pub fn line_of_key(&self, path: &str) -> Option<u64> {
        let mut p = path;
        loop {
            if let Some((_, k, _)) = self.entries.iter().find(|(q, _, _)| q == p) {
                return Some(self.line_of(k.start));
            }
            let cut = p.rfind(['.', '['])?;
            p = &p[..cut];
        }
    }

    /// The location of a key path: this file, the key's line, the key.
    pub fn location(&self, path: &str) -> Location {
        let mut loc = Location::file(&self.file).with_key(path);
        loc.line = self.line_of_key(path);
        loc
    }

    /// The file's name as given.
    pub fn file(&self) -> &Path {
        &self.file
    }
}

/// Text between the first pair of backticks after `after` in `msg`.
fn quoted_after<'a>(msg: &'a str, after: &str) -> Option<&'a str> {
    let rest = &msg[msg.find(after)? + after.len()..];
    let start = rest.find('`')? + 1;
    let len = rest[start..].find('`')?;
    Some(&rest[start..start + len])
}

/// Every backticked word after "expected" in a serde message.
fn expected_list(msg: &str) -> Vec<&str> {
    let Some(pos) = msg.find("expected") else {
        return Vec::new();
    };
    msg[pos..].split('`').skip(1).step_by(2).collect()
}

fn join(parent: &str, key: &str) -> String {
    if parent.is_empty() {
        key.to_string()
    } else {
        format!("{parent}.{key}")
    }
}

/// A syntax error of the TOML reader as a located [`InputKind::Syntax`] error.
pub fn syntax_error(index: &SpanIndex, text: &str, e: &toml::de::Error) -> Error {
    let mut loc = Location::file(index.file());
    let mut at = String::new();
    if let Some(span) = e.span() {
        loc.line = Some(index.line_of(span.start));
        at = format!(" (column {})", index.column_of(text, span.start));
    }
    Error::input(
        InputKind::Syntax,
        loc,
        format!("not valid TOML{at}: {}", e.message().trim()),
    )
}

/// A schema error of the TOML reader (unknown key, missing key, wrong type, unknown variant)
/// as a located error naming the key path, with a suggestion for misspellings.
pub fn schema_error(index: &SpanIndex, text: &str, e: &toml::de::Error) -> Error {
    let msg = e.message().trim();
    let offset = e.span().map(|s| s.start);
    let here = offset
        .and_then(|o| index.path_at(o))
        .unwrap_or("")
        .to_string();
    let line = offset.map(|o| index.line_of(o));
    let col = offset.map(|o| index.column_of(text, o));
    let located = |key: &str| {
        let mut loc = Location::file(index.file()).with_key(key);
        loc.line = line.or_else(|| index.line_of_key(key));
        loc
    };
    let at = col.map(|c| format!(" (column {c})")).unwrap_or_default();
    if let Some(found) = quoted_after(msg, "unknown field") {
        let allowed = expected_list(msg);
        // The span is the unknown key itself, whose path ends in it.
        let key = if here.ends_with(found) {
            here.clone()
        } else {
            join(&here, found)
        };
        let hint = suggest::did_you_mean(found, allowed.iter().copied());
        let list = if allowed.is_empty() {
            "this table takes no keys".to_string()
        } else {
            format!("allowed here: {}", allowed.join(", "))
        };
        return Error::input(
            InputKind::UnknownKey,
            located(&key),
            format!("unknown key '{found}'{hint}{at}; {list}"),
        );
    }
    if let Some(missing) = quoted_after(msg, "missing field") {
        let key = join(&here, missing);
        let mut loc = Location::file(index.file()).with_key(&key);
        loc.line = line;
        return Error::input(
            InputKind::MissingKey,
            loc,
            format!(
                "required key '{missing}' is missing{}",
                if here.is_empty() {
                    " at the top level".to_string()
                } else {
                    format!(" in '{here}'")
                }
            ),
        );
    }
    if let Some(found) = quoted_after(msg, "unknown variant") {
        let allowed = expected_list(msg);
        let hint = suggest::did_you_mean(found, allowed.iter().copied());
        return Error::input(
            InputKind::BadValue,
            located(&here),
            format!(
                "'{found}' is not a choice for '{here}'{hint}{at}; choose one of: {}",
                allowed.join(", ")
            ),
        );
    }
    Error::input(
        InputKind::BadValue,
        located(&here),
        format!("wrong value for '{here}'{at}: {msg}"),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_lines_and_paths() {
        let text = "a = 1\n[b]\nc = \"x\"\n[[d]]\ne = 2\n[[d]]\ne = 3\n";
        let (idx, err) = SpanIndex::new(Path::new("t.toml"), text);
        assert!(err.is_none());
        assert_eq!(idx.line_of_key("b.c"), Some(3));
        assert_eq!(idx.line_of_key("d[1].e"), Some(7));
        assert_eq!(idx.line_of_key("d[1].e.zz"), Some(7));
        let off = text.find("e = 3").unwrap();
        assert_eq!(idx.path_at(off), Some("d[1].e"));
    }
}
