//! The replicates of a scenario held in memory, for callers that want values rather than
//! files (the Python module, notebooks, other programs): the columns of `replicates.tsv`,
//! the rows of `sfs.tsv` and the lines of `trees.nwk`, computed by the same functions as
//! `simulate` ([`crate::batch::simulate_replicate`], [`crate::report::replicate_values`],
//! [`replicate_sfs`]), so the values are those of the files, bit for bit.
//!
//! The genealogy of one replicate is not kept (a batch of large samples would not fit);
//! [`genealogy`] draws it again from the replicate's own random stream, which gives the
//! genealogy of the batch because replicate i depends only on the seed and i.

use crate::batch::{self, BatchConfig, Keep, LocusOutcome};
use crate::engine::{Ancestry, Engine, EngineChoice, EngineDecision, Scratch};
use crate::genealogy::Genealogy;
use crate::scenario::Scenario;

/// The replicates of one run, in replicate order.
#[derive(Debug, Clone)]
pub struct Replicates {
    /// Column names of `replicates.tsv` ([`crate::report::replicate_columns`]).
    pub columns: Vec<String>,
    /// One vector per column, one value per replicate; `None` where the file has an empty cell.
    pub values: Vec<Vec<Option<f64>>>,
    /// The unfolded SFS of each replicate summed over loci (`xi_1`..`xi_{n-1}` of `sfs.tsv`),
    /// when the scenario has a mutation model.
    pub sfs: Option<Vec<Vec<u64>>>,
    /// The lines of `trees.nwk` of each replicate, without the line ends: one per tree (per
    /// locus, per local tree with recombination, per root of a forest), each led by its
    /// `[replicate i ...]` comment.
    pub trees: Vec<Vec<String>>,
    /// Replicates in which some locus ended as a forest.
    pub forests: u64,
    /// The engine that ran and why.
    pub engine: EngineDecision,
}

/// Why a run in memory stopped.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The engine asked for cannot run the scenario.
    #[error(transparent)]
    Engine(#[from] crate::engine::Error),
    /// The mutations of a replicate could not be placed (the cause is the `source`, as in
    /// the command's message `origin: replicate i: cause`).
    #[error("{origin}: replicate {replicate}")]
    Mutation {
        /// Where the scenario came from.
        origin: String,
        /// The replicate.
        replicate: u64,
        /// Why.
        source: crate::mutation::Error,
    },
    /// The caller asked to stop (e.g. Ctrl-C in Python).
    #[error("interrupted after {done} of {total} replicates")]
    Interrupted {
        /// Replicates finished.
        done: u64,
        /// Replicates asked for.
        total: u64,
    },
    /// The worker threads could not be started.
    #[error(transparent)]
    Batch(batch::Error),
}

impl Error {
    /// Whether the user's input is at fault (exit code 2 in the command, `ValueError` in Python).
    pub fn is_bad_input(&self) -> bool {
        matches!(self, Error::Engine(_) | Error::Mutation { .. })
    }
}

/// The unfolded SFS of one replicate: `xi_1`..`xi_{n-1}` summed over its loci (a row of
/// `sfs.tsv` without the replicate number), for `n` sampled sequences.
pub fn replicate_sfs(loci: &[LocusOutcome], n: usize) -> Vec<u64> {
    let mut xi = vec![0u64; n.saturating_sub(1)];
    for st in loci.iter().filter_map(|l| l.stats.as_ref()) {
        for (a, b) in xi.iter_mut().zip(&st.sfs) {
            *a += b;
        }
    }
    xi
}

