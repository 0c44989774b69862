//! The monitor's channels by id: a vector kept in id order. A chamber has a
//! handful of channels, and the monitor looks one up several times a
//! reading; a scan that compares lengths before bytes finds it without the
//! string ordering a tree needs, and a clone (a replay keyframe) is the
//! size of its channels, not of a tree node.

pub use crate::sample::same_id;

/// Values by string id, in id order (as a `BTreeMap<String, V>` iterates).
#[derive(Debug, Clone)]
pub struct TrackMap<V> {
    entries: Vec<(String, V)>,
}

impl<V> Default for TrackMap<V> {
    fn default() -> Self {
        TrackMap {
            entries: Vec::new(),
        }
    }
}

impl<V> TrackMap<V> {
    /// Where `id` is.
    #[inline]
    fn position(&self, id: &str) -> Option<usize> {
        self.entries.iter().position(|(k, _)| same_id(k, id))
    }

    /// The value at `i` (from [`TrackMap::get_or_insert_with`]'s order).
    #[inline]
    pub fn at_mut(&mut self, i: usize) -> Option<&mut V> {
        self.entries.get_mut(i).map(|(_, v)| v)
    }

    /// The value of `id`.
    #[inline]
    pub fn get(&self, id: &str) -> Option<&V> {
        self.position(id).map(|i| &self.entries[i].1)
    }

    /// The value of `id`, to change.
    #[inline]
    pub fn get_mut(&mut self, id: &str) -> Option<&mut V> {
        self.position(id).map(|i| &mut self.entries[i].1)
    }

    /// Whether `id` has a value.
    #[inline]
    pub fn contains_key(&self, id: &str) -> bool {
        self.position(id).is_some()
    }

    /// Where the value of `id` is ([`TrackMap::at_mut`]), made by `make`
    /// when there is none; the flag says whether it was made.
    pub fn get_or_insert_with(&mut self, id: &str, make: impl FnOnce() -> V) -> (usize, bool) {
        match self.position(id) {
            Some(i) => (i, false),
            None => {
                let at = self.entries.partition_point(|(k, _)| k.as_str() < id);
                self.entries.insert(at, (id.to_string(), make()));
                (at, true)
            }
        }
    }

    /// Removes `id`'s value.
    pub fn remove(&mut self, id: &str) -> Option<V> {
        self.position(id).map(|i| self.entries.remove(i).1)
    }

    /// Every id and value, in id order.
    pub fn iter(&self) -> impl Iterator<Item = (&String, &V)> {
        self.entries.iter().map(|(k, v)| (k, v))
    }

    /// Every id and value, in id order, to change.
    pub fn iter_mut(&mut self) -> impl Iterator<Item = (&String, &mut V)> {
        self.entries.iter_mut().map(|(k, v)| (&*k, v))
    }

    /// Every value, in id order.
    pub fn values(&self) -> impl Iterator<Item = &V> {
        self.entries.iter().map(|(_, v)| v)
    }
}

#[cfg(test)]
mod tests {
    use super::TrackMap;
    use proptest::prelude::*;
    use std::collections::BTreeMap;

    proptest! {
        /// Ids compare as strings do, at every length and difference.
        #[test]
        fn ids_compare_as_strings(a in "[ab]{0,20}", b in "[ab]{0,20}", c in "\\PC{0,20}") {
            prop_assert_eq!(super::same_id(&a, &b), a == b);
            prop_assert_eq!(super::same_id(&a, &c), a == c);
            prop_assert!(super::same_id(&c, &c.clone()));
        }

        /// Any sequence of inserts and removals leaves the same contents,
        /// in the same order, as a `BTreeMap`.
        #[test]
        fn behaves_as_an_ordered_map(ops in prop::collection::vec((any::<bool>(), "[a-d]{0,3}"), 0..60)) {
            let mut map = TrackMap::default();
            let mut reference = BTreeMap::new();
            for (n, (insert, id)) in ops.into_iter().enumerate() {
                if insert {
                    let (at, made) = map.get_or_insert_with(&id, || n);
                    prop_assert_eq!(made, !reference.contains_key(&id));
                    *map.at_mut(at).expect("where it is") += 1000;
                    *reference.entry(id.clone()).or_insert(n) += 1000;
                } else {
                    prop_assert_eq!(map.remove(&id), reference.remove(&id));
                }
                prop_assert_eq!(map.get(&id), reference.get(&id));
                prop_assert_eq!(map.contains_key(&id), reference.contains_key(&id));
                let ours: Vec<_> = map.iter().collect();
                let theirs: Vec<_> = reference.iter().collect();
                prop_assert_eq!(ours, theirs);
            }
        }
    }
}
