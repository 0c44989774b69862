//! "Did you mean …?" for misspelt units, gases, keys and options.

/// The candidate closest to `input`, when one is close enough to be a likely
/// typo (case-insensitive Damerau–Levenshtein distance of at most a third of
/// the word, and at least 1).
pub fn nearest<'a, I>(input: &str, candidates: I) -> Option<&'a str>
where
    I: IntoIterator<Item = &'a str>,
{
    let lower = input.to_lowercase();
    let limit = (input.chars().count() / 3).max(1);
    candidates
        .into_iter()
        .map(|c| (strsim::damerau_levenshtein(&lower, &c.to_lowercase()), c))
        .filter(|&(d, _)| d <= limit)
        .min_by_key(|&(d, _)| d)
        .map(|(_, c)| c)
}

#[cfg(test)]
mod tests {
    use super::nearest;

    #[test]
    fn finds_close_words_only() {
        let units = ["Pa", "kPa", "mbar", "bar", "Torr"];
        assert_eq!(nearest("mbr", units), Some("mbar"));
        assert_eq!(nearest("tor", units), Some("Torr"));
        assert_eq!(nearest("furlong", units), None);
        assert_eq!(nearest("volum", ["name", "volume"]), Some("volume"));
    }
}
