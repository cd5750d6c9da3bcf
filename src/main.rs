//! The `seedline` command: parse flags, build a validated scenario, call the library, print.

use anyhow::{Context, Result};
use clap::{Parser, Subcommand};
use seedline::batch::BatchConfig;
use seedline::scenario::{self, RawScenario, Scenario};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

const EXAMPLES: &str = "Examples: (run from the checkout; examples/ holds invented data and hypotheses)
  seedline simulate                              run the embedded demo scenario
  seedline simulate scenarios/desert-annual.yaml --replicates 100 --out runs/desert
  seedline simulate scenarios/meadow-two-slopes.yaml --seed 11 --threads 2 --out runs/meadow
  seedline simulate scenarios/lake-resting-eggs.yaml --vcf --diploid --out runs/lake
  seedline predict scenarios/soil-microbe-rare-long.yaml --json
  seedline validate scenarios/lake-resting-eggs.yaml
  seedline observe examples/data.vcf.gz --samples examples/map.tsv --out observed
  seedline compare observed/observed.json --hypotheses examples/h-none.yaml examples/h-pareto.yaml --simulations 400 --out abc
  seedline design --null examples/h-none.yaml --alternative examples/h-pareto.yaml --designs examples/designs.yaml --replicates 200 --power-replicates 100 --out power

Every command that writes --out stages its files and swaps them in when complete; it refuses a
directory holding files it did not write unless --force. Progress goes to stderr (a bar on a
terminal, a line every ~10 s otherwise); --quiet silences it.

Exit codes: 0 success (also when the output pipe is closed early), 2 bad input (scenario, data,
flags or --out), 1 any other failure; `status` exits 3 when a null run is not complete.";

#[derive(Parser)]
#[command(name = "seedline", version, about = "Exact genealogies and diversity under dormancy (seed banks, spores, resting eggs)", after_help = EXAMPLES)]
struct Cli {
    #[command(subcommand)]
    command: Command,
    /// Print no progress and no notes on stderr (errors still go there)
    #[arg(long, short, global = true)]
    quiet: bool,
}

