//! JSON pointers (RFC 6901) for problem paths, and "did you mean" suggestions.
//!
//! Every problem of a noise record names the place it was found as a JSON pointer, so that a
//! user (or an editor) can go straight to it. The root of the record is the empty pointer `""`;
//! a child is the parent followed by `/` and the key, with `~` written `~0` and `/` written `~1`.
//! Pointers are built by concatenation only, so a caller that embeds a record under
//! `/noise` can prefix every path with `/noise`.

/// The pointer to `key` inside the object at `parent`.
pub(crate) fn child_key(parent: &str, key: &str) -> String {
    let mut out = String::with_capacity(parent.len() + key.len() + 1);
    out.push_str(parent);
    out.push('/');
    for ch in key.chars() {
        match ch {
            '~' => out.push_str("~0"),
            '/' => out.push_str("~1"),
            c => out.push(c),
        }
    }
    out
}

/// The pointer to element `index` of the array at `parent`.
pub(crate) fn child_index(parent: &str, index: usize) -> String {
    format!("{parent}/{index}")
}

/// The candidate closest to `word`, if it is close enough to be a likely misspelling.
///
/// Closeness is the optimal-string-alignment distance (Levenshtein distance plus swaps of two
/// neighbouring characters), compared without regard to ASCII case. Up to 1 edit is accepted for
/// candidates shorter than 5 characters, up to 2 for longer ones. Ties go to the earlier
/// candidate, so the answer is deterministic.
pub(crate) fn suggest<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    let w: Vec<char> = word.to_ascii_lowercase().chars().collect();
    let mut best: Option<(usize, &'a str)> = None;
    for &cand in candidates {
        let c: Vec<char> = cand.to_ascii_lowercase().chars().collect();
        let limit = if c.len() < 5 { 1 } else { 2 };
        let d = edit_distance(&w, &c);
        if d <= limit && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, cand));
        }
    }
    best.map(|(_, c)| c)
}

/// Optimal-string-alignment distance between two character sequences.
fn edit_distance(a: &[char], b: &[char]) -> usize {
    // d[i][j]: distance between a[..i] and b[..j]; rows kept in full (words are short).
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for (j, cell) in d[0].iter_mut().enumerate() {
        *cell = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut v = (d[i - 1][j] + 1)
                .min(d[i][j - 1] + 1)
                .min(d[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                v = v.min(d[i - 2][j - 2] + 1);
            }
            d[i][j] = v;
        }
    }
    d[a.len()][b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pointer_escaping_follows_rfc_6901_section_5() {
        // RFC 6901 §5 lists "/a~1b" for the key "a/b" and "/m~0n" for the key "m~n".
        assert_eq!(child_key("", "a/b"), "/a~1b");
        assert_eq!(child_key("", "m~n"), "/m~0n");
        assert_eq!(child_key("", ""), "/");
        assert_eq!(child_index(&child_key("", "foo"), 0), "/foo/0");
    }

    #[test]
    fn a_swap_of_two_letters_counts_as_one_edit() {
        let a: Vec<char> = "amplitdue".chars().collect();
        let b: Vec<char> = "amplitude".chars().collect();
        assert_eq!(edit_distance(&a, &b), 1);
        // Textbook Levenshtein example: kitten -> sitting needs 3 edits.
        let k: Vec<char> = "kitten".chars().collect();
        let s: Vec<char> = "sitting".chars().collect();
        assert_eq!(edit_distance(&k, &s), 3);
    }

    #[test]
    fn suggestions_are_given_only_for_near_misses() {
        let keys = ["name", "acts_on", "amplitude", "distribution"];
        assert_eq!(suggest("amplitdue", &keys), Some("amplitude"));
        assert_eq!(suggest("Name", &keys), Some("name"));
        assert_eq!(suggest("distrib", &keys), None);
        assert_eq!(suggest("colour", &keys), None);
        assert_eq!(suggest("mhz", &["Hz", "kHz", "MHz"]), Some("MHz"));
    }
}