/// Runs every replicate of `scenario` (its seed and number of replicates) with the engine
/// `choice` resolves to, and keeps what `simulate` would write to `replicates.tsv`, `sfs.tsv`
/// and `trees.nwk`. `origin` names the scenario in messages. `progress` is called once per
/// replicate from the worker threads; `interrupted` is asked on the calling thread between
/// replicates (results arrive in chunks of [`BatchConfig::chunk`]) and stops the run when true.
pub fn simulate(
    scenario: &Scenario,
    origin: &str,
    choice: EngineChoice,
    config: BatchConfig,
    progress: &(dyn Fn() + Sync),
    interrupted: &dyn Fn() -> bool,
) -> Result<Replicates, Error> {
    let engine = Engine::new(scenario, choice)?;
    let labels: Vec<String> = scenario.samples().iter().map(|s| s.name()).collect();
    let n = scenario.samples().len();
    let n_demes = scenario.demes().len();
    let total = scenario.replicates();
    let columns = crate::report::replicate_columns(scenario);
    let mut values: Vec<Vec<Option<f64>>> = vec![Vec::with_capacity(total as usize); columns.len()];
    let mut sfs = scenario.mutation().map(|_| Vec::with_capacity(total as usize));
    let mut trees = Vec::with_capacity(total as usize);
    let mut forests = 0;
    let key = batch::master_key(scenario.seed());
    let keep = Keep { trees: true, ..Keep::default() };
    let reps: Vec<u64> = (0..total).collect();
    let mut done = 0u64;
    let result = batch::run(
        scenario,
        &reps,
        config,
        |scratch, _, rep, _| {
            let r = batch::simulate_replicate(&engine, scratch, &key, rep, keep, &labels);
            progress();
            r
        },
        |rep, outcome| {
            if interrupted() {
                return Err(Error::Interrupted { done, total }.into());
            }
            let loci =
                outcome.map_err(|source| Error::Mutation { origin: origin.to_string(), replicate: rep, source })?;
            for (col, v) in values.iter_mut().zip(crate::report::replicate_values(rep, &loci, n_demes)) {
                col.push(v);
            }
            if let Some(rows) = sfs.as_mut() {
                rows.push(replicate_sfs(&loci, n));
            }
            let text: String = loci.iter().filter_map(|l| l.newick.as_deref()).collect();
            trees.push(text.lines().map(str::to_string).collect());
            forests += u64::from(loci.iter().any(|l| l.roots > 1));
            done += 1;
            Ok(())
        },
    );
    if let Err(e) = result {
        return Err(match e {
            batch::Error::Sink(inner) => match inner.downcast::<Error>() {
                Ok(ours) => ours,
                Err(other) => Error::Batch(batch::Error::Sink(other)),
            },
            other => Error::Batch(other),
        });
    }
    Ok(Replicates { columns, values, sfs, trees, forests, engine: engine.decision().clone() })
}

/// The genealogy of locus `locus` (from 0) of replicate `replicate` of `scenario` run with
/// `choice`, as [`simulate`] (and the `simulate` command) drew it: one genealogy, or with
/// recombination the local trees along the locus, each as (first site, last site + 1,
/// genealogy).
pub fn genealogy(
    scenario: &Scenario,
    choice: EngineChoice,
    replicate: u64,
    locus: u64,
) -> Result<Vec<(u64, u64, Genealogy)>, Error> {
    let engine = Engine::new(scenario, choice)?;
    let mut rng = batch::locus_rng(&batch::master_key(scenario.seed()), replicate, locus);
    let sites = scenario.locus_sites(locus).unwrap_or(1);
    // The first draws of the locus's stream, as in `batch::simulate_replicate`.
    Ok(match engine.simulate(&mut Scratch::default(), locus, &mut rng) {
        Ancestry::Sequence(arg) => arg.trees().iter().map(|t| (t.left(), t.right(), t.genealogy().clone())).collect(),
        Ancestry::Records(records) => {
            let mut trees = Vec::new();
            records.for_each_tree(|t, _| trees.push((t.left(), t.right(), t.genealogy().clone())));
            trees
        }
        Ancestry::Tree(g) => vec![(0, sites, g)],
    })
}

/// The genealogy as parallel arrays over its nodes (samples first, node index = position).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NodeTable {
    /// Index of the parent node; `None` for a root.
    pub parent: Vec<Option<u32>>,
    /// Generations before the present.
    pub time: Vec<u64>,
    /// Deme index.
    pub deme: Vec<u32>,
    /// Sample index of sampled individuals.
    pub sample: Vec<Option<u32>>,
    /// Generations on the edge to the parent (0 for a root).
    pub length: Vec<u64>,
    /// Reproduction events (lineage jumps) on the edge to the parent (0 for a root).
    pub jumps: Vec<u64>,
}

