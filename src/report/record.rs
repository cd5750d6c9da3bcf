//! The run record: what every JSON a command writes says about the run that made it (the
//! `"run"` object), so that a result can be traced to its inputs and rerun: seedline's
//! version, the command, the seed, the input files with their sizes and CRC-32, and the
//! settings that shape the result.
//!
//! Paths are recorded as given on the command line (relative paths stay relative), so that two
//! runs of the same command in different directories write the same record. Settings leave out
//! what cannot change a result (`--out`, `--force`, `--threads`, `--quiet`).

use serde::{Deserialize, Serialize};
use std::fs::File;
use std::io::{self, Read};
use std::path::Path;

/// One input file as read for a run.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct InputFile {
    /// What the file is to the command: the flag or argument that named it.
    pub role: String,
    /// The path as given (for a directory input, the path of one file in it).
    pub path: String,
    /// Size in bytes.
    pub bytes: u64,
    /// CRC-32 (ISO-HDLC, as in gzip) of the contents, 8 hex digits.
    pub crc32: String,
}

/// The seed(s) a run drew from.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(untagged)]
pub enum Seeds {
    /// The command draws nothing at random (`observe`, `test`, `predict`): JSON `null`.
    #[default]
    None,
    /// One master seed.
    One(u64),
    /// One seed per hypothesis (or per part of the run), by name.
    Each(Vec<NamedSeed>),
}

/// The seed of one named part of a run (a hypothesis of `compare` or `design`).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct NamedSeed {
    /// The hypothesis (or part) it seeds.
    pub name: String,
    /// The seed of its file (`seed:`), as for the other commands.
    pub seed: u64,
    /// The master key its draws come from, derived from the seed and the hypothesis' place on
    /// the command line; a decimal string, since it may exceed 2^53 (the integers a JSON
    /// reader that uses doubles keeps exactly).
    pub stream: String,
}

impl NamedSeed {
    /// The seed of `name`: its file's `seed` and the derived master key.
    pub fn new(name: &str, seed: u64, stream: u64) -> Self {
        NamedSeed { name: name.to_string(), seed, stream: stream.to_string() }
    }
}

/// The `"run"` object of every JSON output.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    /// seedline version.
    pub seedline: String,
    /// The command (`simulate`, `null`, ...).
    pub command: String,
    /// The seed(s) drawn from.
    pub seed: Seeds,
    /// The files read, in the order of the command line.
    pub inputs: Vec<InputFile>,
    /// The flags that shape the result, by name (as on the command line, without `--`).
    pub settings: serde_json::Map<String, serde_json::Value>,
}

impl RunRecord {
    /// A record of `command` with no inputs, settings or seed yet.
    pub fn new(command: &str) -> Self {
        RunRecord {
            seedline: env!("CARGO_PKG_VERSION").to_string(),
            command: command.to_string(),
            seed: Seeds::None,
            inputs: Vec::new(),
            settings: serde_json::Map::new(),
        }
    }

    /// Adds a setting.
    pub fn setting(mut self, name: &str, value: impl Serialize) -> Self {
        let v = serde_json::to_value(value).unwrap_or(serde_json::Value::Null);
        self.settings.insert(name.to_string(), v);
        self
    }

    /// Adds an input file (or every file directly in an input directory, sorted by name).
    pub fn input(mut self, role: &str, path: &Path) -> io::Result<Self> {
        if path.is_dir() {
            let mut files: Vec<_> = std::fs::read_dir(path)?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.is_file() && !is_hidden(p))
                .collect();
            files.sort();
            for f in files {
                self.inputs.push(input_file(role, &f)?);
            }
        } else {
            self.inputs.push(input_file(role, path)?);
        }
        Ok(self)
    }

    /// Adds an input that is no file, e.g. the embedded demo scenario, by name and contents.
    pub fn embedded(mut self, role: &str, name: &str, contents: &[u8]) -> Self {
        let crc32 = super::output::crc32_hex(contents);
        self.inputs.push(InputFile { role: role.into(), path: name.into(), bytes: contents.len() as u64, crc32 });
        self
    }

    /// The same record with the seed(s) the run drew from.
    pub fn with_seed(&self, seed: Seeds) -> Self {
        RunRecord { seed, ..self.clone() }
    }
}

fn is_hidden(p: &Path) -> bool {
    p.file_name().is_some_and(|n| n.to_string_lossy().starts_with('.'))
}

fn input_file(role: &str, path: &Path) -> io::Result<InputFile> {
    let (bytes, crc32) = crc32_file(path)?;
    Ok(InputFile { role: role.to_string(), path: path.display().to_string(), bytes, crc32 })
}

/// Size and CRC-32 of a file, read in pieces (a genome VCF is never held in memory).
pub fn crc32_file(path: &Path) -> io::Result<(u64, String)> {
    let mut f = File::open(path)?;
    let mut buf = vec![0u8; 1 << 20];
    let (mut crc, mut bytes) = (0u32, 0u64);
    loop {
        let n = match f.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => n,
            Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e),
        };
        crc = zlib_rs::crc32::crc32(crc, &buf[..n]);
        bytes += n as u64;
    }
    Ok((bytes, format!("{crc:08x}")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_file_read_in_pieces_has_the_crc_of_its_whole() {
        // Source: CRC-32/ISO-HDLC check value of "123456789" is cbf43926 (the catalogue of
        // parametrised CRC algorithms, Greg Cook; the gzip CRC).
        let dir = std::env::temp_dir().join(format!("seedline-record-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("check.txt");
        std::fs::write(&p, b"123456789").unwrap();
        assert_eq!(crc32_file(&p).unwrap(), (9, "cbf43926".to_string()));
        // Over the 1 MiB piece size: the running CRC equals the CRC of the whole buffer.
        let big: Vec<u8> = (0..3_000_001u32).map(|i| (i.wrapping_mul(2_654_435_761) >> 24) as u8).collect();
        std::fs::write(&p, &big).unwrap();
        let whole = format!("{:08x}", zlib_rs::crc32::crc32(0, &big));
        assert_eq!(crc32_file(&p).unwrap(), (big.len() as u64, whole));
        let r = RunRecord::new("test").input("data", &dir).unwrap().setting("level", 0.05);
        assert_eq!(r.inputs.len(), 1);
        assert_eq!(r.inputs[0].role, "data");
        let j = serde_json::to_value(r.with_seed(Seeds::One(7))).unwrap();
        assert_eq!(j["seed"], 7);
        assert_eq!(j["settings"]["level"], 0.05);
        assert_eq!(serde_json::to_value(Seeds::None).unwrap(), serde_json::Value::Null);
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
