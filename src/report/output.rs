//! Output directories: one run's whole output set, or nothing.
//!
//! A command that writes into `--out DIR` calls [`Output::begin`] before it computes
//! anything: that checks that `DIR` can be written and that it holds nothing seedline did
//! not write (or the output of another command), unless `--force`, and opens a staging
//! directory `DIR/.seedline-staging-<pid>`. The command writes every file into
//! [`Output::staging`], then [`Output::commit`] swaps the set in: the files of the previous
//! run (listed in its manifest) that the new run does not write are removed, each new file
//! is renamed over its final name, and the manifest [`MANIFEST`] (command, version, and every
//! file with its size and CRC-32) is written last. Files seedline did not write are never
//! deleted. A run that is killed leaves the previous run untouched and a staging directory
//! that the next run into `DIR` removes; a kill during the swap itself is recorded by a
//! journal, so that the next run still knows which files were seedline's.
//!
//! `null` writes in place (its chunks are its resume state) and only calls [`claim`].

use serde::{Deserialize, Serialize};
use std::collections::BTreeSet;
use std::fs;
use std::io;
use std::path::{Path, PathBuf};

/// Name of the manifest of a run directory.
pub const MANIFEST: &str = "seedline-manifest.json";
/// Journal of a swap in progress: the files being moved in.
const JOURNAL: &str = ".seedline-commit.json";
/// Prefix of staging directories.
const STAGING_PREFIX: &str = ".seedline-staging-";

/// Why an output directory could not be used or written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum OutputError {
    /// An operation on a file or directory failed.
    #[error("cannot {operation} {}: {source}", path.display())]
    Io {
        /// What was being done, e.g. `write`, `create directory`.
        operation: &'static str,
        /// The file or directory.
        path: PathBuf,
        /// Cause.
        source: io::Error,
    },
    /// `--out` cannot be written (checked before any work).
    // The cause is in the message (not a chained source): it is printed once.
    #[error("--out {}: cannot {operation} {}: {cause}", dir.display(), path.display())]
    Unwritable {
        /// The output directory.
        dir: PathBuf,
        /// What failed.
        operation: &'static str,
        /// The path involved.
        path: PathBuf,
        /// Cause.
        cause: io::Error,
    },
    /// The directory holds files that seedline did not write.
    #[error(
        "--out {} already holds files that seedline did not write ({examples}): choose an empty or new directory, or add --force to write beside them (they are kept; same-named ones are replaced)",
        dir.display()
    )]
    Foreign {
        /// The output directory.
        dir: PathBuf,
        /// A few of the files, comma-separated.
        examples: String,
    },
    /// The directory holds the output of another command.
    #[error(
        "--out {} holds the output of `seedline {previous}`: choose another directory, or add --force to replace it",
        dir.display()
    )]
    OtherCommand {
        /// The output directory.
        dir: PathBuf,
        /// The command that wrote it.
        previous: String,
    },
}

impl OutputError {
    /// Whether the error is the user's choice of `--out` (exit code 2) rather than a failure
    /// while writing.
    pub fn is_bad_input(&self) -> bool {
        !matches!(self, OutputError::Io { .. })
    }

    fn io(operation: &'static str, path: &Path) -> impl FnOnce(io::Error) -> OutputError {
        let path = path.to_path_buf();
        move |source| OutputError::Io { operation, path, source }
    }
}

/// One file of a run.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct FileEntry {
    /// Path relative to the run directory, `/`-separated.
    pub name: String,
    /// Size in bytes.
    pub bytes: u64,
    /// CRC-32 (ISO-HDLC, as in gzip) of the contents, 8 hex digits.
    pub crc32: String,
}

/// The manifest [`MANIFEST`] of a run directory.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunManifest {
    /// The command that wrote the directory.
    pub command: String,
    /// seedline version.
    pub seedline: String,
    /// Every file written, sorted by name.
    pub files: Vec<FileEntry>,
    /// The run that wrote them: seed, inputs with checksums, settings.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub run: Option<super::record::RunRecord>,
}