/// `--out` may name a directory that holds files seedline did not write.
#[derive(clap::Args, Clone, Copy)]
struct Force {
    /// Write into --out even if it holds files seedline did not write (they are kept; same-named
    /// ones are replaced) or the output of another command (replaced)
    #[arg(long)]
    force: bool,
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
        #[command(flatten)]
        force: Force,
        /// Also write vcf/replicate_<i>.vcf and the sample map vcf/samples.tsv (needs a mutation model)
        #[arg(long)]
        vcf: bool,
        /// In the VCF, pair consecutive haplotypes of one deme and time into phased diploids
        #[arg(long, requires = "vcf")]
        diploid: bool,
        /// Compress the VCFs with BGZF (vcf/replicate_<i>.vcf.gz, readable by `observe` and gzip)
        #[arg(long, requires = "vcf")]
        bgzip: bool,
        /// Also write loci.tsv with one row per locus
        #[arg(long)]
        loci_table: bool,
        /// Also write ld.tsv: r² by distance within loci (all pairs of segregating sites)
        #[arg(long)]
        ld: bool,
        /// Engine: exact, approx (continuous-time limit; refused outside its domain), hybrid
        /// (exact for the recent generations, then approx) or auto (approx where a limit holds)
        #[arg(long, default_value = "auto")]
        engine: seedline::engine::EngineChoice,
    },
    /// Print what published theory predicts for the scenario, and why where nothing applies
    /// (for a hypothesis file: at the median of every prior)
    #[command(after_help = EXAMPLES)]
    Predict {
        /// Scenario or hypothesis file (YAML); the embedded demo when omitted
        scenario: Option<PathBuf>,
        /// Print JSON instead of text
        #[arg(long)]
        json: bool,
    },
    /// Summary statistics of observed data (VCF/BCF of biallelic SNPs), per locus and genome-wide, with the simulate columns
    Observe {
        /// VCF file (plain, gzip or bgzip) or BCF
        data: PathBuf,
        /// Sample map (TSV with columns sample, deme, optional generations_ago, ploidy); a sample is a plant
        #[arg(long)]
        samples: PathBuf,
        /// Cut each contig into windows of BP bases, each a locus (default: each contig is one locus)
        #[arg(long, value_name = "BP", conflicts_with = "regions")]
        windows: Option<u64>,
        /// Loci from a BED file (0-based, half-open; regions may not overlap)
        #[arg(long, value_name = "FILE.bed")]
        regions: Option<PathBuf>,
        /// Callable sites from a BED file: records outside are skipped, per-site values use the callable length
        #[arg(long, value_name = "FILE.bed")]
        mask: Option<PathBuf>,
        /// Output directory for observed.json, observed.tsv, sfs.tsv
        #[arg(long, default_value = "seedline-observed")]
        out: PathBuf,
        #[command(flatten)]
        force: Force,
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
        #[command(flatten)]
        force: Force,
        /// Law of the family types: pm1 (±1) or normal
        #[arg(long, default_value = "pm1", value_parser = ["pm1", "normal"])]
        colours: String,
        /// Engine: exact, approx (continuous-time limit; refused outside its domain), hybrid (exact, then approx) or auto (approx where a limit holds)
        #[arg(long, default_value = "auto")]
        engine: seedline::engine::EngineChoice,
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
        #[command(flatten)]
        force: Force,
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
        /// Engine: exact, approx (continuous-time limit; refused outside its domain), hybrid (exact, then approx) or auto (approx where a limit holds); part of the run's settings
        #[arg(long, default_value = "auto")]
        engine: seedline::engine::EngineChoice,
    },
    /// Merge the directories of null shards into one null.tsv
    Merge {
        /// Shard directories
        #[arg(required = true)]
        dirs: Vec<PathBuf>,
        /// Output directory
        #[arg(long)]
        out: PathBuf,
        #[command(flatten)]
        force: Force,
    },
    /// Which shards and chunks of a null run are done, missing or damaged (check before merge;
    /// exit code 0 complete, 3 not complete, 2 bad input)
    Status {
        /// Run directories (--out of `null` or `merge`), or a directory holding them
        #[arg(required = true)]
        dirs: Vec<PathBuf>,
        /// Print JSON (every run's state, chunks missing and damaged, shard indices to rerun)
        #[arg(long)]
        json: bool,
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
        #[command(flatten)]
        force: Force,
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
        /// Engine: exact, approx (continuous-time limit; refused outside its domain), hybrid (exact, then approx) or auto (approx where a limit holds), chosen for each draw from the priors
        #[arg(long, default_value = "auto")]
        engine: seedline::engine::EngineChoice,
        /// Output directory
        #[arg(long, default_value = "seedline-compare")]
        out: PathBuf,
        #[command(flatten)]
        force: Force,
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
        /// Simulate the loci of an `observe` result (their callable lengths) in every design
        #[arg(long, value_name = "OBSERVED.json")]
        like: Option<PathBuf>,
        /// Worker threads (0 = one per core)
        #[arg(long, default_value_t = 0)]
        threads: usize,
        /// Engine: exact, approx (continuous-time limit; refused outside its domain), hybrid (exact, then approx) or auto (approx where a limit holds), chosen for each design and draw from the priors
        #[arg(long, default_value = "auto")]
        engine: seedline::engine::EngineChoice,
        /// Output directory
        #[arg(long, default_value = "seedline-design")]
        out: PathBuf,
        #[command(flatten)]
        force: Force,
    },
    /// Check scenario, hypothesis (priors) and design files and print them as parsed, without
    /// simulating; designs are checked against the hypothesis files given with them
    #[command(after_help = EXAMPLES)]
    Validate {
        /// Scenario, hypothesis or design files (YAML); the embedded demo when omitted
        files: Vec<PathBuf>,
    },
}

const NULL_EXAMPLES: &str = "Examples: (run from the checkout)
  seedline null scenarios/lake-resting-eggs.yaml --replicates 400 --out null/lake
  seedline null examples/null-no-dormancy.yaml --replicates 1000 --shard 0/2 --out null/shard0    (one of 2 cluster jobs)
  seedline null examples/null-no-dormancy.yaml --replicates 1000 --shard 1/2 --out null/shard1
  seedline status null/shard0 null/shard1                (which shards and chunks are done, missing, damaged)
  seedline merge null/shard0 null/shard1 --out null/all
  seedline observe examples/data.vcf.gz --samples examples/map.tsv --out observed
  seedline null examples/null-no-dormancy.yaml --replicates 500 --like observed/observed.json --out null/like
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

/// Writes to stdout like `print!`, but returns the error (a closed pipe) instead of panicking.
macro_rules! out {
    ($($arg:tt)*) => {
        std::io::Write::write_fmt(&mut std::io::stdout(), format_args!($($arg)*))
    };
}

