//! "Did you mean ...?" for misspelt keys, variants and parameter names.
//!
//! The candidate nearest to the word by optimal-string-alignment edit distance (insertions,
//! deletions, substitutions and swaps of neighbouring letters, each costing 1; case ignored) is
//! offered when its distance is at most a third of the word's length (at least 1, at most 3).
//!
//! References: F. J. Damerau, "A technique for computer detection and correction of spelling
//! errors", Commun. ACM 7 (1964) 171–176; V. I. Levenshtein, Soviet Physics Doklady 10 (1966)
//! 707–710.

/// Optimal-string-alignment distance between `a` and `b`, ignoring ASCII case.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().map(|c| c.to_ascii_lowercase()).collect();
    let b: Vec<char> = b.chars().map(|c| c.to_ascii_lowercase()).collect();
    let (n, m) = (a.len(), b.len());
    // d[i][j] = distance between a[..i] and b[..j], stored row-major.
    let w = m + 1;
    let mut d = vec![0usize; (n + 1) * w];
    for i in 0..=n {
        d[i * w] = i;
    }
    for (j, v) in d.iter_mut().enumerate().take(m + 1) {
        *v = j;
    }
    for i in 1..=n {
        for j in 1..=m {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut v = (d[(i - 1) * w + j] + 1)
                .min(d[i * w + j - 1] + 1)
                .min(d[(i - 1) * w + j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                v = v.min(d[(i - 2) * w + j - 2] + 1);
            }
            d[i * w + j] = v;
        }
    }
    d[n * w + m]
}

/// The candidate closest to `word`, when it is close enough to be a likely misspelling.
pub fn closest<'a, I>(word: &str, candidates: I) -> Option<&'a str>
where
    I: IntoIterator<Item = &'a str>,
{
    let limit = (word.chars().count() / 3).clamp(1, 3);
    candidates
        .into_iter()
        .map(|c| (edit_distance(word, c), c))
        .filter(|&(d, _)| d <= limit)
        .min_by_key(|&(d, _)| d)
        .map(|(_, c)| c)
}

/// `" (did you mean 'x'?)"` or an empty string.
pub fn did_you_mean<'a, I>(word: &str, candidates: I) -> String
where
    I: IntoIterator<Item = &'a str>,
{
    match closest(word, candidates) {
        Some(c) => format!(" (did you mean '{c}'?)"),
        None => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn distances() {
        // Textbook cases (common practice): kitten → sitting is 3; a swap costs 1.
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("thikcness", "thickness"), 1);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("Shape", "shape"), 0);
    }

    #[test]
    fn suggests_only_close_words() {
        let keys = ["thickness", "radius", "inner_radius", "layers"];
        assert_eq!(closest("thicknes", keys), Some("thickness"));
        assert_eq!(closest("raduis", keys), Some("radius"));
        assert_eq!(closest("colour", keys), None);
    }
}