#[derive(Debug, Default, Serialize, Deserialize)]
struct Journal {
    files: Vec<String>,
}

/// CRC-32 of `bytes` as 8 hex digits.
pub fn crc32_hex(bytes: &[u8]) -> String {
    format!("{:08x}", zlib_rs::crc32::crc32(0, bytes))
}

/// What [`claim`] found in the directory.
#[derive(Debug, Default)]
pub struct Claimed {
    /// Files written by earlier seedline runs (from the manifest and any interrupted swap).
    pub ours: BTreeSet<String>,
    /// The command of the previous run, when there was one.
    pub previous: Option<String>,
}

/// Checks that `dir` may receive the output of `command`, creating it if needed, and removes
/// what interrupted runs left (staging directories, temporary files).
///
/// Refused, unless `force`: a directory holding files that neither a seedline manifest nor
/// `own` (the command's own layout, e.g. a null run's chunks) accounts for, and a directory
/// holding the output of another command.
pub fn claim(dir: &Path, command: &str, force: bool, own: &dyn Fn(&str) -> bool) -> Result<Claimed, OutputError> {
    let unwritable = |operation: &'static str, path: &Path| {
        let (dir, path) = (dir.to_path_buf(), path.to_path_buf());
        move |cause| OutputError::Unwritable { dir, operation, path, cause }
    };
    if dir.exists() && !dir.is_dir() {
        let e = io::Error::new(io::ErrorKind::AlreadyExists, "it exists and is not a directory");
        return Err(unwritable("use as a directory", dir)(e));
    }
    fs::create_dir_all(dir).map_err(unwritable("create directory", dir))?;
    for entry in fs::read_dir(dir).map_err(unwritable("list", dir))? {
        let entry = entry.map_err(unwritable("list", dir))?;
        let name = entry.file_name().to_string_lossy().into_owned();
        let path = entry.path();
        if name.starts_with(STAGING_PREFIX) && name != staging_name() {
            fs::remove_dir_all(&path).map_err(unwritable("remove the leftover staging directory", &path))?;
        } else if is_temporary(&name) {
            fs::remove_file(&path).map_err(unwritable("remove the leftover temporary file", &path))?;
        }
    }
    let mut claimed = Claimed::default();
    let manifest = dir.join(MANIFEST);
    if manifest.exists() {
        let m = read_manifest(&manifest)?;
        claimed.ours.extend(m.files.into_iter().map(|f| f.name));
        claimed.previous = Some(m.command);
    }
    let journal = dir.join(JOURNAL);
    if journal.exists() {
        let text = fs::read_to_string(&journal).map_err(OutputError::io("read", &journal))?;
        // A torn journal lists nothing: its files then count as foreign, the safe side.
        let j: Journal = serde_json::from_str(&text).unwrap_or_default();
        claimed.ours.extend(j.files);
    }
    if force {
        return Ok(claimed);
    }
    let mut foreign = Vec::new();
    let is_ours = |f: &str| f == MANIFEST || f == JOURNAL || claimed.ours.contains(f) || own(f);
    find_foreign(dir, "", &is_ours, &mut foreign).map_err(unwritable("list", dir))?;
    if !foreign.is_empty() {
        let more = if foreign.len() > 3 { ", ..." } else { "" };
        let examples = format!("{}{more}", foreign.iter().take(3).cloned().collect::<Vec<_>>().join(", "));
        return Err(OutputError::Foreign { dir: dir.to_path_buf(), examples });
    }
    if let Some(previous) = &claimed.previous
        && previous != command
    {
        return Err(OutputError::OtherCommand { dir: dir.to_path_buf(), previous: previous.clone() });
    }
    Ok(claimed)
}

fn read_manifest(path: &Path) -> Result<RunManifest, OutputError> {
    let text = fs::read_to_string(path).map_err(OutputError::io("read", path))?;
    serde_json::from_str(&text).map_err(|e| OutputError::Io {
        operation: "read the manifest",
        path: path.to_path_buf(),
        source: io::Error::new(io::ErrorKind::InvalidData, e),
    })
}