/// Writes a line to stderr, ignoring a closed stderr.
macro_rules! note {
    ($($arg:tt)*) => {{
        let _ = writeln!(std::io::stderr(), $($arg)*);
    }};
}

use std::io::Write as _;

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
            if e.is::<seedline::null::Incomplete>() {
                return ExitCode::from(seedline::null::INCOMPLETE_EXIT);
            }
            note!("error: {e:#}");
            ExitCode::from(if is_bad_input(&e) { 2 } else { 1 })
        }
    }
}

/// Whether an error (anywhere in its chain) is the user's input being wrong.
fn is_bad_input(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.is::<BadInput>()
            || c.is::<scenario::Error>()
            || c.is::<seedline::observed::Error>()
            || c.is::<seedline::engine::approx::ApproxError>()
            || c.is::<seedline::engine::Error>()
            || c.is::<seedline::null::EngineMismatch>()
            || c.is::<seedline::null::SettingsMismatch>()
            || c.is::<seedline::null::LayoutMismatch>()
            || c.is::<seedline::null::NullError>()
            || c.is::<seedline::mutation::Error>()
            || c.is::<seedline::cost::Refusal>()
            || c.downcast_ref::<seedline::report::output::OutputError>().is_some_and(|o| o.is_bad_input())
            || c.downcast_ref::<seedline::abc::Error>().is_some_and(|a| a.is_bad_input())
            || c.downcast_ref::<seedline::batch::Error>().and_then(|b| b.sink_error()).is_some_and(is_bad_input)
    })
}

fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| c.downcast_ref::<std::io::Error>().is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe))
}

/// Everything a run's preamble needs: progress mode and whether to print notes.
#[derive(Clone, Copy)]
struct Ui {
    quiet: bool,
}

impl Ui {
    fn progress(&self, label: &str, unit: &str, total: u64) -> Progress {
        Progress::new(label, unit, total, seedline::report::progress::Mode::detect(self.quiet))
    }

    fn notes(&self, notes: &[String]) {
        if !self.quiet {
            for n in notes {
                note!("note: {n}");
            }
        }
    }
}

use seedline::report::output::Output;
use seedline::report::progress::Progress;
use seedline::report::record::{RunRecord, Seeds};
use serde_json::json;

/// Memory available to this process, from /proc/meminfo (Linux); `None` elsewhere.
fn available_memory() -> Option<u64> {
    seedline::cost::available_memory()
}

fn worker_threads(threads: usize) -> usize {
    if threads > 0 { threads } else { std::thread::available_parallelism().map_or(1, |n| n.get()) }
}

/// Notes (and refusals) before running `scenario` with the engine that will run it.
fn preflight(scenario: &Scenario, origin: &str, exact: bool, threads: usize, ui: Ui) -> Result<()> {
    let notes = seedline::cost::preflight(scenario, origin, exact, worker_threads(threads), available_memory())?;
    ui.notes(&notes);
    Ok(())
}

