//! The genealogy of a sample: a forest of trees in a petgraph graph.
//!
//! Nodes are the sampled individuals (leaves, in sample order, node index = sample index)
//! and the ancestors where lineages merge. Edges point from parent to child and carry their
//! length in generations and the number of reproduction events (lineage jumps) along them,
//! so that mutation models can tell dormant time from reproduction. A sampled individual can
//! also be an ancestor of other samples (a sampled ancestor): then it is a leaf with children.

use petgraph::Direction;
use petgraph::graph::{DiGraph, NodeIndex};
use petgraph::visit::EdgeRef;
use std::fmt::Write;

/// A node of the genealogy.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Node {
    /// Generations before the present.
    pub time: u64,
    /// Deme index.
    pub deme: usize,
    /// Sample index, for sampled individuals.
    pub sample: Option<u32>,
}

/// An edge from parent to child.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Edge {
    /// Length in generations (parent time - child time).
    pub length: u64,
    /// Reproduction events (lineage jumps) along the edge; the other `length - jumps`
    /// generations were spent dormant.
    pub jumps: u64,
}

/// The genealogy of one replicate.
#[derive(Debug, Clone, Default)]
pub struct Genealogy {
    graph: DiGraph<Node, Edge>,
    roots: Vec<NodeIndex>,
    steps: u64,
    n_samples: usize,
}

impl Genealogy {
    pub(crate) fn with_samples(n_samples: usize) -> Self {
        Genealogy {
            graph: DiGraph::with_capacity(2 * n_samples, 2 * n_samples),
            roots: Vec::new(),
            steps: 0,
            n_samples,
        }
    }

    /// An empty genealogy with room for exactly `nodes` nodes and `edges` edges.
    pub(crate) fn with_capacity(n_samples: usize, nodes: usize, edges: usize) -> Self {
        Genealogy { graph: DiGraph::with_capacity(nodes, edges), roots: Vec::new(), steps: 0, n_samples }
    }

    /// Adds `n` sampled individuals at `time` in deme `deme`, as nodes (and sample indices)
    /// `0..n`, to an empty genealogy.
    #[inline]
    pub(crate) fn add_leaves(&mut self, time: u64, deme: usize, n: u32) {
        debug_assert_eq!(self.graph.node_count(), 0);
        for i in 0..n {
            self.graph.add_node(Node { time, deme, sample: Some(i) });
        }
    }

    /// Adds a merge node and its edges to `children`, each given as (node, length, jumps), the
    /// lengths already computed by the caller (parent time - child time).
    #[inline]
    pub(crate) fn add_merge(&mut self, node: Node, children: [(u32, u64, u64); 2]) -> u32 {
        let p = self.graph.add_node(node);
        for (c, length, jumps) in children {
            debug_assert_eq!(length, node.time - self.graph[NodeIndex::new(c as usize)].time);
            debug_assert!(jumps >= 1 && jumps <= length, "an edge of {length} generations cannot hold {jumps} jumps");
            self.graph.add_edge(p, NodeIndex::new(c as usize), Edge { length, jumps });
        }
        p.index() as u32
    }

    pub(crate) fn add_node(&mut self, node: Node) -> u32 {
        self.graph.add_node(node).index() as u32
    }

    pub(crate) fn add_edge(&mut self, parent: u32, child: u32, jumps: u64) {
        let (p, c) = (NodeIndex::new(parent as usize), NodeIndex::new(child as usize));
        let length = self.graph[p].time - self.graph[c].time;
        debug_assert!(jumps >= 1 && jumps <= length, "an edge of {length} generations cannot hold {jumps} jumps");
        self.graph.add_edge(p, c, Edge { length, jumps });
    }

    pub(crate) fn add_root(&mut self, node: u32) {
        self.roots.push(NodeIndex::new(node as usize));
    }

    pub(crate) fn set_steps(&mut self, steps: u64) {
        self.steps = steps;
    }

    pub(crate) fn sort_roots(&mut self) {
        self.roots.sort_unstable();
    }

    /// The underlying graph (edges parent -> child).
    pub fn graph(&self) -> &DiGraph<Node, Edge> {
        &self.graph
    }

    /// Number of sampled individuals; their nodes are `0..n_samples`.
    pub fn n_samples(&self) -> usize {
        self.n_samples
    }

    /// The roots: one when the sample has a most recent common ancestor, several for a forest.
    pub fn roots(&self) -> &[NodeIndex] {
        &self.roots
    }

    /// Whether the sample has a single most recent common ancestor.
    pub fn is_tree(&self) -> bool {
        self.roots.len() == 1
    }

    /// Time of the most recent common ancestor, when there is one.
    pub fn tmrca(&self) -> Option<u64> {
        self.is_tree().then(|| self.graph[self.roots[0]].time)
    }

    /// Sum of all branch lengths in generations (up to the roots for a forest).
    pub fn total_length(&self) -> u64 {
        self.graph.edge_weights().map(|e| e.length).sum()
    }

    /// Lineage steps the engine took.
    pub fn steps(&self) -> u64 {
        self.steps
    }

    /// Number of nodes that are not sampled individuals (merge nodes).
    pub fn n_merge_nodes(&self) -> usize {
        self.graph.node_count() - self.n_samples
    }

    /// Children of a node.
    pub fn children(&self, node: NodeIndex) -> impl Iterator<Item = (NodeIndex, &Edge)> {
        self.graph.edges_directed(node, Direction::Outgoing).map(|e| (e.target(), e.weight()))
    }