/// A temporary file of [`super::write_atomic`] or [`super::StreamFile`]: `.<name>.<pid>.tmp`.
fn is_temporary(name: &str) -> bool {
    let Some(stem) = name.strip_prefix('.').and_then(|n| n.strip_suffix(".tmp")) else { return false };
    stem.rsplit_once('.').is_some_and(|(_, pid)| !pid.is_empty() && pid.bytes().all(|b| b.is_ascii_digit()))
}

fn staging_name() -> String {
    format!("{STAGING_PREFIX}{}", std::process::id())
}

/// Files below `dir` that are not ours, stopping after four (a mistaken `--out ~` must not
/// walk a whole home directory).
fn find_foreign(dir: &Path, prefix: &str, ours: &dyn Fn(&str) -> bool, out: &mut Vec<String>) -> io::Result<()> {
    for entry in fs::read_dir(dir)? {
        if out.len() > 3 {
            return Ok(());
        }
        let entry = entry?;
        let name = entry.file_name().to_string_lossy().into_owned();
        if prefix.is_empty() && name.starts_with(STAGING_PREFIX) {
            continue;
        }
        let rel = if prefix.is_empty() { name } else { format!("{prefix}/{name}") };
        if entry.file_type()?.is_dir() {
            find_foreign(&entry.path(), &rel, ours, out)?;
        } else if !ours(&rel) {
            out.push(rel);
        }
    }
    Ok(())
}

/// Every file below `dir` (not the staging directories), as `/`-separated relative paths.
fn list_files(dir: &Path, prefix: &str, out: &mut Vec<String>) -> io::Result<()> {
    for entry in fs::read_dir(dir)? {
        let entry = entry?;
        let name = entry.file_name().to_string_lossy().into_owned();
        if prefix.is_empty() && name.starts_with(STAGING_PREFIX) {
            continue;
        }
        let rel = if prefix.is_empty() { name } else { format!("{prefix}/{name}") };
        if entry.file_type()?.is_dir() {
            list_files(&entry.path(), &rel, out)?;
        } else {
            out.push(rel);
        }
    }
    Ok(())
}

/// A run's output set on its way into a directory (see the module documentation).
#[derive(Debug)]
pub struct Output {
    dir: PathBuf,
    staging: PathBuf,
    command: String,
    previous: BTreeSet<String>,
    committed: bool,
    created: bool,
    run: Option<super::record::RunRecord>,
}