fn run(cli: Cli) -> Result<()> {
    let ui = Ui { quiet: cli.quiet };
    match cli.command {
        Command::Simulate { scenario, run, out, force, vcf, diploid, bgzip, loci_table, ld, engine } => {
            let scenario_path = scenario;
            let (scenario, origin) = run.scenario(scenario_path.as_deref())?;
            if vcf && scenario.mutation().is_none() {
                return Err(BadInput(format!(
                    "{origin}: --vcf needs a mutation model: add `mutation: {{rate: ..., sites: ...}}` to the scenario"
                ))
                .into());
            }
            if ld && scenario.mutation().is_none() {
                return Err(BadInput(format!(
                    "{origin}: --ld needs a mutation model: add `mutation: {{rate: ..., sites: ...}}` to the scenario"
                ))
                .into());
            }
            let decision = seedline::engine::resolve(engine, &scenario)?;
            let exact = decision.kind == seedline::engine::EngineKind::Exact;
            preflight(&scenario, &origin, exact, run.threads, ui)?;
            let settings = json!({"replicates": scenario.replicates(), "engine": engine, "vcf": vcf,
                "diploid": diploid, "bgzip": bgzip, "loci_table": loci_table, "ld": ld});
            let rec = scenario_record("simulate", scenario_path.as_deref(), settings)?;
            let mut output = Output::begin(&out, "simulate", force.force)?;
            output.set_run(rec.with_seed(Seeds::One(scenario.seed())));
            let bar = ui.progress("simulate", "replicates", scenario.replicates());
            let summary = seedline::report::simulate_to_dir(
                &scenario,
                &origin,
                run.batch(),
                seedline::report::SimulateOptions { run: Some(rec), vcf, diploid, bgzip, loci_table, engine, ld },
                output.staging(),
                &|| bar.inc(1),
            )?;
            bar.finish();
            report_page(&output, "simulate")?;
            output.commit()?;
            out!("{}", seedline::report::render_summary(&summary))?;
            out!("{}", seedline::report::render_comparison(&summary.comparison))?;
            out!("engine: {}\n", summary.engine.reason)?;
            for note in &summary.notes {
                out!("note: {note}\n")?;
            }
            out!("wrote results to {}\n", out.display())?;
            Ok(())
        }
        Command::Predict { scenario, json } => {
            let scenario_path = scenario;
            let (scenario, notes) = match scenario_path.as_deref() {
                Some(p) => match read_input(p)? {
                    Input::Scenario(s, _) => (s, Vec::new()),
                    Input::Hypothesis(h) => {
                        let medians: Vec<f64> = h.priors.iter().map(|p| p.median()).collect();
                        let s = h.scenario_with(&medians)?;
                        let at: Vec<String> =
                            h.priors.iter().zip(&medians).map(|(p, m)| format!("{} = {m}", p.path)).collect();
                        (s, vec![format!("{}: predictions at the median of every prior: {}", h.origin, at.join(", "))])
                    }
                    Input::Designs(..) => {
                        return Err(BadInput(format!(
                            "{}: a designs file has no scenario to predict from; give a scenario or hypothesis file",
                            p.display()
                        ))
                        .into());
                    }
                },
                None => {
                    let (raw, origin) = load_raw(None)?;
                    (Scenario::from_raw(raw, &origin)?, Vec::new())
                }
            };
            let mut p = seedline::theory::predict::predict(&scenario);
            p.notes.extend(notes);
            if json {
                let mut j = p.to_json();
                j["run"] = serde_json::to_value(scenario_record("predict", scenario_path.as_deref(), json!({}))?)?;
                out!("{}\n", serde_json::to_string_pretty(&j)?)?;
            } else {
                out!("{}", seedline::report::render_prediction(&scenario, &p))?;
            }
            Ok(())
        }
        Command::Observe { data, samples, windows, regions, mask, out, force, project, drop_missing } => {
            use seedline::observed::{self, Missing};
            let missing = match (project, drop_missing) {
                (Some(m), _) => Missing::Project(m),
                (None, true) => Missing::Drop,
                (None, false) => Missing::Refuse,
            };
            let options = observed::Options::from_files(missing, windows, regions.as_deref(), mask.as_deref())?;
            let mut output = Output::begin(&out, "observe", force.force)?;
            let mut obs = observed::observe_files_with(&data, &samples, &options)?;
            let files = [
                ("data", Some(data.as_path())),
                ("samples", Some(samples.as_path())),
                ("regions", regions.as_deref()),
                ("mask", mask.as_deref()),
            ];
            let settings = json!({"windows": windows, "project": project, "drop_missing": drop_missing});
            let rec = record("observe", &files, settings)?;
            output.set_run(rec.clone());
            obs.run = Some(rec);
            observed::write_outputs(&obs, output.staging())
                .with_context(|| format!("cannot write into {}", output.staging().display()))?;
            output.commit()?;
            let wrote = observed::OBSERVE_FILES.map(|f| out.join(f).display().to_string()).join(", ");
            out!("{}wrote {wrote}\n", observed::render(&obs))?;
            Ok(())
        }
        Command::Families { scenario, run, out, force, colours, engine } => {
            use seedline::families::{self, Colours, Options};
            let scenario_path = scenario;
            let (scenario, origin) = run.scenario(Some(&scenario_path))?;
            preflight(&scenario, &origin, true, run.threads, ui)?;
            let colours = if colours == "normal" { Colours::Normal } else { Colours::Pm1 };
            let mut output = Output::begin(&out, "families", force.force)?;
            let bar = ui.progress("families", "replicates", scenario.replicates());
            let config = run.batch();
            let options = Options { colours, engine, ..Options::default() };
            let mut report = families::run(&scenario, &origin, config, &options, &|| bar.inc(1)).map_err(|e| {
                if e.is_bad_input() { anyhow::Error::new(BadInput(format!("{origin}: {e}"))) } else { e.into() }
            })?;
            bar.finish();
            let settings = json!({"replicates": scenario.replicates(), "colours": colours, "engine": engine});
            let rec = record("families", &[("scenario", Some(&scenario_path))], settings)?
                .with_seed(Seeds::One(scenario.seed()));
            output.set_run(rec.clone());
            report.run = Some(rec);
            families::write_to_dir(&report, output.staging())?;
            report_page(&output, "families")?;
            output.commit()?;
            out!("{}", families::render_summary(&report))?;
            out!("engine: {}\n", report.engine.reason)?;
            out!("wrote {}\n", families::FILES.map(|f| out.join(f).display().to_string()).join(", "))?;
            Ok(())
        }
        Command::Null {
            scenario,
            replicates,
            shard,
            out,
            force,
            like,
            condition_on_s,
            chunk,
            max_chunks,
            seed,
            threads,
            engine,
        } => {
            use seedline::null;
            let shard = null::parse_shard(&shard).map_err(|e| BadInput(format!("{e:#}")))?;
            let probe = null::NullConfig {
                replicates,
                shard,
                chunk,
                count: seedline::mutation::Count::Poisson,
                max_new_chunks: max_chunks,
                engine,
            };
            probe.check()?;
            let scenario_path = scenario;
            let (mut raw, origin) = load_raw(Some(&scenario_path))?;
            raw.seed = seed.or(raw.seed);
            let observed = match &like {
                Some(p) => Some(
                    null::load_observed(p)
                        .map_err(|e| BadInput(format!("--like (the observed.json of `seedline observe`): {e:#}")))?,
                ),
                None => None,
            };
            if let Some(o) = &observed {
                null::like(&mut raw, o, &origin).map_err(|e| BadInput(format!("{e:#}")))?;
                let seqs: u32 = o.design.iter().map(|g| g.2).sum();
                let loci = o.layout().map_or(String::new(), |l| {
                    format!(" and its {} loci ({} callable sites in all)", l.len(), l.iter().sum::<u64>())
                });
                out!(
                    "--like {}: simulating the observed design, {seqs} sequences (haploid genomes) in {} deme/time groups{loci}\n",
                    o.origin,
                    o.design.len()
                )?;
            }
            let scenario = Scenario::from_raw(raw, &origin)?;
            if scenario.mutation().is_none() {
                return Err(anyhow::Error::new(null::NullError::NoMutationModel).context(origin));
            }
            let count = match (&observed, condition_on_s) {
                (Some(o), true) => {
                    let s = o.value("segregating_sites");
                    let s = s.ok_or_else(|| BadInput("the observed data have no segregating_sites".into()))?;
                    seedline::mutation::Count::Fixed(s.round() as u64)
                }
                _ => seedline::mutation::Count::Poisson,
            };
            let exact = seedline::engine::resolve(engine, &scenario)?.kind == seedline::engine::EngineKind::Exact;
            preflight(&scenario, &origin, exact, threads, ui)?;
            null::claim_dir(&out, force.force)?;
            let cfg = null::NullConfig { count, ..probe };
            // No shard, threads or --max-chunks: a merged null has the record of an unsharded one.
            let settings =
                json!({"replicates": replicates, "chunk": chunk, "engine": engine, "condition_on_s": condition_on_s});
            let rec = record("null", &[("scenario", Some(&scenario_path)), ("like", like.as_deref())], settings)?;
            let bar = ui.progress("null", "replicates", cfg.shard_replicates());
            let batch = BatchConfig { threads, ..BatchConfig::default() };
            let report = null::run(&scenario, cfg, Some(&rec), batch, &out, &|d| bar.set(d))?;
            bar.finish();
            for r in &report.redone {
                note!("note: redone: {r}");
            }
            out!(
                "{} of {} chunks complete in {} ({} resumed, {} written now{}); shard {}/{}: {} of its {} replicates done\n",
                report.resumed_chunks + report.written_chunks,
                report.total_chunks,
                out.display(),
                report.resumed_chunks,
                report.written_chunks,
                if report.redone.is_empty() { String::new() } else { format!(", {} redone", report.redone.len()) },
                shard.0,
                shard.1,
                report.done_replicates,
                report.shard_replicates
            )?;
            out!("engine: {}\n", report.engine.reason)?;
            Ok(())
        }
        Command::Merge { dirs, out, force } => {
            let mut output = Output::begin(&out, "merge", force.force)?;
            let n = seedline::null::merge(&dirs, output.staging())?;
            let shard_files: Vec<PathBuf> = dirs.iter().flat_map(|d| seedline::null::identifying_files(d)).collect();
            let shards: Vec<(&str, Option<&Path>)> = shard_files.iter().map(|p| ("run", Some(p.as_path()))).collect();
            output.set_run(record("merge", &shards, json!({}))?);
            output.commit()?;
            out!("merged {n} replicates into {}\n", out.join("null.tsv").display())?;
            Ok(())
        }
        Command::Status { dirs, json } => {
            let status = seedline::null::status(&dirs)?;
            if json {
                out!("{}\n", serde_json::to_string_pretty(&seedline::null::status_json(&status))?)?;
            } else {
                out!("{}", seedline::null::render_status(&status))?;
            }
            match status.is_complete() {
                true => Ok(()),
                false => Err(seedline::null::Incomplete.into()),
            }
        }
        Command::Test { observed, null, out, force } => {
            use seedline::null as nl;
            let obs = nl::load_observed(&observed)
                .map_err(|e| BadInput(format!("observed data (the observed.json of `seedline observe`): {e:#}")))?;
            let table = nl::load(&null)?;
            let mut report = nl::test(&obs, &table)?;
            let mut output = Output::begin(&out, "test", force.force)?;
            // The seed is the null's: the p-values rest on its replicates.
            let null_files = nl::identifying_files(&null);
            let files: Vec<(&str, Option<&Path>)> = std::iter::once(("observed", Some(observed.as_path())))
                .chain(null_files.iter().map(|p| ("null", Some(p.as_path()))))
                .collect();
            let rec = record("test", &files, json!({}))?.with_seed(Seeds::One(table.manifest.seed));
            output.set_run(rec.clone());
            report.run = Some(rec);
            nl::write_test(&report, &table, output.staging())?;
            report_page(&output, "test")?;
            output.commit()?;
            out!("{}", nl::render_test(&report))?;
            let loci = if report.loci.is_empty() {
                String::new()
            } else {
                format!(", {}", out.join(nl::LOCI_TEST_FILE).display())
            };
            out!(
                "wrote {}, {}{loci}, {}\n",
                out.join("test.tsv").display(),
                out.join("test.json").display(),
                out.join("figures").display()
            )?;
            Ok(())
        }
        Command::Compare {
            observed,
            hypotheses,
            simulations,
            tolerance,
            statistics,
            adjust,
            threads,
            engine,
            out,
            force,
        } => {
            use seedline::abc::{self, compare};
            let obs = abc::load_observed(&observed)?;
            let files: Vec<String> = hypotheses.iter().map(|p| p.display().to_string()).collect();
            let names = abc::unique_names(&files);
            let hyps = hypotheses
                .iter()
                .zip(&names)
                .map(|(p, n)| abc::load_hypothesis(p, n))
                .collect::<Result<Vec<_>, _>>()?;
            for h in &hyps {
                preflight_hypothesis(h, threads, ui)?;
            }
            let adjust_name = adjust;
            let adjust = if adjust_name == "logistic" { compare::Adjust::Logistic } else { compare::Adjust::None };
            let settings = json!({"simulations": simulations, "tolerance": tolerance, "statistics": statistics,
                "adjust": adjust_name, "engine": engine});
            let files: Vec<(&str, Option<&Path>)> = std::iter::once(("observed", Some(observed.as_path())))
                .chain(hypotheses.iter().map(|h| ("hypothesis", Some(h.as_path()))))
                .collect();
            let rec = record("compare", &files, settings)?;
            let opts = compare::CompareOptions { simulations, tolerance, statistics, adjust, threads, engine };
            let mut output = Output::begin(&out, "compare", force.force)?;
            let bar = ui.progress("compare", "simulations", simulations.saturating_mul(hyps.len() as u64));
            let mut result = compare::run(&obs, hyps, opts, &|| bar.inc(1))?;
            bar.finish();
            result.run = Some(rec);
            if let Some(r) = result.run_record() {
                output.set_run(r);
            }
            compare::write(&result, output.staging())?;
            report_page(&output, "compare")?;
            output.commit()?;
            out!("{}", compare::render(&result))?;
            for (h, e) in result.hypotheses.iter().zip(&result.engines) {
                out!("engine for {}: {}\n", h.name, e.summary())?;
            }
            out!("wrote results to {}\n", out.display())?;
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
            like,
            threads,
            engine,
            out,
            force,
        } => {
            use seedline::abc::{self, design};
            let layout = match &like {
                Some(p) => {
                    let o = abc::load_observed(p)?;
                    let l = o.layout();
                    if l.is_none() {
                        return Err(BadInput(format!(
                            "--like {}: the file records no loci (write it with `seedline observe`)",
                            p.display()
                        ))
                        .into());
                    }
                    l
                }
                None => None,
            };
            let names = abc::unique_names(&[null.display().to_string(), alternative.display().to_string()]);
            let h0 = abc::load_hypothesis(&null, &names[0])?;
            let h1 = abc::load_hypothesis(&alternative, &names[1])?;
            for h in [&h0, &h1] {
                preflight_hypothesis(h, threads, ui)?;
            }
            let origin = designs.display().to_string();
            let text = std::fs::read_to_string(&designs)
                .map_err(|e| BadInput(format!("cannot read designs file {origin}: {e}")))?;
            let file = design::parse_designs(&text, &origin)?;
            let opts = design::DesignOptions {
                level,
                target,
                replicates,
                power_replicates,
                statistics,
                threads,
                layout,
                engine,
            };
            let settings = json!({"level": level, "target": target, "replicates": replicates,
                "power_replicates": power_replicates, "statistics": opts.statistics, "engine": engine});
            let files = [
                ("null", Some(null.as_path())),
                ("alternative", Some(alternative.as_path())),
                ("designs", Some(designs.as_path())),
                ("like", like.as_deref()),
            ];
            let rec = record("design", &files, settings)?;
            let mut output = Output::begin(&out, "design", force.force)?;
            let total = replicates.saturating_add(power_replicates).saturating_mul(file.designs.len() as u64);
            let bar = ui.progress("design", "datasets", total);
            let mut result = design::run(&h0, &h1, &file, opts, &|| bar.inc(1))?;
            bar.finish();
            result.run = Some(rec);
            if let Some(r) = result.run_record() {
                output.set_run(r);
            }
            design::write(&result, output.staging())?;
            report_page(&output, "design")?;
            output.commit()?;
            out!("{}", design::render(&result))?;
            for (d, null, alternative) in &result.engines {
                out!("engine for {d}: null {}; alternative {}\n", null.summary(), alternative.summary())?;
            }
            out!("wrote results to {}\n", out.display())?;
            Ok(())
        }
        Command::Validate { files } => validate(&files),
    }
}

