//! Every integration test in one test binary, one module per file of `tests/` (test names
//! read `cli::simulate_the_embedded_demo`, `validation_engine::...`). One binary links the
//! library and its dependencies once instead of once per file: a cold `cargo test` builds in
//! a third less CPU time and a quarter of the disk (docs/performance.md, "Build time"). The
//! files stay where they were, each with its own `mod common;` / `mod pairs;` (a `#[path]`
//! module looks for those beside it).
//!
//! Run one file's tests with a filter: `cargo test --locked --test suite validation_engine::`.
//! `value_stability.rs` stays a binary of its own (`cargo test --test value_stability`, the
//! check every change of the engines runs by name). Cargo.toml sets `autotests = false`, so a
//! new file under `tests/` must be listed here: `every_test_file_is_in_the_suite` fails until it is.

// Each file declares `mod common;` (or `pairs`) for itself, as it did as a binary of its own:
// a few small copies of the helpers, and no edit of the files.
#![allow(clippy::duplicate_mod)]

#[path = "../arg_properties.rs"]
mod arg_properties;
#[path = "../bad_inputs.rs"]
mod bad_inputs;
#[path = "../cli.rs"]
mod cli;
#[path = "../cli_abc.rs"]
mod cli_abc;
#[path = "../cli_genome.rs"]
mod cli_genome;
#[path = "../cli_observe.rs"]
mod cli_observe;
#[path = "../cli_predict.rs"]
mod cli_predict;
#[path = "../figures.rs"]
mod figures;
#[path = "../null.rs"]
mod null;
#[path = "../null_status.rs"]
mod null_status;
#[path = "../observe.rs"]
mod observe;
#[path = "../observe_loci.rs"]
mod observe_loci;
#[path = "../observe_roundtrip.rs"]
mod observe_roundtrip;
#[path = "../properties.rs"]
mod properties;
#[path = "../readme_tour.rs"]
mod readme_tour;
#[path = "../report_browser.rs"]
mod report_browser;
#[path = "../robustness.rs"]
mod robustness;
#[path = "../validation_abc.rs"]
mod validation_abc;
#[path = "../validation_approx.rs"]
mod validation_approx;
#[path = "../validation_approx_arg.rs"]
mod validation_approx_arg;
#[path = "../validation_arg.rs"]
mod validation_arg;
#[path = "../validation_engine.rs"]
mod validation_engine;
#[path = "../validation_families.rs"]
mod validation_families;
#[path = "../validation_forward.rs"]
mod validation_forward;
#[path = "../validation_island_dormancy.rs"]
mod validation_island_dormancy;
#[path = "../validation_loci.rs"]
mod validation_loci;
#[path = "../validation_mutation.rs"]
mod validation_mutation;
#[path = "../validation_predictions.rs"]
mod validation_predictions;
#[path = "../validation_recombination.rs"]
mod validation_recombination;

/// A file of `tests/` that is neither listed above nor a `[[test]]` of its own would silently
/// never run (`autotests = false`).
#[test]
fn every_test_file_is_in_the_suite() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let suite = include_str!("main.rs");
    let manifest = std::fs::read_to_string(root.join("Cargo.toml")).unwrap();
    let mut missing = Vec::new();
    for entry in std::fs::read_dir(root.join("tests")).unwrap() {
        let name = entry.unwrap().file_name().into_string().unwrap();
        let Some(stem) = name.strip_suffix(".rs") else { continue };
        let listed = suite.contains(&format!("#[path = \"../{name}\"]\nmod {stem};"))
            || manifest.contains(&format!("path = \"tests/{name}\""));
        if !listed {
            missing.push(name);
        }
    }
    assert!(
        missing.is_empty(),
        "tests/ files that run nowhere: {} (list each in tests/suite/main.rs, or as a [[test]] in Cargo.toml)",
        missing.join(", ")
    );
}
