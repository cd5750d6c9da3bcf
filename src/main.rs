//! The `seedline` command: parse flags, build a validated scenario, call the library, print.

use anyhow::{Context, Result};
use clap::{Parser, Subcommand};
use seedline::batch::BatchConfig;
use seedline::scenario::{self, RawScenario, Scenario};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

const EXAMPLES: &str = "Examples:
  seedline simulate                              run the embedded demo scenario
  seedline simulate scenarios/desert-annual.yaml --replicates 500 --out runs/desert
  seedline simulate scenarios/meadow-two-slopes.yaml --seed 11 --threads 2
  seedline simulate scenarios/lake-resting-eggs.yaml --vcf --diploid
  seedline predict scenarios/soil-microbe-rare-long.yaml --json
  seedline validate scenarios/lake-resting-eggs.yaml
  seedline compare observed.json --hypotheses h-none.yaml h-pareto.yaml --simulations 2000 --out abc
  seedline design --null h-none.yaml --alternative h-pareto.yaml --designs designs.yaml --out power

Exit codes: 0 success, 2 bad input (scenario or flags), 1 any other failure.";

#[derive(Parser)]
#[command(name = "seedline", version, about = "Exact genealogies and diversity under dormancy (seed banks, spores, resting eggs)", after_help = EXAMPLES)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Simulate genealogies of the scenario's sample and write replicates.tsv, trees.nwk, summary.json
    #[command(after_help = EXAMPLES)]
    Simulate {
        /// Scenario file (YAML); the embedded demo when omitted
        scenario: Option<PathBuf>,
        #[command(flatten)]
        run: RunArgs,
        /// Output directory
        #[arg(long, default_value = "seedline-out")]
        out: PathBuf,
        /// Also write vcf/replicate_<i>.vcf (needs a mutation model)
        #[arg(long)]
        vcf: bool,
        /// In the VCF, pair consecutive haplotypes of one deme and time into phased diploids
        #[arg(long, requires = "vcf")]
        diploid: bool,
        /// Also write loci.tsv with one row per locus
        #[arg(long)]
        loci_table: bool,
        /// Engine: exact, approx (continuous-time limit; refused outside its domain), hybrid
        /// (exact for the recent generations, then approx) or auto
        #[arg(long, default_value = "auto")]
        engine: seedline::approx::EngineChoice,
    },
    /// Print what published theory predicts for the scenario, and why where nothing applies
    #[command(after_help = EXAMPLES)]
    Predict {
        /// Scenario file (YAML); the embedded demo when omitted
        scenario: Option<PathBuf>,
        /// Print JSON instead of text
        #[arg(long)]
        json: bool,
    },
    /// Summary statistics of observed data (VCF of biallelic SNPs) with the simulate columns
    Observe {
        /// VCF file, plain or bgzip-compressed (.vcf.gz)
        data: PathBuf,
        /// Sample map (TSV with columns sample, deme, optional generations_ago, ploidy)
        #[arg(long)]
        samples: PathBuf,
        /// Output directory for observed.json, observed.tsv, sfs.tsv
        #[arg(long, default_value = "seedline-observed")]
        out: PathBuf,
        /// Project every site with at least M called sequences to M (hypergeometric)
        #[arg(long, value_name = "M", conflicts_with = "drop_missing")]
        project: Option<u32>,
        /// Use only sites called in every sequence
        #[arg(long)]
        drop_missing: bool,
    },
    /// Families of a block sample (one individual per generation): relatedness by lag, MRCA depth,
    /// coloured-family sums; writes families.tsv, family_sizes.tsv, relatedness.tsv, mrca_depth.tsv,
    /// coloured.tsv, families.json (try scenarios/single-lineage-block.yaml)
    Families {
        /// Scenario file (YAML) whose sample is a block
        scenario: PathBuf,
        #[command(flatten)]
        run: RunArgs,
        /// Output directory
        #[arg(long, default_value = "seedline-families")]
        out: PathBuf,
        /// Law of the family types: pm1 (±1) or normal
        #[arg(long, default_value = "pm1", value_parser = ["pm1", "normal"])]
        colours: String,
    },
    /// Build a null distribution of the statistics in chunks (resumable, shardable)
    #[command(after_help = NULL_EXAMPLES)]
    Null {
        /// Scenario file (YAML) with a mutation model
        scenario: PathBuf,
        /// Total number of replicates B (over all shards)
        #[arg(long)]
        replicates: u64,
        /// Run only the replicates i with i mod K == I
        #[arg(long, value_name = "I/K", default_value = "0/1")]
        shard: String,
        /// Output directory (rerun the same command in it to resume)
        #[arg(long, default_value = "seedline-null")]
        out: PathBuf,
        /// Take the sample sizes per deme and time from an `observe` result
        #[arg(long, value_name = "OBSERVED.json")]
        like: Option<PathBuf>,
        /// Place exactly the observed number of segregating sites (needs --like)
        #[arg(long, requires = "like")]
        condition_on_s: bool,
        /// Replicates per chunk file
        #[arg(long, default_value_t = 1000)]
        chunk: u64,
        /// Stop after this many new chunks (a rerun continues)
        #[arg(long)]
        max_chunks: Option<u64>,
        /// Master seed (overrides the file)
        #[arg(long)]
        seed: Option<u64>,
        /// Worker threads (0 = one per core)
        #[arg(long, default_value_t = 0)]
        threads: usize,
    },
    /// Merge the directories of null shards into one null.tsv
    Merge {
        /// Shard directories
        #[arg(required = true)]
        dirs: Vec<PathBuf>,
        /// Output directory
        #[arg(long)]
        out: PathBuf,
    },
    /// Test observed statistics against a null distribution
    Test {
        /// observed.json written by `seedline observe`
        observed: PathBuf,
        /// Null run directory (merged or not)
        #[arg(long)]
        null: PathBuf,
        /// Output directory for test.tsv, test.json and figures/
        #[arg(long, default_value = "seedline-test")]
        out: PathBuf,
    },
    /// ABC model choice between hypothesis files (priors allowed) and parameter estimation
    #[command(after_help = EXAMPLES)]
    Compare {
        /// Observed statistics (observed.json of `seedline observe`, or {"statistics": {...}})
        observed: PathBuf,
        /// Hypothesis files: scenarios whose numbers may be priors {prior: uniform|log_uniform, low, high}
        #[arg(long, num_args = 1.., required = true)]
        hypotheses: Vec<PathBuf>,
        /// Simulations per hypothesis
        #[arg(long, default_value_t = 1000)]
        simulations: u64,
        /// Fraction of all simulations accepted
        #[arg(long, default_value_t = 0.05)]
        tolerance: f64,
        /// Statistics to use, comma-separated (default: segregating_sites,pi,tajima_d,fay_wu_h,haplotypes,sfs_1,sfs_2,sfs_3)
        #[arg(long, value_delimiter = ',')]
        statistics: Option<Vec<String>>,
        /// Model-choice adjustment: none (rejection shares) or logistic (Beaumont 2008)
        #[arg(long, default_value = "none", value_parser = ["none", "logistic"])]
        adjust: String,
        /// Worker threads (0 = one per core)
        #[arg(long, default_value_t = 0)]
        threads: usize,
        /// Output directory
        #[arg(long, default_value = "seedline-compare")]
        out: PathBuf,
    },
    /// Power of candidate sampling designs to reject a null hypothesis, and the cheapest reaching a target
    #[command(after_help = EXAMPLES)]
    Design {
        /// Null hypothesis file
        #[arg(long)]
        null: PathBuf,
        /// Alternative hypothesis file
        #[arg(long)]
        alternative: PathBuf,
        /// Candidate designs (YAML: designs: [{name, samples, sites?, loci?}], costs?)
        #[arg(long)]
        designs: PathBuf,
        /// Test level
        #[arg(long, default_value_t = 0.05)]
        level: f64,
        /// Target power
        #[arg(long, default_value_t = 0.8)]
        target: f64,
        /// Null datasets per design (B)
        #[arg(long, default_value_t = 500)]
        replicates: u64,
        /// Alternative datasets per design (P)
        #[arg(long, default_value_t = 200)]
        power_replicates: u64,
        /// Statistics to test, comma-separated (sfs_chi2 is always added)
        #[arg(long, value_delimiter = ',')]
        statistics: Option<Vec<String>>,
        /// Worker threads (0 = one per core)
        #[arg(long, default_value_t = 0)]
        threads: usize,
        /// Output directory
        #[arg(long, default_value = "seedline-design")]
        out: PathBuf,
    },
    /// Check a scenario file and print it as parsed, without simulating
    #[command(after_help = EXAMPLES)]
    Validate {
        /// Scenario file (YAML); the embedded demo when omitted
        scenario: Option<PathBuf>,
    },
}