impl Output {
    /// Claims `dir` for `command` ([`claim`]; `force` lets it write beside files seedline
    /// did not write, or replace another command's output) and opens the staging directory,
    /// proving that the directory can be written before any work is done.
    pub fn begin(dir: &Path, command: &str, force: bool) -> Result<Output, OutputError> {
        let created = !dir.exists();
        let claimed = claim(dir, command, force, &|_| false)?;
        let staging = dir.join(staging_name());
        let unwritable = |operation: &'static str, path: &Path| {
            let (dir, path) = (dir.to_path_buf(), path.to_path_buf());
            move |cause| OutputError::Unwritable { dir, operation, path, cause }
        };
        fs::create_dir_all(&staging).map_err(unwritable("create directory", &staging))?;
        let probe = staging.join(".probe");
        fs::write(&probe, b"probe").map_err(unwritable("write", &probe))?;
        fs::remove_file(&probe).map_err(unwritable("remove", &probe))?;
        Ok(Output {
            dir: dir.to_path_buf(),
            staging,
            command: command.to_string(),
            previous: claimed.ours,
            committed: false,
            created,
            run: None,
        })
    }

    /// The directory to write every output file into.
    pub fn staging(&self) -> &Path {
        &self.staging
    }

    /// The final directory.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// Records the run in the manifest written by [`Output::commit`].
    pub fn set_run(&mut self, run: super::record::RunRecord) {
        self.run = Some(run);
    }

    /// Swaps the staged files in (see the module documentation); returns the manifest.
    pub fn commit(mut self) -> Result<RunManifest, OutputError> {
        let mut names = Vec::new();
        list_files(&self.staging, "", &mut names).map_err(OutputError::io("list", &self.staging))?;
        names.retain(|n| !is_temporary(n.rsplit('/').next().unwrap_or(n)));
        names.sort();
        let mut files = Vec::with_capacity(names.len());
        for name in &names {
            let p = self.staging.join(name);
            let bytes = fs::read(&p).map_err(OutputError::io("read", &p))?;
            files.push(FileEntry { name: name.clone(), bytes: bytes.len() as u64, crc32: crc32_hex(&bytes) });
        }
        let journal = self.dir.join(JOURNAL);
        let all: Vec<String> = names.iter().chain(&self.previous).cloned().collect();
        let text = serde_json::to_string(&Journal { files: all }).expect("a list of names serialises");
        super::write_atomic(&journal, text.as_bytes()).map_err(OutputError::io("write", &journal))?;
        let new: BTreeSet<&String> = names.iter().collect();
        for old in self.previous.iter().filter(|o| !new.contains(o)) {
            let p = self.dir.join(old);
            match fs::remove_file(&p) {
                Ok(()) => remove_empty_parents(&self.dir, old),
                Err(e) if e.kind() == io::ErrorKind::NotFound => {}
                Err(e) => return Err(OutputError::Io { operation: "remove the earlier run's", path: p, source: e }),
            }
        }
        for name in &names {
            let (from, to) = (self.staging.join(name), self.dir.join(name));
            if let Some(parent) = to.parent() {
                fs::create_dir_all(parent).map_err(OutputError::io("create directory", parent))?;
            }
            fs::rename(&from, &to).map_err(OutputError::io("move the finished file into", &to))?;
        }
        let manifest = RunManifest {
            command: self.command.clone(),
            seedline: env!("CARGO_PKG_VERSION").into(),
            files,
            run: self.run.take(),
        };
        let mpath = self.dir.join(MANIFEST);
        let text = serde_json::to_string_pretty(&manifest).expect("the manifest serialises");
        super::write_atomic(&mpath, text.as_bytes()).map_err(OutputError::io("write", &mpath))?;
        fs::remove_file(&journal).map_err(OutputError::io("remove", &journal))?;
        fs::remove_dir_all(&self.staging).map_err(OutputError::io("remove", &self.staging))?;
        self.committed = true;
        Ok(manifest)
    }
}

impl Drop for Output {
    fn drop(&mut self) {
        if !self.committed {
            let _ = fs::remove_dir_all(&self.staging);
            if self.created {
                // Only succeeds when empty: a failed run leaves no trace of the directory.
                let _ = fs::remove_dir(&self.dir);
            }
        }
    }
}

