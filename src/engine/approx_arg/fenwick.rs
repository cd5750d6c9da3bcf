//! A Fenwick (binary indexed) tree of integer weights (Fenwick 1994, *Softw. Pract. Exper.*
//! 24:327): O(log n) update and search of the slot holding a given point of the total mass.
//! Integer weights keep every sum exact however many updates a replicate makes.

/// Weights of slots `0..capacity`, all 0 at the start.
#[derive(Debug, Clone, Default)]
pub(crate) struct Fenwick {
    /// 1-based partial sums; `tree.len() - 1` is a power of two (or the tree is empty).
    tree: Vec<u64>,
    weights: Vec<u64>,
    total: u64,
}

impl Fenwick {
    /// Sets every weight to 0, keeping the capacity.
    pub(crate) fn clear(&mut self) {
        self.tree.fill(0);
        self.weights.fill(0);
        self.total = 0;
    }

    /// Makes room for slots `0..n` (capacity doubles; the tree is rebuilt from the weights).
    pub(crate) fn reserve(&mut self, n: usize) {
        if n <= self.weights.len() {
            return;
        }
        let cap = n.next_power_of_two().max(64);
        self.weights.resize(cap, 0);
        self.tree = vec![0; cap + 1];
        for i in 0..cap {
            let w = self.weights[i];
            if w > 0 {
                self.add(i, w as i128);
            }
        }
    }

    fn add(&mut self, i: usize, delta: i128) {
        let mut k = i + 1;
        while k < self.tree.len() {
            self.tree[k] = (self.tree[k] as i128 + delta) as u64;
            k += k & k.wrapping_neg();
        }
    }

    /// Sets the weight of slot `i` (which must be below the reserved capacity).
    pub(crate) fn set(&mut self, i: usize, w: u64) {
        let old = self.weights[i];
        if old != w {
            self.weights[i] = w;
            self.total = self.total - old + w;
            self.add(i, w as i128 - old as i128);
        }
    }

    /// The weight of slot `i`.
    pub(crate) fn get(&self, i: usize) -> u64 {
        self.weights[i]
    }

    /// Sum of all weights.
    pub(crate) fn total(&self) -> u64 {
        self.total
    }

    /// The slot i with prefix(i) <= u < prefix(i + 1), for u < total: each slot is found with
    /// probability weight / total when u is uniform.
    pub(crate) fn find(&self, mut u: u64) -> usize {
        debug_assert!(u < self.total);
        let cap = self.tree.len() - 1;
        let mut pos = 0;
        let mut step = cap;
        while step > 0 {
            let next = pos + step;
            if next <= cap && self.tree[next] <= u {
                u -= self.tree[next];
                pos = next;
            }
            step >>= 1;
        }
        pos
    }
}

#[cfg(test)]
mod tests {
    use super::Fenwick;

    #[test]
    fn search_matches_a_linear_scan() {
        let mut f = Fenwick::default();
        f.reserve(5);
        let w = [3u64, 0, 7, 1, 0, 0, 2];
        f.reserve(w.len());
        for (i, &x) in w.iter().enumerate() {
            f.set(i, x);
        }
        assert_eq!(f.total(), 13);
        let mut expected = Vec::new();
        for (i, &x) in w.iter().enumerate() {
            expected.extend(std::iter::repeat_n(i, x as usize));
        }
        for (u, &e) in expected.iter().enumerate() {
            assert_eq!(f.find(u as u64), e, "u = {u}");
        }
        // Growing keeps the weights; updates move the mass.
        f.reserve(200);
        f.set(2, 1);
        f.set(150, 4);
        assert_eq!((f.total(), f.get(150)), (11, 4));
        assert_eq!(f.find(3), 2);
        assert_eq!(f.find(4), 3);
        assert_eq!(f.find(7), 150);
        assert_eq!(f.find(10), 150);
        f.clear();
        assert_eq!(f.total(), 0);
    }
}
