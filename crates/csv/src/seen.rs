//! The set of event ids a reader has seen, stored as runs of consecutive
//! ids.
//!
//! The reader must reject an id that reappears later in a file, so it
//! remembers every id. Dumps usually number their events in order (often
//! consecutively), so runs of consecutive ids make that memory constant for
//! them instead of growing with the file; arbitrary ids cost one run each
//! (~40 bytes), like any set.

use std::collections::BTreeMap;

/// Seen ids as disjoint, non-adjacent runs `start ..= end`.
///
/// Invariant: runs never overlap or touch (`end + 1 < next start`), so an id
/// belongs to at most one run, found from the last run starting at or
/// before it.
#[derive(Debug, Default)]
pub struct SeenIds {
    runs: BTreeMap<u64, u64>,
    /// The run the last id went into, `(start, end)`, and where the next run
    /// starts (`u64::MAX` if none): ids that continue it need no lookup.
    hot: Option<(u64, u64, u64)>,
}

impl SeenIds {
    /// Adds `id`; `false` if it was already there.
    pub fn insert(&mut self, id: u64) -> bool {
        if let Some((start, end, next)) = self.hot {
            if id > end && id < next {
                if id == end + 1 {
                    if id + 1 == next {
                        // Closes the gap to the next run: merge below.
                    } else {
                        self.runs.insert(start, id);
                        self.hot = Some((start, id, next));
                        return true;
                    }
                }
            } else if id >= start && id <= end {
                return false;
            }
        }
        self.insert_slow(id)
    }

    fn insert_slow(&mut self, id: u64) -> bool {
        let before = self.runs.range(..=id).next_back().map(|(&s, &e)| (s, e));
        if let Some((_, e)) = before {
            if id <= e {
                return false;
            }
        }
        let after = id
            .checked_add(1)
            .and_then(|n| self.runs.range(n..).next().map(|(&s, &e)| (s, e)));
        let joins_before = before.filter(|&(_, e)| e.checked_add(1) == Some(id));
        let joins_after = after.filter(|&(s, _)| id.checked_add(1) == Some(s));
        let (start, end) = match (joins_before, joins_after) {
            (Some((s, _)), Some((s2, e2))) => {
                self.runs.remove(&s2);
                (s, e2)
            }
            (Some((s, _)), None) => (s, id),
            (None, Some((s2, e2))) => {
                self.runs.remove(&s2);
                (id, e2)
            }
            (None, None) => (id, id),
        };
        self.runs.insert(start, end);
        let next = end
            .checked_add(1)
            .and_then(|n| self.runs.range(n..).next().map(|(&s, _)| s))
            .unwrap_or(u64::MAX);
        self.hot = Some((start, end, next));
        true
    }

    /// Number of runs held (the memory used is proportional to it).
    #[cfg(test)]
    pub(crate) fn runs(&self) -> usize {
        self.runs.len()
    }
}

#[cfg(test)]
mod tests {
    use super::SeenIds;
    use proptest::prelude::*;
    use std::collections::HashSet;

    #[test]
    fn consecutive_ids_take_one_run() {
        let mut s = SeenIds::default();
        for id in 0..100_000 {
            assert!(s.insert(id));
        }
        assert_eq!(s.runs(), 1);
        assert!(!s.insert(0) && !s.insert(99_999) && !s.insert(50_000));
        assert!(s.insert(100_000));
    }

    #[test]
    fn gaps_and_merges() {
        let mut s = SeenIds::default();
        for id in [10, 12, 11, 20, 19, 21, 18, u64::MAX, 0, u64::MAX - 1] {
            assert!(s.insert(id), "{id}");
        }
        // 0, 10..=12, 18..=21, MAX-1..=MAX
        assert_eq!(s.runs(), 4);
        for id in [10, 11, 12, 18, 21, u64::MAX, 0] {
            assert!(!s.insert(id), "{id}");
        }
    }

    proptest! {
        /// Same answers as a plain hash set, whatever the order and spacing.
        #[test]
        fn agrees_with_a_hash_set(ids in prop::collection::vec(
            prop_oneof![0u64..64, any::<u64>(), (u64::MAX - 8)..=u64::MAX], 0..300)
        ) {
            let mut ours = SeenIds::default();
            let mut reference = HashSet::new();
            for id in ids {
                prop_assert_eq!(ours.insert(id), reference.insert(id), "id {}", id);
            }
        }
    }
}
