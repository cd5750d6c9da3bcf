//! The queue of waiting lineages: a binary min-heap by key ((time, deme) as one integer).
//!
//! The exact engines spend most of their steps on one pattern: take the lineage with the
//! smallest key, see that no other lineage waits on the same key (a lone arrival), draw its
//! parent and queue it again, later. std's `BinaryHeap` does that as a pop (a sift down to the
//! bottom and back up) plus a push, comparing whole entries. This heap compares keys only,
//! answers "does another entry share the smallest key?" from the two children of the root
//! (heap order puts the second smallest there), and replaces the root in place: one sift
//! down per step. Entries with equal keys come out in no particular order: the engines take
//! all of them at once and sort them themselves.

/// An entry with a key.
pub(crate) trait Keyed: Copy {
    fn key(&self) -> u64;
}

/// A min-heap of entries by key; reused across replicates (keeps its capacity).
#[derive(Debug)]
pub(crate) struct Queue<E> {
    heap: Vec<E>,
}

impl<E> Default for Queue<E> {
    fn default() -> Self {
        Queue { heap: Vec::new() }
    }
}

impl<E: Keyed> Queue<E> {
    /// Empties the queue.
    pub fn clear(&mut self) {
        self.heap.clear();
    }

    /// Number of queued entries.
    #[inline]
    pub fn len(&self) -> usize {
        self.heap.len()
    }

    /// Whether nothing is queued.
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.heap.is_empty()
    }

    /// An entry of the smallest key.
    #[inline]
    pub fn peek(&self) -> Option<&E> {
        self.heap.first()
    }

    /// Whether an entry other than [`Queue::peek`]'s has its key.
    #[inline]
    pub fn top_key_shared(&self) -> bool {
        let Some(top) = self.heap.first() else { return false };
        let k = top.key();
        self.heap.get(1).is_some_and(|e| e.key() == k) || self.heap.get(2).is_some_and(|e| e.key() == k)
    }

    /// The queued entries, in no particular order.
    pub fn iter(&self) -> impl Iterator<Item = &E> {
        self.heap.iter()
    }

    /// Takes out every entry, in no particular order.
    pub fn drain(&mut self) -> std::vec::Drain<'_, E> {
        self.heap.drain(..)
    }

    /// Queues an entry.
    #[inline]
    pub fn push(&mut self, e: E) {
        self.heap.push(e);
        self.sift_up(self.heap.len() - 1);
    }

    /// Takes out an entry of the smallest key.
    #[inline]
    pub fn pop(&mut self) -> Option<E> {
        let last = self.heap.pop()?;
        if self.heap.is_empty() {
            return Some(last);
        }
        let top = std::mem::replace(&mut self.heap[0], last);
        self.sift_down(0);
        Some(top)
    }

    /// Replaces the entry of the smallest key by `e` (one sift down; panics when empty).
    #[inline]
    pub fn replace_top(&mut self, e: E) {
        self.heap[0] = e;
        self.sift_down(0);
    }

    /// Takes out the top and every other entry with its key, into `group` (cleared first).
    pub fn pop_group(&mut self, group: &mut Vec<E>) {
        group.clear();
        let Some(first) = self.pop() else { return };
        let k = first.key();
        group.push(first);
        while self.heap.first().is_some_and(|e| e.key() == k) {
            group.push(self.pop().expect("not empty"));
        }
    }

    #[inline]
    fn sift_up(&mut self, mut i: usize) {
        let e = self.heap[i];
        let k = e.key();
        while i > 0 {
            let parent = (i - 1) / 2;
            if self.heap[parent].key() <= k {
                break;
            }
            self.heap[i] = self.heap[parent];
            i = parent;
        }
        self.heap[i] = e;
    }

    #[inline]
    fn sift_down(&mut self, mut i: usize) {
        let n = self.heap.len();
        let e = self.heap[i];
        let k = e.key();
        loop {
            let left = 2 * i + 1;
            if left >= n {
                break;
            }
            let right = left + 1;
            let child = if right < n && self.heap[right].key() < self.heap[left].key() { right } else { left };
            if self.heap[child].key() >= k {
                break;
            }
            self.heap[i] = self.heap[child];
            i = child;
        }
        self.heap[i] = e;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};

    impl Keyed for (u64, u32) {
        fn key(&self) -> u64 {
            self.0
        }
    }

    #[test]
    fn keys_come_out_in_order_as_from_std_binary_heap() {
        // Reference: std's BinaryHeap on the same random pushes, pops and replacements.
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(1);
        let mut q: Queue<(u64, u32)> = Queue::default();
        let mut reference = std::collections::BinaryHeap::new();
        for i in 0..5000u32 {
            match rng.random_range(0..3) {
                0 | 1 => {
                    let e = (rng.random_range(0..200u64), i);
                    q.push(e);
                    reference.push(std::cmp::Reverse(e.0));
                }
                _ if !q.is_empty() && rng.random_bool(0.5) => {
                    let e = (rng.random_range(0..200u64), i);
                    reference.pop();
                    reference.push(std::cmp::Reverse(e.0));
                    q.replace_top(e);
                }
                _ => assert_eq!(q.pop().map(|e| e.0), reference.pop().map(|r| r.0)),
            }
            assert_eq!(q.len(), reference.len());
            assert_eq!(q.peek().map(|e| e.0), reference.peek().map(|r| r.0));
            // The top's key is shared exactly when the std heap holds it twice or more.
            let shared = reference.peek().is_some_and(|t| reference.iter().filter(|r| r.0 == t.0).count() >= 2);
            assert_eq!(q.top_key_shared(), shared);
        }
    }

    #[test]
    fn a_group_holds_every_entry_of_the_smallest_key() {
        let mut q: Queue<(u64, u32)> = Queue::default();
        for e in [(7, 0), (5, 1), (7, 2), (5, 3), (9, 4), (5, 5)] {
            q.push(e);
        }
        let mut group = Vec::new();
        q.pop_group(&mut group);
        group.sort();
        assert_eq!(group, vec![(5, 1), (5, 3), (5, 5)]);
        q.pop_group(&mut group);
        assert_eq!(group.len(), 2);
        q.pop_group(&mut group);
        assert_eq!(group, vec![(9, 4)]);
        q.pop_group(&mut group);
        assert!(group.is_empty() && q.is_empty());
    }
}
