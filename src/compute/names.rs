//! The nearest valid name to a misspelt one, for "did you mean" hints in messages.
//!
//! Distance is the optimal string alignment distance (insertions, deletions, substitutions and
//! swaps of two neighbouring characters each count 1; `strsim::osa_distance`), ignoring ASCII
//! case.

/// Most edits allowed between a word and the name suggested for it: a third of the word's
/// length, at least 1 and at most 3 ("rnage_ratio" → "range_ratio" is 1 edit; "name" is 2 edits
/// from "zone", more than the 1 allowed for a 4-letter word).
pub fn max_edits(word: &str) -> usize {
    (word.chars().count() / 3).clamp(1, 3)
}

/// The one candidate nearest to `word`, when it is within [`max_edits`] and no other candidate
/// is as near (two equally near names are no hint).
pub fn nearest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let w = word.to_ascii_lowercase();
    let limit = max_edits(word);
    let mut best: Option<(usize, &'a str)> = None;
    let mut tie = false;
    for c in candidates {
        let d = strsim::osa_distance(&w, &c.to_ascii_lowercase());
        if d > limit {
            continue;
        }
        match best {
            Some((bd, bc)) if d == bd && !bc.eq_ignore_ascii_case(c) => tie = true,
            Some((bd, _)) if d >= bd => {}
            _ => {
                best = Some((d, c));
                tie = false;
            }
        }
    }
    best.filter(|_| !tie).map(|(_, c)| c)
}

/// `": did you mean 'x'?"`, or nothing without a suggestion (for error messages that carry one).
pub fn did_you_mean(suggestion: Option<&str>) -> String {
    suggestion
        .map(|n| format!(": did you mean '{n}'?"))
        .unwrap_or_default()
}

/// `": did you mean 'x'?"` for the nearest candidate, or `" (expected one of: a, b, c)"`.
pub fn hint<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str> + Clone) -> String {
    match nearest(word, candidates.clone()) {
        Some(n) => format!(": did you mean '{n}'?"),
        None => {
            let all: Vec<&str> = candidates.into_iter().collect();
            if all.is_empty() {
                String::new()
            } else {
                format!(" (expected one of: {})", all.join(", "))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_swap_or_a_slip_finds_the_name() {
        let keys = ["range_ratio", "time_corrector_min", "u_range_ratio", "zone"];
        // One swap of neighbours ("rn" for "nr") is one edit.
        assert_eq!(nearest("rnage_ratio", keys), Some("range_ratio"));
        // Case is ignored.
        assert_eq!(nearest("Zone", keys), Some("zone"));
        assert_eq!(
            nearest("time_correction_min", keys),
            Some("time_corrector_min")
        );
        // "name" is two substitutions from "zone": more than the one edit a 4-letter word gets.
        assert_eq!(nearest("name", keys), None);
        assert_eq!(nearest("depth", keys), None);
    }

    #[test]
    fn two_equally_near_names_are_no_hint() {
        assert_eq!(
            nearest("1c", ["exclusive", "special", "1a", "1b", "2"]),
            None
        );
        assert_eq!(
            nearest("specal", ["exclusive", "special", "1a", "1b", "2"]),
            Some("special")
        );
        assert_eq!(nearest("g9", ["g1"]), Some("g1"));
        assert_eq!(nearest("g9", ["g1", "g2"]), None);
    }

    #[test]
    fn the_hint_suggests_or_lists() {
        assert_eq!(
            hint("mxa_gap_min", ["max_gap_min", "id"]),
            ": did you mean 'max_gap_min'?"
        );
        assert_eq!(
            hint("yards", ["m", "ft", "us_ft"]),
            " (expected one of: m, ft, us_ft)"
        );
    }
}
