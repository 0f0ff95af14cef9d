//! "Did you mean": the known names closest to one a client asked for, shared by unknown
//! methods, unknown analyses and the like, so that every suggestion follows one rule.

/// Edit distance between two names (Levenshtein: insertions, deletions, substitutions),
/// compared without case.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.to_lowercase().chars().collect();
    let b: Vec<char> = b.to_lowercase().chars().collect();
    let mut previous: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.iter().enumerate() {
        let mut current = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            let substitution = previous[j] + usize::from(ca != cb);
            current[j + 1] = substitution.min(previous[j + 1] + 1).min(current[j] + 1);
        }
        previous = current;
    }
    previous[b.len()]
}

/// The known names closest to `asked`: those within a third of its length in edit distance
/// (at least 2), or that contain its part after the last dot (three letters or more);
/// nearest first, at most three.
pub fn closest_names<'a>(asked: &str, known: impl IntoIterator<Item = &'a str>) -> Vec<&'a str> {
    let tail = asked.rsplit('.').next().unwrap_or(asked).to_lowercase();
    let limit = (asked.chars().count() / 3).max(2);
    let mut scored: Vec<(usize, &str)> = known
        .into_iter()
        .map(|candidate| (edit_distance(asked, candidate), candidate))
        .filter(|&(distance, candidate)| {
            distance <= limit || (tail.chars().count() >= 3 && candidate.to_lowercase().contains(&tail))
        })
        .collect();
    scored.sort();
    scored.dedup();
    scored.into_iter().take(3).map(|(_, candidate)| candidate).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_closest_names_are_near_in_spelling_or_share_the_last_part() {
        // The textbook example of the Levenshtein distance (common practice).
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        let known = [
            "hall.reduce",
            "carriers.freeze_out_fit",
            "carriers.arrhenius",
            "mr.oscillations",
        ];
        // (asked, expected suggestions)
        let cases: &[(&str, &[&str])] = &[
            ("hall.reduc", &["hall.reduce"]),
            ("Hall.Reduce", &["hall.reduce"]),
            ("carriers.arrhenus", &["carriers.arrhenius"]),
            ("oscillations", &["mr.oscillations"]),
            ("freeze_out", &["carriers.freeze_out_fit"]),
            ("spectrum.mobility", &[]),
        ];
        for (asked, expected) in cases {
            assert_eq!(&closest_names(asked, known), expected, "{asked}");
        }
    }
}
