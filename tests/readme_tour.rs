//! The tour runs as written: every `seedline ...` line of a `sh` block in README.md (and the
//! `cargo run ... -- ARGS` lines, as `seedline ARGS`), then every example line of the
//! `--help` texts, run verbatim by `sh` with the built binary first on PATH, in a fresh
//! directory holding links to the checkout's `examples/` and `scenarios/`. A command that
//! exits non-zero fails the test with its output.

use std::path::{Path, PathBuf};
use std::process::Command;

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

/// The command lines of the `sh` blocks of a Markdown text that run seedline.
fn readme_commands(markdown: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut in_sh = false;
    for line in markdown.lines() {
        let t = line.trim();
        if t.starts_with("```") {
            in_sh = !in_sh && t == "```sh";
            continue;
        }
        if !in_sh {
            continue;
        }
        if t.starts_with("seedline ") {
            out.push(t.to_string());
        } else if let Some(args) = t.strip_prefix("cargo run --release --locked -- ") {
            out.push(format!("seedline {args}"));
        }
    }
    out
}

/// The example lines of a `--help` text: `  seedline ...`, cut where two spaces start a comment.
fn help_examples(help: &str) -> Vec<String> {
    help.lines()
        .filter(|l| l.starts_with("  seedline "))
        .map(|l| l.trim().split("  ").next().unwrap_or("").trim().to_string())
        .collect()
}

fn run_help(bin: &Path, args: &[&str]) -> String {
    let o = Command::new(bin).args(args).output().expect("the binary runs");
    assert!(o.status.success(), "seedline {args:?} failed");
    String::from_utf8(o.stdout).unwrap()
}

/// Every subcommand named in the `Commands:` section of the top-level help.
fn subcommands(help: &str) -> Vec<String> {
    help.lines()
        .skip_while(|l| !l.starts_with("Commands:"))
        .skip(1)
        .take_while(|l| l.starts_with("  "))
        .filter_map(|l| l.split_whitespace().next())
        .filter(|c| *c != "help")
        .map(String::from)
        .collect()
}

fn run_all(dir: &Path, bin_dir: &Path, commands: &[String]) {
    let path = format!("{}:{}", bin_dir.display(), std::env::var("PATH").unwrap_or_default());
    for c in commands {
        let o = Command::new("sh").arg("-c").arg(c).current_dir(dir).env("PATH", &path).output().expect("sh runs");
        assert!(
            o.status.success(),
            "`{c}` exited with {:?}\n--- stdout\n{}\n--- stderr\n{}",
            o.status.code(),
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        );
    }
}