const NULL_EXAMPLES: &str = "Examples:
  seedline null scenarios/lake-resting-eggs.yaml --replicates 10000 --out null/lake
  seedline null H0.yaml --replicates 100000 --shard 3/8 --out null/shard3    (one of 8 cluster jobs)
  seedline merge null/shard* --out null/all
  seedline null H0.yaml --replicates 5000 --like observed/observed.json --out null/like
  seedline test observed/observed.json --null null/like --out test

Rerunning the same command in the same --out resumes after the last complete chunk.";

/// Flags shared by the commands that run replicates of a scenario.
#[derive(clap::Args)]
struct RunArgs {
    /// Number of replicates (overrides the file)
    #[arg(long)]
    replicates: Option<u64>,
    /// Master seed (overrides the file)
    #[arg(long)]
    seed: Option<u64>,
    /// Worker threads (0 = one per core)
    #[arg(long, default_value_t = 0)]
    threads: usize,
}

impl RunArgs {
    /// Reads the scenario (or the demo), merges these overrides into it and validates it.
    fn scenario(&self, path: Option<&Path>) -> Result<(Scenario, String)> {
        let (raw, origin) = load_raw(path)?;
        let raw = RawScenario { replicates: self.replicates.or(raw.replicates), seed: self.seed.or(raw.seed), ..raw };
        Ok((Scenario::from_raw(raw, &origin)?, origin))
    }