impl NodeTable {
    /// The node table of a genealogy.
    pub fn of(g: &Genealogy) -> Self {
        use petgraph::visit::EdgeRef;
        let graph = g.graph();
        let k = graph.node_count();
        let mut t = NodeTable {
            parent: vec![None; k],
            time: Vec::with_capacity(k),
            deme: Vec::with_capacity(k),
            sample: Vec::with_capacity(k),
            length: vec![0; k],
            jumps: vec![0; k],
        };
        for node in graph.node_weights() {
            t.time.push(node.time);
            t.deme.push(node.deme as u32);
            t.sample.push(node.sample);
        }
        for e in graph.edge_references() {
            let child = e.target().index();
            t.parent[child] = Some(e.source().index() as u32);
            t.length[child] = e.weight().length;
            t.jumps[child] = e.weight().jumps;
        }
        t
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scenario(extra: &str) -> Scenario {
        scenario_of_size(40, extra)
    }

    fn scenario_of_size(size: u64, extra: &str) -> Scenario {
        let yaml = format!(
            "demes: [{{name: pond, size: {size}, dormancy: {{law: geometric, mean: 2}}}}]\n\
             samples: [{{deme: pond, count: 6}}]\nreplicates: 12\nseed: 5\n{extra}"
        );
        Scenario::from_yaml_str(&yaml, "inline").unwrap()
    }

    fn newick_of(g: &Genealogy, labels: &[String], tag: &str) -> String {
        let mut s = String::new();
        g.write_newick_tagged(labels, tag, &mut s);
        s
    }

    /// The genealogies drawn again are those of the batch: their Newick text is the batch's.
    #[test]
    fn genealogies_are_those_of_the_batch() {
        let cases = [
            (40, "", EngineChoice::Exact),
            (40, "mutation: {rate: 0.00001, sites: 1000}\nloci: 3\n", EngineChoice::Exact),
            (40, "mutation: {rate: 0.00003, sites: 200}\nrecombination: {rate: 0.0005}\n", EngineChoice::Auto),
            (100_000, "mutation: {rate: 0.00000001, sites: 1000}\nloci: 2\n", EngineChoice::Approx),
            (
                100_000,
                "mutation: {rate: 0.00000001, sites: 1000}\nrecombination: {rate: 0.00000002}\n",
                EngineChoice::Approx,
            ),
        ];
        for (size, extra, choice) in cases {
            let sc = scenario_of_size(size, extra);
            let labels: Vec<String> = sc.samples().iter().map(|s| s.name()).collect();
            let run = simulate(&sc, "inline", choice, BatchConfig { threads: 2, chunk: 5 }, &|| {}, &|| false).unwrap();
            let mut most_trees = 0;
            for rep in [0, 7, 11] {
                let again: Vec<_> = (0..sc.loci()).map(|l| genealogy(&sc, choice, rep, l).unwrap()).collect();
                let mut text = String::new();
                for (locus, trees) in again.iter().enumerate() {
                    let tag = if sc.loci() > 1 {
                        format!("replicate {rep} locus {}", locus + 1)
                    } else {
                        format!("replicate {rep}")
                    };
                    for (left, right, g) in trees {
                        let tag = if trees.len() > 1 || sc.recombination().is_some() {
                            format!("{tag} sites {left}-{}", right - 1)
                        } else {
                            tag.clone()
                        };
                        text.push_str(&newick_of(g, &labels, &tag));
                    }
                }
                let lines: Vec<&str> = text.lines().collect();
                assert_eq!(lines, run.trees[rep as usize], "{extra:?} replicate {rep}");
                most_trees = most_trees.max(again[0].len());
            }
            // The recombination case does reach several local trees.
            assert_eq!(most_trees > 1, sc.recombination().is_some(), "{extra:?}");
        }
    }

    #[test]
    fn columns_sfs_and_trees_have_one_entry_per_replicate() {
        let sc = scenario("mutation: {rate: 0.00001, sites: 1000}\n");
        let run = simulate(&sc, "inline", EngineChoice::Exact, BatchConfig::default(), &|| {}, &|| false).unwrap();
        assert_eq!(run.columns, crate::report::replicate_columns(&sc));
        assert!(run.values.iter().all(|c| c.len() == 12));
        let sfs = run.sfs.as_ref().unwrap();
        assert_eq!(sfs.len(), 12);
        // The SFS sums to S in every replicate (infinite sites).
        let s_col = run.columns.iter().position(|c| c == "segregating_sites").unwrap();
        for (row, s) in sfs.iter().zip(&run.values[s_col]) {
            assert_eq!(row.len(), 5);
            assert_eq!(row.iter().sum::<u64>() as f64, s.unwrap());
        }
    }

    #[test]
    fn an_interruption_stops_the_run_with_its_count() {
        let sc = scenario("");
        let asked = std::cell::Cell::new(0);
        let stop = || {
            asked.set(asked.get() + 1);
            asked.get() > 3
        };
        let e = simulate(&sc, "inline", EngineChoice::Exact, BatchConfig { threads: 1, chunk: 2 }, &|| {}, &stop)
            .unwrap_err();
        assert!(matches!(e, Error::Interrupted { done: 3, total: 12 }), "{e}");
        assert!(!e.is_bad_input());
    }

    #[test]
    fn node_table_of_a_tree() {
        let sc = scenario("");
        let g = &genealogy(&sc, EngineChoice::Exact, 0, 0).unwrap()[0].2;
        let t = NodeTable::of(g);
        let k = g.graph().node_count();
        assert_eq!(t.parent.len(), k);
        assert_eq!(t.parent.iter().filter(|p| p.is_none()).count(), g.roots().len());
        assert_eq!((0..6).map(|i| t.sample[i]).collect::<Vec<_>>(), (0..6).map(Some).collect::<Vec<_>>());
        for (i, p) in t.parent.iter().enumerate() {
            if let Some(p) = p {
                assert_eq!(t.time[*p as usize] - t.time[i], t.length[i]);
            }
        }
        assert_eq!(t.length.iter().sum::<u64>(), g.total_length());
    }
}
