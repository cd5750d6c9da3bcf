//! The records of an approximate (or hybrid) ARG and the sweep that turns them into local trees.
//!
//! Records are what the engine makes: nodes, and the edges and roots of the local trees, each
//! over the sites where it holds (a tree sequence in all but name). Their size is O(n + number
//! of changes along the sequence), while a list of local trees is O(n × trees): at rho in the
//! tens of thousands the trees do not fit in memory, so the batch code streams them
//! ([`ArgRecords::for_each_tree`]) and places mutations tree by tree.
//!
//! **Breakpoints** (issue 11 item 3): a position where the genealogy a user can see changes,
//! topology or branch lengths. Two neighbouring pieces that differ only in the jumps of an edge
//! (reproduction events, which set mutation rates in dormancy but are not drawn in a tree)
//! stay separate local trees, as in the exact engine, but are not a breakpoint.

use crate::batch::LocusOutcome;
use crate::engine::arg::{Arg, EdgeRec, LocalTree, RootRec};
use crate::genealogy::{Genealogy, Node};
use crate::mutation::{self, MutationModel, Mutations};
use crate::stats::Haplotypes;
use rand::Rng;

const NONE: u32 = u32::MAX;

/// The ancestry of a sample along a sequence, as records (see the module docs).
#[derive(Debug, Clone)]
pub struct ArgRecords {
    pub(crate) n: usize,
    pub(crate) sites: u64,
    pub(crate) nodes: Vec<Node>,
    pub(crate) edges: Vec<EdgeRec>,
    pub(crate) roots: Vec<RootRec>,
    pub(crate) split_gaps: Vec<u64>,
    pub(crate) recombination_events: u64,
    pub(crate) tree_crossovers: u64,
    pub(crate) steps: u64,
}

impl ArgRecords {
    /// Records with the given nodes (the samples first) and nothing else yet.
    pub(crate) fn empty(n: usize, sites: u64, nodes: Vec<Node>) -> Self {
        ArgRecords {
            n,
            sites,
            nodes,
            edges: Vec::new(),
            roots: Vec::new(),
            split_gaps: Vec::new(),
            recombination_events: 0,
            tree_crossovers: 0,
            steps: 0,
        }
    }

    /// Number of sites L.
    pub fn sites(&self) -> u64 {
        self.sites
    }

    /// Number of sampled individuals (nodes `0..n` of every local tree).
    pub fn n_samples(&self) -> usize {
        self.n
    }

    /// Events simulated (and, in the hybrid, lineage steps of the exact part).
    pub fn steps(&self) -> u64 {
        self.steps
    }

    /// Reproduction events whose material was split between two parents.
    pub fn recombination_events(&self) -> u64 {
        self.recombination_events
    }

    /// Crossovers on the marginal trees, as [`Arg::tree_crossovers`]:
    /// E = r (L - 1) E\[J], J the reproduction events on one site's genealogy.
    pub fn tree_crossovers(&self) -> u64 {
        self.tree_crossovers
    }

    /// Nodes: samples plus every coalescence node.
    pub fn n_nodes(&self) -> usize {
        self.nodes.len()
    }

    /// Edge records (pieces of local-tree edges over the sites where they hold).
    pub fn n_edge_records(&self) -> usize {
        self.edges.len()
    }

    /// The local trees as the exact engine's [`Arg`] (all trees in memory: O(n × trees)).
    pub fn into_arg(self) -> Arg {
        Arg::from_records(
            self.n,
            self.sites,
            &self.nodes,
            self.edges,
            self.roots,
            self.split_gaps,
            (self.recombination_events, self.tree_crossovers, self.steps),
        )
    }

    /// Calls `f` on every local tree, left to right, with whether it differs from the previous
    /// tree in topology or branch lengths (a breakpoint). The trees are those of
    /// [`ArgRecords::into_arg`], built one at a time.
    pub fn for_each_tree(&self, mut f: impl FnMut(&LocalTree, bool)) {
        let mut sweep = Sweep::new(self);
        sweep.run(self, &mut f);
    }