fn remove_empty_parents(dir: &Path, rel: &str) {
    let mut p = Path::new(rel).parent();
    while let Some(parent) = p.filter(|p| !p.as_os_str().is_empty()) {
        if fs::remove_dir(dir.join(parent)).is_err() {
            break;
        }
        p = parent.parent();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tempdir(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("seedline-output-{name}-{}", std::process::id()));
        let _ = fs::remove_dir_all(&d);
        d
    }

    fn run(dir: &Path, command: &str, force: bool, files: &[(&str, &str)]) -> Result<RunManifest, OutputError> {
        let out = Output::begin(dir, command, force)?;
        for (name, text) in files {
            let p = out.staging().join(name);
            fs::create_dir_all(p.parent().unwrap()).unwrap();
            fs::write(p, text).unwrap();
        }
        out.commit()
    }

    fn listing(dir: &Path) -> Vec<String> {
        let mut v = Vec::new();
        list_files(dir, "", &mut v).unwrap();
        v.sort();
        v
    }

    #[test]
    fn a_rerun_replaces_the_whole_set_and_keeps_nothing_stale() {
        let d = tempdir("rerun");
        let m = run(&d, "simulate", false, &[("a.tsv", "1"), ("vcf/r_0.vcf", "x"), ("vcf/r_1.vcf", "y")]).unwrap();
        // Source: CRC-32 check value of "123456789" is cbf43926 (ISO-HDLC, as in gzip).
        assert_eq!(crc32_hex(b"123456789"), "cbf43926");
        assert_eq!(m.files.len(), 3);
        run(&d, "simulate", false, &[("a.tsv", "2"), ("vcf/r_0.vcf", "z")]).unwrap();
        assert_eq!(listing(&d), ["a.tsv", MANIFEST, "vcf/r_0.vcf"]);
        assert_eq!(fs::read_to_string(d.join("a.tsv")).unwrap(), "2");
        run(&d, "simulate", false, &[("a.tsv", "3")]).unwrap();
        assert!(!d.join("vcf").exists(), "an emptied directory of ours is removed");
        fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn foreign_files_and_other_commands_are_refused_unless_forced_and_never_deleted() {
        let d = tempdir("foreign");
        fs::create_dir_all(&d).unwrap();
        fs::write(d.join("notes.txt"), "mine").unwrap();
        let e = run(&d, "compare", false, &[("compare.json", "{}")]).unwrap_err();
        assert!(matches!(e, OutputError::Foreign { .. }) && e.to_string().contains("notes.txt"), "{e}");
        assert!(e.is_bad_input());
        run(&d, "compare", true, &[("compare.json", "{}")]).unwrap();
        run(&d, "compare", false, &[("compare.json", "{}")]).unwrap_err();
        fs::remove_file(d.join("notes.txt")).unwrap();
        run(&d, "compare", false, &[("compare.json", "{}")]).unwrap();
        let e = run(&d, "design", false, &[("design.json", "{}")]).unwrap_err();
        assert!(matches!(e, OutputError::OtherCommand { .. }), "{e}");
        fs::write(d.join("notes.txt"), "mine").unwrap();
        run(&d, "design", true, &[("design.json", "{}")]).unwrap();
        assert_eq!(listing(&d), ["design.json", "notes.txt", MANIFEST]);
        fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn leftovers_of_a_killed_run_are_cleaned_and_the_previous_run_kept() {
        let d = tempdir("killed");
        run(&d, "observe", false, &[("observed.json", "old")]).unwrap();
        // A killed run: its staging directory and a temporary file of an older layout.
        fs::create_dir_all(d.join(".seedline-staging-999999999/sub")).unwrap();
        fs::write(d.join(".seedline-staging-999999999/sub/observed.json"), "half").unwrap();
        fs::write(d.join(".observed.tsv.4242.tmp"), "half").unwrap();
        assert_eq!(fs::read_to_string(d.join("observed.json")).unwrap(), "old");
        run(&d, "observe", false, &[("observed.json", "new")]).unwrap();
        assert_eq!(listing(&d), ["observed.json", MANIFEST]);
        // A swap interrupted after its journal: the journal's files count as ours.
        fs::write(d.join("half_moved.tsv"), "x").unwrap();
        fs::write(d.join(JOURNAL), r#"{"files":["half_moved.tsv"]}"#).unwrap();
        run(&d, "observe", false, &[("observed.json", "newer")]).unwrap();
        assert_eq!(listing(&d), ["observed.json", MANIFEST]);
        fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn an_unwritable_path_is_refused_before_any_work() {
        let d = tempdir("unwritable");
        fs::create_dir_all(&d).unwrap();
        fs::write(d.join("file"), "x").unwrap();
        let e = Output::begin(&d.join("file"), "simulate", false).unwrap_err();
        assert!(e.is_bad_input() && e.to_string().contains("file"), "{e}");
        let e = Output::begin(&d.join("file/sub"), "simulate", false).unwrap_err();
        assert!(matches!(e, OutputError::Unwritable { .. }), "{e}");
        fs::remove_dir_all(&d).unwrap();
    }
}