    /// Number of sampled descendants of each node, itself included when sampled.
    pub fn leaf_counts(&self) -> Vec<u32> {
        let mut counts = vec![0u32; self.graph.node_count()];
        for idx in self.postorder() {
            let own = u32::from(self.graph[idx].sample.is_some());
            counts[idx.index()] = own + self.children(idx).map(|(c, _)| counts[c.index()]).sum::<u32>();
        }
        counts
    }

    /// Every node in post-order (children before parents), tree by tree.
    pub fn postorder(&self) -> Vec<NodeIndex> {
        let mut out = Vec::with_capacity(self.graph.node_count());
        let mut stack: Vec<(NodeIndex, bool)> = self.roots.iter().rev().map(|&r| (r, false)).collect();
        while let Some((n, expanded)) = stack.pop() {
            if expanded {
                out.push(n);
            } else {
                stack.push((n, true));
                let mut kids: Vec<NodeIndex> = self.children(n).map(|(c, _)| c).collect();
                kids.sort_unstable();
                stack.extend(kids.into_iter().rev().map(|c| (c, false)));
            }
        }
        out
    }

    /// Writes one Newick tree per root, one per line, each preceded by a comment naming the
    /// replicate and the tree. Branch lengths are in generations; sampled individuals carry
    /// their label (also when they are ancestors of other samples).
    pub fn write_newick(&self, labels: &[String], replicate: u64, out: &mut String) {
        self.write_newick_tagged(labels, &format!("replicate {replicate}"), out);
    }

    /// As [`Genealogy::write_newick`], with `tag` as the comment, e.g. `replicate 3 locus 2`:
    /// `[tag]` before a tree, `[tag tree i of k]` before each tree of a forest.
    pub fn write_newick_tagged(&self, labels: &[String], tag: &str, out: &mut String) {
        let k = self.roots.len();
        for (i, &root) in self.roots.iter().enumerate() {
            if k == 1 {
                let _ = write!(out, "[{tag}]");
            } else {
                let _ = write!(out, "[{tag} tree {} of {k}]", i + 1);
            }
            self.newick_node(root, labels, out);
            out.push_str(";\n");
        }
    }

    fn newick_node(&self, node: NodeIndex, labels: &[String], out: &mut String) {
        // Iterative to survive deep caterpillar trees of large samples.
        enum Step {
            Open(NodeIndex, Option<u64>),
            Close(NodeIndex, Option<u64>),
            Comma,
        }
        let mut stack = vec![Step::Open(node, None)];
        while let Some(step) = stack.pop() {
            match step {
                Step::Comma => out.push(','),
                Step::Open(n, len) => {
                    let mut kids: Vec<(NodeIndex, u64)> = self.children(n).map(|(c, e)| (c, e.length)).collect();
                    if kids.is_empty() {
                        self.newick_label(n, len, labels, out);
                        continue;
                    }
                    kids.sort_unstable();
                    out.push('(');
                    stack.push(Step::Close(n, len));
                    for (j, (c, l)) in kids.into_iter().enumerate().rev() {
                        stack.push(Step::Open(c, Some(l)));
                        if j > 0 {
                            stack.push(Step::Comma);
                        }
                    }
                }
                Step::Close(n, len) => {
                    out.push(')');
                    self.newick_label(n, len, labels, out);
                }
            }
        }
    }

    fn newick_label(&self, n: NodeIndex, len: Option<u64>, labels: &[String], out: &mut String) {
        if let Some(s) = self.graph[n].sample {
            out.push_str(&labels[s as usize]);
        }
        if let Some(l) = len {
            let _ = write!(out, ":{l}");
        }
    }
}

/// The genealogy of the sites [left, right) of the sequence.
#[derive(Debug, Clone)]
pub struct LocalTree {
    left: u64,
    right: u64,
    genealogy: Genealogy,
}

impl LocalTree {
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

    /// The tree over `[left, right)` (made by the engines).
    pub(crate) fn new(left: u64, right: u64, genealogy: Genealogy) -> Self {
        debug_assert!(left < right);
        LocalTree { left, right, genealogy }
    }

    /// Extends the interval to `[left, right)` (a neighbour with the same tree joins it).
    pub(crate) fn extend_to(&mut self, right: u64) {
        debug_assert!(right > self.right);
        self.right = right;
    }

    /// The tree (a forest when some lineage stopped at the horizon or at a founder): samples
    /// are nodes `0..n`, edges carry length in generations and jumps (reproduction events).
    pub fn genealogy(&self) -> &Genealogy {
        &self.genealogy
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn newick_of_a_small_tree() {
        let mut g = Genealogy::with_samples(3);
        for (i, t) in [0u64, 0, 2].into_iter().enumerate() {
            g.add_node(Node { time: t, deme: 0, sample: Some(i as u32) });
        }
        let a = g.add_node(Node { time: 4, deme: 0, sample: None });
        g.add_edge(a, 0, 2);
        g.add_edge(a, 1, 1);
        let r = g.add_node(Node { time: 9, deme: 0, sample: None });
        g.add_edge(r, a, 3);
        g.add_edge(r, 2, 4);
        g.add_root(r);
        let labels: Vec<String> = ["a_0", "a_1", "a_2"].iter().map(|s| s.to_string()).collect();
        let mut s = String::new();
        g.write_newick(&labels, 5, &mut s);
        assert_eq!(s, "[replicate 5](a_2:7,(a_0:4,a_1:4):5);\n");
        assert_eq!(g.tmrca(), Some(9));
        assert_eq!(g.total_length(), 4 + 4 + 5 + 7);
        assert_eq!(g.leaf_counts()[r as usize], 3);
    }
}