    /// Breakpoints: positions where the genealogy a user can see changes (runs the sweep).
    pub fn breakpoints(&self) -> usize {
        let mut b = 0;
        self.for_each_tree(|_, visible| b += usize::from(visible));
        b
    }

    /// Summarises the locus tree by tree without holding the trees: the outcome
    /// ([`LocusOutcome::of_arg`] with breakpoints as in the module docs) and, with a
    /// mutation model, the mutations placed on every local tree in turn, exactly as
    /// [`mutation::place_along`] places them on [`ArgRecords::into_arg`]. With `newick`
    /// (labels, tag, text) every tree's Newick is appended as [`Arg::write_newick_tagged`].
    pub(crate) fn locus<R: Rng + ?Sized>(
        &self,
        mutation: Option<&MutationModel>,
        demes: &[u32],
        mut newick: Option<(&[String], &str, &mut String)>,
        rng: &mut R,
    ) -> Result<(LocusOutcome, Option<Mutations>), mutation::Error> {
        let sites = self.sites as f64;
        let (mut tmrca, mut length, mut roots, mut breakpoints) = (Some(0.0), 0.0, 0, 0u64);
        let mut placed = mutation.map(|_| (Vec::new(), Haplotypes::new(demes.to_vec())));
        let mut error = None;
        self.for_each_tree(|t, visible| {
            if error.is_some() {
                return;
            }
            let g = t.genealogy();
            let w = t.sites() as f64;
            tmrca = tmrca.and_then(|x| g.tmrca().map(|m| x + m as f64 * w));
            length += g.total_length() as f64 * w;
            roots = roots.max(g.roots().len());
            breakpoints += u64::from(visible);
            if let Some((labels, tag, out)) = newick.as_mut() {
                g.write_newick_tagged(labels, &format!("{tag} sites {}-{}", t.left(), t.right() - 1), out);
            }
            if let (Some(model), Some((positions, haplotypes))) = (mutation, placed.as_mut()) {
                let local = MutationModel::new(t.sites(), model.reproduction_rate(), model.dormant_rate());
                match mutation::place(g, &local, demes.to_vec(), rng) {
                    Ok(m) => {
                        positions.extend(m.positions.iter().map(|p| p + t.left()));
                        for site in 0..m.haplotypes.sites() {
                            haplotypes.push_site_bits(m.haplotypes.site_bits(site));
                        }
                    }
                    Err(mutation::Error::TooManyMutations { mutations, .. }) => {
                        error =
                            Some(mutation::Error::TooManyOnLocalTree { mutations, left: t.left(), right: t.right() })
                    }
                    Err(e) => error = Some(e),
                }
            }
        });
        if let Some(e) = error {
            return Err(e);
        }
        let outcome = LocusOutcome {
            tmrca: tmrca.map(|x| x / sites),
            roots,
            total_length: length / sites,
            jumps: self.steps,
            stats: None,
            newick: None,
            mutations: None,
            breakpoints: Some(breakpoints),
            tree_crossovers: Some(self.tree_crossovers),
            ld: None,
        };
        Ok((outcome, placed.map(|(positions, haplotypes)| Mutations { positions, haplotypes })))
    }
}

/// Breakpoints of a list of local trees: neighbours that differ in topology or branch lengths
/// (the count [`ArgRecords::breakpoints`] gives, for trees of any engine).
pub fn visible_breakpoints(trees: &[LocalTree]) -> usize {
    let forms: Vec<Vec<Shape>> = trees.iter().map(|t| shape(t.genealogy())).collect();
    forms.windows(2).filter(|w| w[0] != w[1]).count()
}

/// One edge (or root, parent key NONE) of a dated labelled tree: nodes are keyed by (smallest
/// sample below, time), unique within a tree.
type Shape = (u32, u64, u32, u64);