#[test]
fn readme_tour_and_help_examples_run_verbatim() {
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_seedline"));
    let bin_dir = bin.parent().unwrap().to_path_buf();
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("readme-tour-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    for d in ["examples", "scenarios"] {
        std::os::unix::fs::symlink(Path::new(ROOT).join(d), dir.join(d)).unwrap();
    }

    let readme = std::fs::read_to_string(Path::new(ROOT).join("README.md")).unwrap();
    let tour = readme_commands(&readme);
    for must in ["observe examples/", "null ", "test ", "compare ", "design ", "families ", "simulate "] {
        assert!(tour.iter().any(|c| c.contains(must)), "the README tour has no `{must}` command: {tour:#?}");
    }
    run_all(&dir, &bin_dir, &tour);
    // Every JSON the tour wrote names its run: version, command, seed, inputs, settings.
    let checked = check_run_records(&dir, &dir);
    for must in
        ["summary.json", "observed.json", "null.json", "test.json", "compare.json", "design.json", "families.json"]
    {
        assert!(checked.iter().any(|f| f.ends_with(must)), "the tour wrote no {must} (checked: {checked:?})");
    }
    // test.json names the null its p-values are under: the null run's seed and scenario file.
    let read = |p: &str| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(dir.join(p)).unwrap()).unwrap()
    };
    let (t, n) = (read("test/test.json"), read("null/h0/null.json"));
    assert_eq!((&t["run"]["seed"], &t["null"]["seed"]), (&n["seed"], &n["seed"]));
    assert_eq!(t["null"]["inputs"][0], n["run"]["inputs"][0]);
    assert_eq!(t["null"]["scenario_name"], n["scenario"]["name"]);

    let top = run_help(&bin, &["--help"]);
    let mut examples = help_examples(&top);
    for sub in subcommands(&top) {
        for e in help_examples(&run_help(&bin, &[&sub, "--help"])) {
            if !examples.contains(&e) {
                examples.push(e);
            }
        }
    }
    assert!(examples.len() >= 10, "too few --help examples found: {examples:#?}");
    run_all(&dir, &bin_dir, &examples);

    // What the tour promises is there.
    for f in ["observed/observed.json", "null/like", "test/test.json", "abc/compare.json", "power/design.json"] {
        assert!(dir.join(f).exists(), "{f} was not written");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// CRC-32 (ISO-HDLC: reflected polynomial 0xEDB88320, initial and final XOR 0xFFFFFFFF), bit by
/// bit as the standard defines it; independent of the table-driven code seedline uses.
// Source: ISO 3309 / ITU-T V.42 CRC-32, as used by gzip (RFC 1952, section 8).
fn crc32_reference(bytes: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in bytes {
        crc ^= u32::from(b);
        for _ in 0..8 {
            crc = if crc & 1 == 1 { (crc >> 1) ^ 0xEDB8_8320 } else { crc >> 1 };
        }
    }
    !crc
}

/// Checks the `"run"` object of every JSON file under `root` (symbolic links not followed;
/// hidden files skipped): the version, the command, a seed (null only for commands that draw
/// nothing), the settings, and every input's size and CRC-32 as read now from `cwd`. Returns
/// the files checked.
fn check_run_records(root: &Path, cwd: &Path) -> Vec<PathBuf> {
    let mut checked = Vec::new();
    let mut stack = vec![root.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            let meta = std::fs::symlink_metadata(&p).unwrap();
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            if meta.is_dir() {
                stack.push(p);
            } else if meta.is_file() && name.ends_with(".json") && !name.starts_with('.') {
                let j: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
                let run = &j["run"];
                assert_eq!(run["seedline"], env!("CARGO_PKG_VERSION"), "{}: no run record: {j:#}", p.display());
                let command = run["command"].as_str().unwrap_or_else(|| panic!("{}: no command", p.display()));
                let seeded = !["observe", "merge", "predict"].contains(&command);
                assert!(run.get("seed").is_some(), "{}: no seed", p.display());
                assert_eq!(run["seed"].is_null(), !seeded, "{}: seed {} for {command}", p.display(), run["seed"]);
                assert!(run["settings"].is_object(), "{}: no settings", p.display());
                for i in run["inputs"].as_array().unwrap() {
                    let f = match i["path"].as_str().unwrap() {
                        // The embedded demo is scenarios/demo.yaml, compiled in.
                        "<embedded demo>" => Path::new(ROOT).join("scenarios/demo.yaml"),
                        path => cwd.join(path),
                    };
                    let bytes = std::fs::read(&f).unwrap_or_else(|e| panic!("{}: input {f:?}: {e}", p.display()));
                    assert_eq!(i["bytes"], bytes.len() as u64, "{}: size of {f:?}", p.display());
                    let crc = format!("{:08x}", crc32_reference(&bytes));
                    assert_eq!(i["crc32"], crc.as_str(), "{}: CRC-32 of {f:?}", p.display());
                }
                checked.push(p);
            }
        }
    }
    checked
}

#[test]
fn the_reference_crc_has_its_check_value() {
    // Source: CRC-32/ISO-HDLC check value of "123456789" is 0xCBF43926 (catalogue of
    // parametrised CRC algorithms, G. Cook).
    assert_eq!(crc32_reference(b"123456789"), 0xCBF4_3926);
}

#[test]
fn extraction_finds_commands_and_cuts_comments() {
    let md = "text\n```sh\nseedline a b   # note\ncargo run --release --locked -- simulate --out x\ncargo test\n```\n```yaml\nseedline: no\n```\n";
    assert_eq!(readme_commands(md), ["seedline a b   # note", "seedline simulate --out x"]);
    let help = "Examples:\n  seedline simulate                 the demo\n  seedline null x --shard 0/2    (one of 2)\nExit codes";
    assert_eq!(help_examples(help), ["seedline simulate", "seedline null x --shard 0/2"]);
}
