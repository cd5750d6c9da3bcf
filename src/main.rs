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
  seedline simulate scenarios/meadow.yaml --seed 11 --threads 2
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
        /// Number of replicates (overrides the file)
        #[arg(long)]
        replicates: Option<u64>,
        /// Master seed (overrides the file)
        #[arg(long)]
        seed: Option<u64>,
        /// Worker threads (0 = one per core)
        #[arg(long, default_value_t = 0)]
        threads: usize,
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
        Command::Simulate { scenario, replicates, seed, threads, out, vcf, diploid, loci_table } => {
            let (raw, origin) = load_raw(scenario.as_deref())?;
            let raw = RawScenario { replicates: replicates.or(raw.replicates), seed: seed.or(raw.seed), ..raw };
            let scenario = Scenario::from_raw(raw, &origin)?;
            let bar = progress_bar(scenario.replicates());
            let summary = seedline::report::simulate_to_dir(
                &scenario,
                &origin,
                BatchConfig { threads, ..BatchConfig::default() },
                seedline::report::SimulateOptions { vcf, diploid, loci_table },
                &out,
                &|| bar.inc(1),
            )?;
            bar.finish_and_clear();
            print!("{}", seedline::report::render_summary(&summary));
            print!("{}", seedline::report::render_comparison(&summary.comparison));
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