fn shape(g: &Genealogy) -> Vec<Shape> {
    let graph = g.graph();
    let mut min_leaf = vec![NONE; graph.node_count()];
    for v in g.postorder() {
        let own = graph[v].sample.unwrap_or(NONE);
        min_leaf[v.index()] = g.children(v).map(|(c, _)| min_leaf[c.index()]).fold(own, u32::min);
    }
    let key = |v: petgraph::graph::NodeIndex| (min_leaf[v.index()], graph[v].time);
    let mut rows: Vec<Shape> = graph
        .edge_indices()
        .map(|e| {
            let (p, c) = graph.edge_endpoints(e).expect("edge exists");
            let ((pm, pt), (cm, ct)) = (key(p), key(c));
            (pm, pt, cm, ct)
        })
        .chain(g.roots().iter().map(|&r| (NONE, 0, key(r).0, key(r).1)))
        .collect();
    rows.sort_unstable();
    rows
}

/// One row of a tree's canonical form, built without sorting: climbing from each sample in
/// turn, every node met for the first time is a row (CHAIN, time, jumps of its edge, or ROOT
/// for a root), and the node where the climb joins an earlier one is a row (smallest sample
/// below it, its time, JOIN). A node's key (smallest sample below, time) is unique in a tree,
/// so two trees have equal forms exactly when they are the same dated labelled tree with the
/// same jumps on every edge.
type Row = (u32, u64, u64);
const CHAIN: u32 = NONE - 1;
const ROOT: u64 = u64::MAX - 1;
const JOIN: u64 = u64::MAX;

/// The state of the sweep along the sequence, indexed by global node.
struct Sweep {
    parent: Vec<u32>,
    jumps: Vec<u64>,
    min_leaf: Vec<u32>,
    local: Vec<u32>,
    visited: Vec<u32>,
    roots: Vec<u32>,
    inner: Vec<u32>,
    pairs: Vec<u64>,
}

impl Sweep {
    fn new(r: &ArgRecords) -> Self {
        let nn = r.nodes.len();
        Sweep {
            parent: vec![NONE; nn],
            jumps: vec![0; nn],
            min_leaf: vec![NONE; nn],
            local: vec![NONE; nn],
            visited: Vec::new(),
            roots: Vec::new(),
            inner: Vec::new(),
            pairs: Vec::new(),
        }
    }

    fn run(&mut self, r: &ArgRecords, f: &mut impl FnMut(&LocalTree, bool)) {
        let (edges, roots) = (&r.edges, &r.roots);
        let mut by_left: Vec<u32> = (0..edges.len() as u32).collect();
        by_left.sort_unstable_by_key(|&i| edges[i as usize].left);
        let mut by_right: Vec<u32> = (0..edges.len() as u32).collect();
        by_right.sort_unstable_by_key(|&i| edges[i as usize].right);
        let mut roots_left: Vec<u32> = (0..roots.len() as u32).collect();
        roots_left.sort_unstable_by_key(|&i| roots[i as usize].left);
        let mut roots_right: Vec<u32> = (0..roots.len() as u32).collect();
        roots_right.sort_unstable_by_key(|&i| roots[i as usize].right);
        let (mut il, mut ir, mut jl, mut jr) = (0, 0, 0, 0);
        let (mut rows, mut prev): (Vec<Row>, Vec<Row>) = (Vec::new(), Vec::new());
        // The tree being extended: left end, genealogy, visible change from the one before.
        let mut current: Option<(u64, Genealogy, bool)> = None;
        let mut x = 0;
        while x < r.sites {
            while ir < by_right.len() && edges[by_right[ir] as usize].right == x {
                self.parent[edges[by_right[ir] as usize].child as usize] = NONE;
                ir += 1;
            }
            while jr < roots_right.len() && roots[roots_right[jr] as usize].right == x {
                let node = roots[roots_right[jr] as usize].node;
                let at = self.roots.iter().position(|&v| v == node).expect("a root ends after it starts");
                self.roots.swap_remove(at);
                jr += 1;
            }
            while il < by_left.len() && edges[by_left[il] as usize].left == x {
                let e = edges[by_left[il] as usize];
                self.parent[e.child as usize] = e.parent;
                self.jumps[e.child as usize] = e.jumps;
                il += 1;
            }
            while jl < roots_left.len() && roots[roots_left[jl] as usize].left == x {
                self.roots.push(roots[roots_left[jl] as usize].node);
                jl += 1;
            }
            let mut y = r.sites;
            if let Some(&i) = by_left.get(il) {
                y = y.min(edges[i as usize].left);
            }
            if let Some(&i) = by_right.get(ir) {
                y = y.min(edges[i as usize].right);
            }
            if let Some(&i) = roots_left.get(jl) {
                y = y.min(roots[i as usize].left);
            }
            if let Some(&i) = roots_right.get(jr) {
                y = y.min(roots[i as usize].right);
            }
            self.canonical(r, &mut rows);
            if current.is_none() || rows != prev {
                let visible = current.is_some() && !same_shape(&rows, &prev);
                if let Some((left, g, v)) = current.take() {
                    f(&LocalTree::new(left, x, g), v);
                }
                current = Some((x, self.genealogy(r), visible));
                std::mem::swap(&mut rows, &mut prev);
            }
            self.clear_marks();
            x = y;
        }
        if let Some((left, g, v)) = current {
            f(&LocalTree::new(left, r.sites, g), v);
        }
    }

