//! A small cache of decoded blocks, target groups and options, bounded in bytes.
//!
//! Four-way set-associative: item `i` may sit in any of the four slots of set `i % sets`. A
//! newcomer takes a free slot of its set, else the slot of an occupant not used since the clock
//! hand last passed, else the smallest occupant unless that one is over eight times the
//! newcomer's size (big items, such as the hundreds of options of a frequent word, cost the most
//! to decode again). When a newcomer would take the bytes held past the budget, a clock hand
//! sweeps the slots and lets occupants go until it fits, sparing once those used since it last
//! passed (at most two sweeps). So the cache never holds more than `budget` bytes of items (plus
//! its slot array) and keeps taking new items once full.

use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex, OnceLock};

/// Slots per set.
const WAYS: usize = 4;

/// An occupant: its item number, the item, the bytes charged for it and whether it was used
/// since the clock hand last passed.
type Entry<T> = (usize, Arc<T>, usize, bool);

/// One set of slots.
type Set<T> = Mutex<[Option<Entry<T>>; WAYS]>;

pub(super) struct Cache<T> {
    sets: Box<[Set<T>]>,
    held: AtomicUsize,
    hand: AtomicUsize,
    budget: usize,
}

impl<T> Cache<T> {
    /// A cache of at most `budget` bytes for `items` items in at most `max_slots` slots (none
    /// when either is zero).
    pub(super) fn new(budget: usize, items: usize, max_slots: usize) -> Cache<T> {
        let slots = if budget == 0 { 0 } else { items.min(max_slots) };
        Cache {
            sets: (0..slots.div_ceil(WAYS))
                .map(|_| Mutex::new([None, None, None, None]))
                .collect(),
            held: AtomicUsize::new(0),
            hand: AtomicUsize::new(0),
            budget,
        }
    }

    #[inline]
    pub(super) fn get(&self, item: usize) -> Option<Arc<T>> {
        if self.sets.is_empty() {
            return None;
        }
        let mut set = self.sets[item % self.sets.len()].lock().ok()?;
        set.iter_mut().flatten().find(|e| e.0 == item).map(|e| {
            e.3 = true;
            e.1.clone()
        })
    }

    /// Whether an item of `bytes` could be admitted (to skip preparing one that cannot).
    pub(super) fn admits(&self, bytes: usize) -> bool {
        !self.sets.is_empty() && bytes <= self.budget / 4
    }

    /// Lets occupants of sets other than `keep` go, in clock order, until `bytes` more fit.
    fn make_room(&self, bytes: usize, keep: usize) {
        let n = self.sets.len();
        for _ in 0..2 * n {
            if self.held.load(Ordering::Relaxed) + bytes <= self.budget {
                return;
            }
            let at = self.hand.fetch_add(1, Ordering::Relaxed) % n;
            if at == keep {
                continue;
            }
            if let Ok(mut set) = self.sets[at].try_lock() {
                for way in set.iter_mut() {
                    match way {
                        Some(e) if e.3 => e.3 = false,
                        Some(e) => {
                            self.held.fetch_sub(e.2, Ordering::Relaxed);
                            *way = None;
                        }
                        None => {}
                    }
                }
            }
        }
    }

    pub(super) fn insert(&self, item: usize, value: Arc<T>, bytes: usize) {
        if self.sets.is_empty() || bytes > self.budget / 4 {
            return;
        }
        let at = item % self.sets.len();
        self.make_room(bytes, at);
        let Ok(mut set) = self.sets[at].lock() else {
            return;
        };
        // The item itself (a fuller decoding of it), a free slot, an unused occupant, or the
        // smallest occupant.
        let way = set
            .iter()
            .position(|w| w.as_ref().is_some_and(|e| e.0 == item))
            .or_else(|| set.iter().position(Option::is_none))
            .or_else(|| set.iter().position(|w| w.as_ref().is_some_and(|e| !e.3)))
            .unwrap_or_else(|| {
                (0..WAYS)
                    .min_by_key(|&w| set[w].as_ref().map_or(0, |e| e.2))
                    .expect("a set has slots")
            });
        let freed = set[way].as_ref().map_or(0, |e| e.2);
        if set[way].as_ref().is_some_and(|e| e.0 != item) && bytes < freed / 8 {
            // Keep the bigger occupant: it took far more decoding than the newcomer.
            return;
        }
        let held = self.held.load(Ordering::Relaxed);
        if held - freed.min(held) + bytes > self.budget {
            return;
        }
        self.held.fetch_add(bytes, Ordering::Relaxed);
        self.held.fetch_sub(freed, Ordering::Relaxed);
        set[way] = Some((item, value, bytes, false));
    }
}

