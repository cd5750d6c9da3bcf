//! seedline: exact genealogies, diversity and sampling design under dormancy.
//!
//! Organisms with dormant stages (plant seed banks, bacterial spores, resting eggs) have
//! genealogies stretched by dormancy. seedline simulates them exactly, in discrete
//! generations, backward in time: each haploid individual of deme d draws a look-back R >= 1
//! from its deme's [`dormancy`] law, a parent deme from the backward migration matrix, and
//! a uniform parent among the individuals of that generation.
//!
//! The pipeline: [`scenario`] (parse and validate) → [`engine`] (genealogy) →
//! [`genealogy`] (trees, Newick) → [`batch`] (replicates in parallel, deterministic) →
//! [`report`] (tables, summaries).
//!
//! ```
//! use seedline::{batch, engine::Simulator, scenario::Scenario};
//! let yaml = "demes: [{name: pond, size: 50, dormancy: {law: geometric, mean: 2}}]\n\
//!             samples: [{deme: pond, count: 5}]\n";
//! let scenario = Scenario::from_yaml_str(yaml, "inline").unwrap();
//! let mut rng = batch::replicate_rng(&batch::master_key(scenario.seed()), 0);
//! let g = Simulator::new().simulate(&scenario, &mut rng);
//! assert!(g.is_tree());
//! assert!(g.tmrca().unwrap() > 0);
//! ```
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod abc;
pub mod batch;
pub mod cost;
pub mod demography;
pub mod dormancy;
pub mod engine;
pub mod families;
pub mod genealogy;
pub mod mutation;
pub mod notation;
pub mod null;
pub mod observed;
pub mod replicates;
pub mod report;
pub mod scenario;
pub mod stats;
pub mod theory;
pub mod vcf_export;
