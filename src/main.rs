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
  seedline validate scenarios/lake-sediment.yaml

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
        /// Engine: exact, approx (continuous-time limit; refused outside its domain) or auto
        #[arg(long, default_value = "auto")]
        engine: seedline::approx::EngineChoice,
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
            let bad_input = e
                .chain()
                .any(|c| c.is::<BadInput>() || c.is::<scenario::Error>() || c.is::<seedline::approx::ApproxError>());
            ExitCode::from(if bad_input { 2 } else { 1 })
        }
    }
}

fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| c.downcast_ref::<std::io::Error>().is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe))
}

fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Simulate { scenario, replicates, seed, threads, out, engine } => {
            let (raw, origin) = load_raw(scenario.as_deref())?;
            let raw = RawScenario { replicates: replicates.or(raw.replicates), seed: seed.or(raw.seed), ..raw };
            let scenario = Scenario::from_raw(raw, &origin)?;
            let bar = progress_bar(scenario.replicates());
            let summary = seedline::report::simulate_to_dir(
                &scenario,
                &origin,
                BatchConfig { threads, ..BatchConfig::default() },
                engine,
                &out,
                &|| bar.inc(1),
            )?;
            bar.finish_and_clear();
            print!("{}", seedline::report::render_summary(&summary));
            println!("{}", summary.engine.reason);
            println!(
                "wrote {}",
                seedline::report::SIMULATE_FILES.map(|f| out.join(f).display().to_string()).join(", ")
            );
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
