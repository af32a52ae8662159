//! "Did you mean …?": the nearest known name to a misspelt one.
//!
//! In: a word and the names that would have been accepted. Out: the closest name when it is
//! close enough to be a plausible typo. No I/O.

/// The known name nearest to `word`, when it is near enough to be a typo of it.
pub fn nearest<'a>(word: &str, known: &[&'a str]) -> Option<&'a str> {
    let lower = word.to_lowercase();
    let mut best: Option<(f64, &'a str)> = None;
    for &candidate in known {
        let score = strsim::jaro_winkler(&lower, &candidate.to_lowercase());
        let distance = strsim::levenshtein(&lower, &candidate.to_lowercase());
        let plausible = score >= 0.82 || distance <= 2.max(candidate.len() / 4);
        if plausible && best.is_none_or(|(s, _)| score > s) {
            best = Some((score, candidate));
        }
    }
    best.map(|(_, name)| name)
}

#[cfg(test)]
mod tests {
    use super::nearest;

    #[test]
    fn suggests_close_spellings_only() {
        let keys = ["tolerance", "distribution", "value", "between", "kind"];
        assert_eq!(nearest("tolerence", &keys), Some("tolerance"));
        assert_eq!(nearest("tollerance", &keys), Some("tolerance"));
        assert_eq!(nearest("valeu", &keys), Some("value"));
        assert_eq!(nearest("Kind", &keys), Some("kind"));
        assert_eq!(nearest("frequency", &keys), None);
        assert_eq!(nearest("resistr", &["resistor", "capacitor", "inductor"]), Some("resistor"));
    }
}