/// Which items were offered before: two bits per item in a 2^20-bit filter (128 KiB, allocated
/// on first use), so an item is known again from its second offer on (a false "seen" is rare
/// while the filter is sparse). Cleared once half its bits are set, so it keeps telling new
/// items apart.
pub(super) struct Seen {
    enabled: bool,
    bits: OnceLock<Box<[AtomicU64]>>,
    set: AtomicUsize,
}

const SEEN_BITS: u32 = 20;

impl Seen {
    /// A filter (empty and always answering false when not `enabled`).
    pub(super) fn new(enabled: bool) -> Seen {
        Seen {
            enabled,
            bits: OnceLock::new(),
            set: AtomicUsize::new(0),
        }
    }

    /// Whether the item with hash `h` was offered before; remembers it.
    pub(super) fn second_time(&self, h: u64) -> bool {
        if !self.enabled {
            return false;
        }
        let bits = self.bits.get_or_init(|| {
            (0..1 << (SEEN_BITS - 6))
                .map(|_| AtomicU64::new(0))
                .collect()
        });
        let h = h.wrapping_mul(0x9E37_79B9_7F4A_7C15);
        let mask = (1u64 << SEEN_BITS) - 1;
        let mut seen = true;
        for b in [h & mask, (h >> SEEN_BITS) & mask] {
            let bit = 1u64 << (b % 64);
            let old = bits[(b / 64) as usize].fetch_or(bit, Ordering::Relaxed);
            if old & bit == 0 {
                seen = false;
                if self.set.fetch_add(1, Ordering::Relaxed) + 1 >= 1 << (SEEN_BITS - 1) {
                    self.set.store(0, Ordering::Relaxed);
                    for w in bits.iter() {
                        w.store(0, Ordering::Relaxed);
                    }
                }
            }
        }
        seen
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn seen_knows_items_from_their_second_offer() {
        let seen = Seen::new(true);
        let hash = |i: u64| i.wrapping_mul(0x9E37_79B9_7F4A_7C15);
        assert!((0..10_000).all(|i| !seen.second_time(hash(i))));
        assert!((0..10_000).all(|i| seen.second_time(hash(i))));
        // Past half its bits it starts afresh and still tells new items apart.
        let fresh = (10_000..2_000_000)
            .filter(|&i| !seen.second_time(hash(i)))
            .count();
        assert!(fresh > 1_900_000, "{fresh}");
        assert!(!Seen::new(false).second_time(1));
    }

    #[test]
    fn stays_within_its_budget_and_keeps_taking_items() {
        let cache: Cache<u32> = Cache::new(1000, 1 << 20, 64);
        for i in 0..10_000 {
            cache.insert(i, Arc::new(i as u32), 100);
            assert!(cache.held.load(Ordering::Relaxed) <= 1000);
            assert_eq!(cache.get(i).as_deref(), Some(&(i as u32)));
        }
        // An item used since the hand passed survives a stream of newcomers longer than one
        // that was not.
        let cache: Cache<u32> = Cache::new(1000, 1 << 20, 64);
        cache.insert(0, Arc::new(0), 100);
        for i in 1..9 {
            cache.insert(i * 16, Arc::new(1), 100);
            cache.get(0);
        }
        assert!(cache.get(0).is_some());
    }
}