/// The run record of a command: the files it reads (size and CRC-32 as read now; a directory
/// stands for the files in it) and the settings that shape its result. Every JSON the command
/// writes carries it as `"run"`.
fn record(command: &str, inputs: &[(&str, Option<&Path>)], settings: serde_json::Value) -> Result<RunRecord> {
    let mut r = RunRecord::new(command);
    for (role, path) in inputs {
        if let Some(path) = path {
            r = r.input(role, path).map_err(|e| BadInput(format!("cannot read {}: {e}", path.display())))?;
        }
    }
    if let serde_json::Value::Object(map) = settings {
        r.settings = map;
    }
    Ok(r)
}

/// [`record`] of a command on one scenario file, or on the embedded demo when none is given.
fn scenario_record(command: &str, path: Option<&Path>, settings: serde_json::Value) -> Result<RunRecord> {
    let r = record(command, &[("scenario", path)], settings)?;
    Ok(match path {
        Some(_) => r,
        None => r.embedded("scenario", "<embedded demo>", scenario::DEMO_YAML.as_bytes()),
    })
}

/// Writes `report.html` (the page of the run) into the staged output directory.
fn report_page(output: &Output, command: &str) -> Result<()> {
    let argv: Vec<String> = std::env::args().collect();
    seedline::report::html::write_report(output.staging(), output.dir(), command, &argv)?;
    Ok(())
}

