//! Local trees from the edge and root records of the ARG engine.
//!
//! The engine records every edge of every local tree as a piece over the sites where it holds.
//! A sweep along the sequence keeps the edges holding at each position and cuts a new tree
//! where the set changes. Two neighbouring trees are joined when they are the same dated,
//! labelled tree with the same jumps on every edge, even if made of different ancestral
//! individuals: a tree node is identified by (smallest sample below it, time), which is
//! unique (two nodes above one sample are on one root path, hence at different times).

use super::{EdgeRec, RootRec};
use crate::genealogy::{Genealogy, Node};

/// The genealogy of the sites [left, right) of the sequence.
#[derive(Debug, Clone)]
pub struct LocalTree {
    left: u64,
    right: u64,
    genealogy: Genealogy,
}

impl LocalTree {
    /// The tree of the sites [left, right) (other engines build their local trees with it).
    pub(crate) fn new(left: u64, right: u64, genealogy: Genealogy) -> Self {
        LocalTree { left, right, genealogy }
    }

    /// First site of the interval.
    pub fn left(&self) -> u64 {
        self.left
    }

    /// One past the last site of the interval.
    pub fn right(&self) -> u64 {
        self.right
    }

    /// Number of sites the tree holds for, `right - left` (>= 1).
    pub fn sites(&self) -> u64 {
        self.right - self.left
    }

    /// The tree (a forest when some lineage stopped at the horizon or at a founder): samples
    /// are nodes `0..n`, edges carry length in generations and jumps (reproduction events).
    pub fn genealogy(&self) -> &Genealogy {
        &self.genealogy
    }
}

/// One row of a tree's canonical form: (parent key, child key, jumps), or a root's key.
type Row = (u32, u64, u32, u64, u64);

/// Joins records of one child (or root) that continue each other with equal content.
fn join_edges(edges: &mut Vec<EdgeRec>) {
    edges.sort_unstable_by_key(|e| (e.child, e.left));
    edges.dedup_by(|b, a| {
        let same = a.child == b.child && a.parent == b.parent && a.jumps == b.jumps && a.right == b.left;
        if same {
            a.right = b.right;
        }
        same
    });
}

fn join_roots(roots: &mut Vec<RootRec>) {
    roots.sort_unstable_by_key(|r| (r.node, r.left));
    roots.dedup_by(|b, a| {
        let same = a.node == b.node && a.right == b.left;
        if same {
            a.right = b.right;
        }
        same
    });
}

/// Scratch space for the sweep, indexed by global node.
struct Sweep<'a> {
    nodes: &'a [Node],
    n: usize,
    parent: Vec<u32>,
    min_leaf: Vec<u32>,
    local: Vec<u32>,
}

const NONE: u32 = u32::MAX;

impl Sweep<'_> {
    fn canonical(&mut self, edges: &[EdgeRec], roots: &[RootRec], out: &mut Vec<Row>) {
        for e in edges {
            self.parent[e.child as usize] = e.parent;
        }
        for i in 0..self.n {
            let mut v = i as u32;
            while self.min_leaf[v as usize] == NONE {
                self.min_leaf[v as usize] = i as u32;
                v = self.parent[v as usize];
                if v == NONE {
                    break;
                }
            }
        }
        out.clear();
        let key = |s: &Self, v: u32| (s.min_leaf[v as usize], s.nodes[v as usize].time);
        for e in edges {
            let (pm, pt) = key(self, e.parent);
            let (cm, ct) = key(self, e.child);
            out.push((pm, pt, cm, ct, e.jumps));
        }
        for r in roots {
            let (m, t) = key(self, r.node);
            out.push((NONE, 0, m, t, 0));
        }
        out.sort_unstable();
        for e in edges {
            self.parent[e.child as usize] = NONE;
            self.min_leaf[e.child as usize] = NONE;
            self.min_leaf[e.parent as usize] = NONE;
        }
        for r in roots {
            self.min_leaf[r.node as usize] = NONE;
        }
    }

    fn genealogy(&mut self, edges: &[EdgeRec], roots: &[RootRec]) -> Genealogy {
        let mut g = Genealogy::with_samples(self.n);
        for v in &self.nodes[..self.n] {
            g.add_node(*v);
        }
        let mut inner: Vec<u32> = edges
            .iter()
            .map(|e| e.parent)
            .chain(roots.iter().map(|r| r.node))
            .filter(|&v| v as usize >= self.n)
            .collect();
        inner.sort_unstable();
        inner.dedup();
        for &v in &inner {
            self.local[v as usize] = g.add_node(self.nodes[v as usize]);
        }
        let local = |s: &Self, v: u32| if (v as usize) < s.n { v } else { s.local[v as usize] };
        let mut sorted: Vec<&EdgeRec> = edges.iter().collect();
        sorted.sort_unstable_by_key(|e| (e.parent, e.child));
        for e in sorted {
            g.add_edge(local(self, e.parent), local(self, e.child), e.jumps);
        }
        for r in roots {
            g.add_root(local(self, r.node));
        }
        g.sort_roots();
        g
    }
}

/// Cuts the records into local trees tiling [0, sites).
pub(crate) fn build(
    n: usize,
    sites: u64,
    nodes: &[Node],
    edges: &mut Vec<EdgeRec>,
    roots: &mut Vec<RootRec>,
) -> Vec<LocalTree> {
    join_edges(edges);
    join_roots(roots);
    let mut cuts: Vec<u64> = Vec::with_capacity(2 * (edges.len() + roots.len()) + 2);
    cuts.extend([0, sites]);
    cuts.extend(edges.iter().flat_map(|e| [e.left, e.right]));
    cuts.extend(roots.iter().flat_map(|r| [r.left, r.right]));
    cuts.sort_unstable();
    cuts.dedup();
    let mut by_left: Vec<u32> = (0..edges.len() as u32).collect();
    by_left.sort_unstable_by_key(|&i| edges[i as usize].left);
    let mut roots_by_left: Vec<u32> = (0..roots.len() as u32).collect();
    roots_by_left.sort_unstable_by_key(|&i| roots[i as usize].left);
    let mut sweep = Sweep {
        nodes,
        n,
        parent: vec![NONE; nodes.len()],
        min_leaf: vec![NONE; nodes.len()],
        local: vec![NONE; nodes.len()],
    };
    let mut active: Vec<EdgeRec> = Vec::new();
    let mut active_roots: Vec<RootRec> = Vec::new();
    let (mut ie, mut ir) = (0, 0);
    let mut trees: Vec<LocalTree> = Vec::new();
    let (mut canon, mut prev) = (Vec::new(), Vec::new());
    for w in cuts.windows(2) {
        let (x, y) = (w[0], w[1]);
        active.retain(|e| e.right > x);
        active_roots.retain(|r| r.right > x);
        while ie < by_left.len() && edges[by_left[ie] as usize].left == x {
            active.push(edges[by_left[ie] as usize]);
            ie += 1;
        }
        while ir < roots_by_left.len() && roots[roots_by_left[ir] as usize].left == x {
            active_roots.push(roots[roots_by_left[ir] as usize]);
            ir += 1;
        }
        sweep.canonical(&active, &active_roots, &mut canon);
        match trees.last_mut() {
            Some(t) if canon == prev => t.right = y,
            _ => {
                let genealogy = sweep.genealogy(&active, &active_roots);
                trees.push(LocalTree { left: x, right: y, genealogy });
                std::mem::swap(&mut canon, &mut prev);
            }
        }
    }
    trees
}