    /// Marks the nodes of the current tree (climbing from every sample) and lists its rows.
    fn canonical(&mut self, r: &ArgRecords, rows: &mut Vec<Row>) {
        self.visited.clear();
        rows.clear();
        for i in 0..r.n as u32 {
            let mut v = i;
            loop {
                let time = r.nodes[v as usize].time;
                if self.min_leaf[v as usize] != NONE {
                    rows.push((self.min_leaf[v as usize], time, JOIN));
                    break;
                }
                self.min_leaf[v as usize] = i;
                self.visited.push(v);
                let p = self.parent[v as usize];
                if p == NONE {
                    rows.push((CHAIN, time, ROOT));
                    break;
                }
                rows.push((CHAIN, time, self.jumps[v as usize]));
                v = p;
            }
        }
    }

    fn clear_marks(&mut self) {
        for &v in &self.visited {
            self.min_leaf[v as usize] = NONE;
        }
    }

    /// The current tree as a genealogy, numbered as the exact engine numbers its trees:
    /// samples, then the other nodes in increasing global index; edges by (parent, child).
    fn genealogy(&mut self, r: &ArgRecords) -> Genealogy {
        let n = r.n;
        self.inner.clear();
        self.inner.extend(self.visited.iter().copied().filter(|&v| v as usize >= n));
        self.inner.sort_unstable();
        let n_edges = self.visited.iter().filter(|&&v| self.parent[v as usize] != NONE).count();
        let mut g = Genealogy::with_capacity(n, n + self.inner.len(), n_edges);
        for v in &r.nodes[..n] {
            g.add_node(*v);
        }
        for &v in &self.inner {
            self.local[v as usize] = g.add_node(r.nodes[v as usize]);
        }
        // Local numbers keep the global order (samples first, then inner nodes in increasing
        // index), so edges sorted by local (parent, child) are sorted by global ones.
        let local = |s: &Self, v: u32| if (v as usize) < n { v } else { s.local[v as usize] };
        self.pairs.clear();
        for &v in &self.visited {
            let p = self.parent[v as usize];
            if p != NONE {
                self.pairs.push(u64::from(local(self, p)) << 32 | u64::from(local(self, v)));
            }
        }
        self.pairs.sort_unstable();
        for k in 0..self.pairs.len() {
            let (p, c) = ((self.pairs[k] >> 32) as u32, self.pairs[k] as u32);
            let global = if (c as usize) < n { c } else { self.inner[c as usize - n] };
            g.add_edge(p, c, self.jumps[global as usize]);
        }
        for &root in &self.roots {
            g.add_root(local(self, root));
        }
        g.sort_roots();
        g
    }
}

/// Whether two canonical forms are the same tree up to jumps.
fn same_shape(a: &[Row], b: &[Row]) -> bool {
    let jumps_free = |x: &Row| if x.0 == CHAIN && x.2 != ROOT { (x.0, x.1, 0) } else { *x };
    a.len() == b.len() && a.iter().zip(b).all(|(x, y)| jumps_free(x) == jumps_free(y))
}
