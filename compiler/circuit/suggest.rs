//! "Did you mean" suggestions by Levenshtein edit distance
//! (Levenshtein, Soviet Physics Doklady 10, 707, 1966), case-insensitive.

/// Edit distance between two strings, counted in characters.
pub fn distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().flat_map(char::to_lowercase).collect();
    let b: Vec<char> = b.chars().flat_map(char::to_lowercase).collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.iter().enumerate() {
        cur[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let sub = prev[j] + usize::from(ca != cb);
            cur[j + 1] = sub.min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// The closest candidate within a distance that still looks like a typo:
/// one edit for words of up to three letters, two for longer ones. Ties go
/// to the first.
pub fn nearest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let limit = if word.chars().count() <= 3 { 1 } else { 2 };
    within(word, candidates, limit)
}

/// As [`nearest`], for the user's own short names (`a`, `q0`): any
/// one-letter name is one edit from any other, so for names of one or two
/// letters only a difference of case counts as a likely typo.
pub fn nearest_name<'a>(
    word: &str,
    candidates: impl IntoIterator<Item = &'a str>,
) -> Option<&'a str> {
    let limit = match word.chars().count() {
        0..=2 => 0,
        3 => 1,
        _ => 2,
    };
    within(word, candidates, limit)
}

fn within<'a>(
    word: &str,
    candidates: impl IntoIterator<Item = &'a str>,
    limit: usize,
) -> Option<&'a str> {
    candidates
        .into_iter()
        .filter(|c| *c != word)
        .map(|c| (distance(word, c), c))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn textbook_distances() {
        // kitten -> sitting needs three edits (the standard worked example).
        assert_eq!(distance("kitten", "sitting"), 3);
        assert_eq!(distance("", "abc"), 3);
        assert_eq!(nearest("CNTO", ["CZ", "CNOT", "SWAP"]), Some("CNOT"));
        assert_eq!(nearest("h", ["H", "X"]), Some("H"));
        assert_eq!(nearest("banana", ["CZ", "CNOT"]), None);
        assert_eq!(nearest("HH", ["H", "CZ"]), Some("H"));
        assert_eq!(nearest_name("c", ["a", "b"]), None);
        assert_eq!(nearest_name("qbit", ["qubit", "a"]), Some("qubit"));
    }
}