    fn batch(&self) -> BatchConfig {
        BatchConfig { threads: self.threads, ..BatchConfig::default() }
    }
}

/// Marks an error as the user's input being wrong (exit code 2).
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
struct BadInput(String);

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            if is_broken_pipe(&e) {
                return ExitCode::SUCCESS;
            }
            eprintln!("error: {e:#}");
            let bad_input = e.chain().any(|c| {
                c.is::<BadInput>()
                    || c.is::<scenario::Error>()
                    || c.is::<seedline::observed::Error>()
                    || c.is::<seedline::approx::ApproxError>()
                    || c.is::<seedline::null::SettingsMismatch>()
                    || c.downcast_ref::<seedline::abc::Error>().is_some_and(|a| a.is_bad_input())
            });
            ExitCode::from(if bad_input { 2 } else { 1 })
        }
    }
}

fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| c.downcast_ref::<std::io::Error>().is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe))
}

fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Simulate { scenario, run, out, vcf, diploid, loci_table, engine } => {
            let (scenario, origin) = run.scenario(scenario.as_deref())?;
            let bar = progress_bar(scenario.replicates());
            let summary = seedline::report::simulate_to_dir(
                &scenario,
                &origin,
                run.batch(),
                seedline::report::SimulateOptions { vcf, diploid, loci_table, engine },
                &out,
                &|| bar.inc(1),
            )?;
            bar.finish_and_clear();
            print!("{}", seedline::report::render_summary(&summary));
            print!("{}", seedline::report::render_comparison(&summary.comparison));
            println!("engine: {}", summary.engine.reason);
            for note in &summary.notes {
                println!("note: {note}");
            }
            println!("wrote results to {}", out.display());
            Ok(())
        }
        Command::Predict { scenario, json } => {
            let (raw, origin) = load_raw(scenario.as_deref())?;
            let scenario = Scenario::from_raw(raw, &origin)?;
            let p = seedline::theory::predict::predict(&scenario);
            if json {
                println!("{}", serde_json::to_string_pretty(&p.to_json())?);
            } else {
                print!("{}", seedline::report::render_prediction(&scenario, &p));
            }
            Ok(())
        }
        Command::Observe { data, samples, out, project, drop_missing } => {
            use seedline::observed::{self, Missing};
            let missing = match (project, drop_missing) {
                (Some(m), _) => Missing::Project(m),
                (None, true) => Missing::Drop,
                (None, false) => Missing::Refuse,
            };
            let obs = observed::observe_files(&data, &samples, missing)?;
            observed::write_outputs(&obs, &out).with_context(|| format!("writing into {}", out.display()))?;
            let wrote = observed::OBSERVE_FILES.map(|f| out.join(f).display().to_string()).join(", ");
            // Through write_all so that a closed pipe is an error, not a panic.
            std::io::Write::write_all(
                &mut std::io::stdout(),
                format!("{}wrote {wrote}\n", observed::render(&obs)).as_bytes(),
            )?;
            Ok(())
        }
        Command::Families { scenario, run, out, colours } => {
            use seedline::families::{self, Colours, Options};
            let (scenario, origin) = run.scenario(Some(&scenario))?;
            let colours = if colours == "normal" { Colours::Normal } else { Colours::Pm1 };
            let bar = progress_bar(scenario.replicates());
            let config = run.batch();
            let report = families::run(&scenario, &origin, config, &Options { colours, ..Options::default() }, &|| {
                bar.inc(1)
            })
            .map_err(|e| if e.is_bad_input() { anyhow::Error::new(BadInput(e.to_string())) } else { e.into() })?;
            bar.finish_and_clear();
            families::write_to_dir(&report, &out)?;
            print!("{}", families::render_summary(&report));
            println!("wrote {}", families::FILES.map(|f| out.join(f).display().to_string()).join(", "));
            Ok(())
        }
        Command::Null { scenario, replicates, shard, out, like, condition_on_s, chunk, max_chunks, seed, threads } => {
            use seedline::null;
            let shard = null::parse_shard(&shard).map_err(|e| BadInput(format!("{e:#}")))?;
            let (mut raw, origin) = load_raw(Some(&scenario))?;
            raw.seed = seed.or(raw.seed);
            let observed = match &like {
                Some(p) => Some(null::load_observed(p).map_err(|e| BadInput(format!("{e:#}")))?),
                None => None,
            };
            if let Some(o) = &observed {
                null::like(&mut raw, o, &origin).map_err(|e| BadInput(format!("{e:#}")))?;
            }
            let scenario = Scenario::from_raw(raw, &origin)?;
            let count = match (&observed, condition_on_s) {
                (Some(o), true) => {
                    let s = o.value("segregating_sites");
                    let s = s.ok_or_else(|| BadInput("the observed data have no segregating_sites".into()))?;
                    seedline::mutation::Count::Fixed(s.round() as u64)
                }
                _ => seedline::mutation::Count::Poisson,
            };
            let cfg = null::NullConfig { replicates, shard, chunk, count, max_new_chunks: max_chunks };
            let shard_reps = (0..replicates).filter(|i| i % shard.1 == shard.0).count() as u64;
            let bar = progress_bar(shard_reps);
            let report = null::run(&scenario, cfg, BatchConfig { threads, ..BatchConfig::default() }, &out, &|d| {
                bar.set_position(d)
            })?;
            bar.finish_and_clear();
            println!(
                "{} of {} chunks complete in {} ({} resumed, {} written now); shard {}/{} holds {} replicates",
                report.resumed_chunks + report.written_chunks,
                report.total_chunks,
                out.display(),
                report.resumed_chunks,
                report.written_chunks,
                shard.0,
                shard.1,
                report.shard_replicates
            );
            Ok(())
        }
        Command::Merge { dirs, out } => {
            let n = seedline::null::merge(&dirs, &out).map_err(|e| BadInput(format!("{e:#}")))?;
            println!("merged {n} replicates into {}", out.join("null.tsv").display());
            Ok(())
        }
        Command::Test { observed, null, out } => {
            use seedline::null as nl;
            let obs = nl::load_observed(&observed).map_err(|e| BadInput(format!("{e:#}")))?;
            let table = nl::load(&null).map_err(|e| BadInput(format!("{e:#}")))?;
            let report = nl::test(&obs, &table)?;
            nl::write_test(&report, &table, &out)?;
            print!("{}", nl::render_test(&report));
            println!(
                "wrote {}, {}, {}",
                out.join("test.tsv").display(),
                out.join("test.json").display(),
                out.join("figures").display()
            );
            Ok(())
        }
        Command::Compare { observed, hypotheses, simulations, tolerance, statistics, adjust, threads, out } => {
            use seedline::abc::{self, compare};
            let obs = abc::load_observed(&observed)?;
            let files: Vec<String> = hypotheses.iter().map(|p| p.display().to_string()).collect();
            let names = abc::unique_names(&files);
            let hyps = hypotheses
                .iter()
                .zip(&names)
                .map(|(p, n)| abc::load_hypothesis(p, n))
                .collect::<Result<Vec<_>, _>>()?;
            let adjust = if adjust == "logistic" { compare::Adjust::Logistic } else { compare::Adjust::None };
            let opts = compare::CompareOptions { simulations, tolerance, statistics, adjust, threads };
            let bar = progress_bar(simulations * hyps.len() as u64);
            let result = compare::run(&obs, hyps, opts, &|| bar.inc(1))?;
            bar.finish_and_clear();
            compare::write(&result, &out)?;
            print!("{}", compare::render(&result));
            println!("wrote results to {}", out.display());
            Ok(())
        }
        Command::Design {
            null,
            alternative,
            designs,
            level,
            target,
            replicates,
            power_replicates,
            statistics,
            threads,
            out,
        } => {
            use seedline::abc::{self, design};
            let names = abc::unique_names(&[null.display().to_string(), alternative.display().to_string()]);
            let h0 = abc::load_hypothesis(&null, &names[0])?;
            let h1 = abc::load_hypothesis(&alternative, &names[1])?;
            let origin = designs.display().to_string();
            let text = std::fs::read_to_string(&designs)
                .map_err(|e| BadInput(format!("cannot read designs file {origin}: {e}")))?;
            let file = design::parse_designs(&text, &origin)?;
            let opts = design::DesignOptions { level, target, replicates, power_replicates, statistics, threads };
            let bar = progress_bar((replicates + power_replicates) * file.designs.len() as u64);
            let result = design::run(&h0, &h1, &file, opts, &|| bar.inc(1))?;
            bar.finish_and_clear();
            design::write(&result, &out)?;
            print!("{}", design::render(&result));
            println!("wrote results to {}", out.display());
            Ok(())
        }
        Command::Validate { scenario } => {
            let (raw, origin) = load_raw(scenario.as_deref())?;
            let scenario = Scenario::from_raw(raw, &origin)?;
            println!("{origin}: valid");
            println!("{scenario}");
            Ok(())
        }
    }
}

/// Reads the scenario file (or the embedded demo) into its raw form.
fn load_raw(path: Option<&Path>) -> Result<(RawScenario, String)> {
    let (text, origin) = match path {
        Some(p) => {
            let origin = p.display().to_string();
            let text = std::fs::read_to_string(p)
                .map_err(|e| BadInput(format!("cannot read scenario file {origin}: {e}")))
                .with_context(|| format!("reading scenario {origin}"))?;
            (text, origin)
        }
        None => (scenario::DEMO_YAML.to_string(), "<embedded demo>".to_string()),
    };
    Ok((scenario::parse_raw(&text, &origin)?, origin))
}

fn progress_bar(len: u64) -> indicatif::ProgressBar {
    let bar = indicatif::ProgressBar::new(len);
    bar.set_style(
        indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} replicates  {per_sec}  eta {eta}")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    bar
}
