//! A small cache of decoded blocks and target groups, bounded in bytes.
//!
//! Direct-mapped: item `i` may only sit in slot `i % slots`, and a newcomer replaces the slot's
//! occupant unless the occupant is over eight times its size (big items, such as the hundreds
//! of options of a frequent word, cost the most to decode again). An item is admitted only while the bytes held stay within the budget, so the
//! cache never holds more than `budget` bytes of items (plus its slot array).

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};

/// Slot of one item: its number, the item and the bytes charged for it.
type Slot<T> = Mutex<Option<(usize, Arc<T>, usize)>>;

pub(super) struct Cache<T> {
    slots: Box<[Slot<T>]>,
    held: AtomicUsize,
    budget: usize,
}

impl<T> Cache<T> {
    /// A cache of at most `budget` bytes for `items` items in at most `max_slots` slots (none
    /// when either is zero).
    pub(super) fn new(budget: usize, items: usize, max_slots: usize) -> Cache<T> {
        let slots = if budget == 0 { 0 } else { items.min(max_slots) };
        Cache {
            slots: (0..slots).map(|_| Mutex::new(None)).collect(),
            held: AtomicUsize::new(0),
            budget,
        }
    }

    #[inline]
    pub(super) fn get(&self, item: usize) -> Option<Arc<T>> {
        if self.slots.is_empty() {
            return None;
        }
        let slot = self.slots[item % self.slots.len()].lock().ok()?;
        match slot.as_ref() {
            Some((i, value, _)) if *i == item => Some(value.clone()),
            _ => None,
        }
    }

    /// Whether an item of `bytes` could be admitted now (to skip preparing one that cannot).
    pub(super) fn admits(&self, bytes: usize) -> bool {
        !self.slots.is_empty() && self.held.load(Ordering::Relaxed) + bytes <= self.budget
    }

    pub(super) fn insert(&self, item: usize, value: Arc<T>, bytes: usize) {
        if self.slots.is_empty() {
            return;
        }
        let Ok(mut slot) = self.slots[item % self.slots.len()].lock() else {
            return;
        };
        let freed = slot.as_ref().map_or(0, |(_, _, b)| *b);
        if bytes < freed / 8 {
            // Keep the bigger occupant: it took far more decoding than the newcomer.
            return;
        }
        let held = self.held.load(Ordering::Relaxed);
        if held - freed.min(held) + bytes > self.budget {
            return;
        }
        self.held.fetch_add(bytes, Ordering::Relaxed);
        self.held.fetch_sub(freed, Ordering::Relaxed);
        *slot = Some((item, value, bytes));
    }
}