/// Refusals and notes for a hypothesis at both ends of its priors (the costlier end decides).
fn preflight_hypothesis(h: &seedline::abc::Hypothesis, threads: usize, ui: Ui) -> Result<()> {
    let mut notes = Vec::new();
    for u in [0.0, 1.0] {
        let values: Vec<f64> = h.priors.iter().map(|p| p.quantile(u)).collect();
        let s = h.scenario_with(&values)?;
        // Hypotheses run on the exact engine.
        for n in seedline::cost::preflight(&s, &h.origin, true, worker_threads(threads), available_memory())? {
            if !notes.contains(&n) {
                notes.push(n);
            }
        }
        if h.priors.is_empty() {
            break;
        }
    }
    ui.notes(&notes);
    Ok(())
}

/// A file given to `validate` or `predict`, recognised by its content.
enum Input {
    /// A plain scenario (no priors), with its file name.
    Scenario(Scenario, String),
    /// A scenario with priors.
    Hypothesis(seedline::abc::Hypothesis),
    /// A designs file (top-level `designs:`), with its text.
    Designs(seedline::abc::design::DesignFile),
}

fn read_input(path: &Path) -> Result<Input> {
    let origin = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| BadInput(format!("cannot read {origin}: {e}")))?;
    let value: Option<serde_json::Value> = serde_saphyr::from_str(&text).ok();
    let top = value.as_ref().and_then(|v| v.as_object());
    if top.is_some_and(|m| m.contains_key("designs")) {
        return Ok(Input::Designs(seedline::abc::design::parse_designs(&text, &origin)?));
    }
    if value.as_ref().is_some_and(seedline::abc::prior::has_priors) {
        let name = seedline::abc::unique_names(std::slice::from_ref(&origin)).remove(0);
        return Ok(Input::Hypothesis(seedline::abc::Hypothesis::from_yaml_str(&text, &origin, &name)?));
    }
    let raw = scenario::parse_raw(&text, &origin)?;
    Ok(Input::Scenario(Scenario::from_raw(raw, &origin)?, origin))
}

/// `validate`: every file checked; designs checked against every hypothesis given with them.
fn validate(files: &[PathBuf]) -> Result<()> {
    if files.is_empty() {
        let (raw, origin) = load_raw(None)?;
        let scenario = Scenario::from_raw(raw, &origin)?;
        out!("{origin}: valid\n{scenario}\n")?;
        return Ok(());
    }
    let mut hypotheses = Vec::new();
    let mut designs = Vec::new();
    for p in files {
        match read_input(p)? {
            Input::Scenario(s, origin) => {
                out!("{origin}: valid\n{s}\n")?;
                if let Some(n) = seedline::cost::forest_note(&s) {
                    out!("note: {n}\n")?;
                }
                hypotheses.push(seedline::abc::load_hypothesis(p, &origin)?);
            }
            Input::Hypothesis(h) => {
                out!(
                    "{}: valid hypothesis with {} prior(s), checked at both ends of every prior\n",
                    h.origin,
                    h.priors.len()
                )?;
                for pr in &h.priors {
                    let kind = match pr.kind {
                        seedline::abc::PriorKind::Uniform => "uniform",
                        seedline::abc::PriorKind::LogUniform => "log_uniform",
                    };
                    out!(
                        "  {}: {kind} [{}, {}]{}\n",
                        pr.path,
                        pr.low,
                        pr.high,
                        if pr.integer { ", rounded" } else { "" }
                    )?;
                }
                let medians: Vec<f64> = h.priors.iter().map(|p| p.median()).collect();
                out!("at the median of every prior:\n{}\n", h.scenario_with(&medians)?)?;
                hypotheses.push(h);
            }
            Input::Designs(d) => designs.push((p.display().to_string(), d)),
        }
    }
    for (origin, file) in &designs {
        for d in &file.designs {
            for h in &hypotheses {
                let h = h.with_design(&d.samples, d.sites, d.loci).map_err(|e| {
                    BadInput(format!(
                        "{origin}: design `{}` with {}: {}",
                        d.name,
                        h.origin,
                        seedline::abc::full_message(&e)
                    ))
                })?;
                h.example()?;
            }
        }
        let against = if hypotheses.is_empty() {
            " (give hypothesis files with it to check its samples against them)".to_string()
        } else {
            format!(
                ", each design checked against {}",
                hypotheses.iter().map(|h| h.origin.as_str()).collect::<Vec<_>>().join(", ")
            )
        };
        out!("{origin}: valid designs file with {} design(s){against}\n", file.designs.len())?;
    }
    Ok(())
}

/// Reads the scenario file (or the embedded demo) into its raw form.
fn load_raw(path: Option<&Path>) -> Result<(RawScenario, String)> {
    let (text, origin) = match path {
        Some(p) => scenario::read_file(p)?,
        None => (scenario::DEMO_YAML.to_string(), "<embedded demo>".to_string()),
    };
    Ok((scenario::parse_raw(&text, &origin)?, origin))
}
