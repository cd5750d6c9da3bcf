//! The sample map: which VCF sample belongs to which deme, when it was sampled, its ploidy.
//!
//! A tab-separated file with a header line naming the columns (any order):
//!
//! ```text
//! sample  deme  [generations_ago]  [ploidy]
//! ```
//!
//! `sample` and `deme` are required; `generations_ago` is a non-negative integer (default
//! 0, a contemporary sample); `ploidy` is 1 or 2 (default: the number of alleles in the
//! sample's first GT). Blank lines and lines starting with `#` are ignored. Demes are
//! numbered in order of first appearance.

use std::io::BufRead;

/// One sample of the map.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MapEntry {
    /// Sample name as in the VCF header.
    pub sample: String,
    /// Index into [`SampleMap::demes`].
    pub deme: usize,
    /// Generations before the present at which the sample was taken.
    pub generations_ago: u64,
    /// Declared ploidy (1 or 2), if given.
    pub ploidy: Option<u8>,
    /// 1-based line of the map file.
    pub line: usize,
}

/// A parsed sample map.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct SampleMap {
    /// Deme names in order of first appearance.
    pub demes: Vec<String>,
    /// Samples in file order.
    pub entries: Vec<MapEntry>,
}

/// What is wrong with one line of the map.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum MapError {
    /// The header lacks a required column.
    #[error("header has no `{column}` column; required columns: sample, deme (optional: generations_ago, ploidy)")]
    MissingColumn {
        /// The missing column.
        column: &'static str,
    },
    /// A header column that is not known.
    #[error("unknown column `{column}`; allowed: sample, deme, generations_ago, ploidy")]
    UnknownColumn {
        /// The column name given.
        column: String,
    },
    /// A header column given twice.
    #[error("column `{column}` appears twice in the header")]
    DuplicateColumn {
        /// The column name.
        column: String,
    },
    /// A row with the wrong number of fields.
    #[error("{got} tab-separated fields, but the header has {expected}")]
    FieldCount {
        /// Header columns.
        expected: usize,
        /// Fields on this line.
        got: usize,
    },
    /// An empty or malformed value.
    #[error("column {column}: `{value}` is not allowed; {allowed}")]
    BadValue {
        /// The column.
        column: &'static str,
        /// The text found.
        value: String,
        /// What is allowed.
        allowed: &'static str,
    },
    /// A sample listed twice.
    #[error("column sample: `{sample}` is listed twice (first on line {first_line})")]
    DuplicateSample {
        /// The sample name.
        sample: String,
        /// Line of its first appearance.
        first_line: usize,
    },
    /// No header line, or no sample line.
    #[error("the map lists no samples; expected a header line `sample<TAB>deme` and one line per sample")]
    Empty,
    /// Reading failed.
    #[error("cannot read: {0}")]
    Io(String),
}

/// A map error with the line it was found on (0 when it concerns the whole file).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("line {line}")]
pub struct MapLineError {
    /// 1-based line number.
    pub line: usize,
    /// What is wrong.
    #[source]
    pub kind: MapError,
}

#[derive(Clone, Copy, PartialEq)]
enum Col {
    Sample,
    Deme,
    Generations,
    Ploidy,
}

fn parse_header(line: &str) -> Result<Vec<Col>, MapError> {
    let mut cols = Vec::new();
    for name in line.split('\t').map(str::trim) {
        let c = match name {
            "sample" => Col::Sample,
            "deme" => Col::Deme,
            "generations_ago" => Col::Generations,
            "ploidy" => Col::Ploidy,
            other => return Err(MapError::UnknownColumn { column: other.to_string() }),
        };
        if cols.contains(&c) {
            return Err(MapError::DuplicateColumn { column: name.to_string() });
        }
        cols.push(c);
    }
    for (c, column) in [(Col::Sample, "sample"), (Col::Deme, "deme")] {
        if !cols.contains(&c) {
            return Err(MapError::MissingColumn { column });
        }
    }
    Ok(cols)
}

fn parse_name(column: &'static str, value: &str) -> Result<String, MapError> {
    // Deme names become column names (pi_<deme>), so no blanks inside.
    if value.is_empty() || value.chars().any(char::is_whitespace) {
        return Err(MapError::BadValue {
            column,
            value: value.to_string(),
            allowed: "a non-empty name without spaces",
        });
    }
    Ok(value.to_string())
}

fn parse_generations(value: &str) -> Result<u64, MapError> {
    value.parse().map_err(|_| MapError::BadValue {
        column: "generations_ago",
        value: value.to_string(),
        allowed: "a whole number of generations >= 0",
    })
}

fn parse_ploidy(value: &str) -> Result<u8, MapError> {
    match value {
        "1" => Ok(1),
        "2" => Ok(2),
        _ => Err(MapError::BadValue { column: "ploidy", value: value.to_string(), allowed: "1 or 2" }),
    }
}

impl SampleMap {
    /// Reads a map; errors carry the 1-based line.
    pub fn read<R: BufRead>(reader: R) -> Result<Self, MapLineError> {
        let mut map = SampleMap::default();
        let mut header: Option<Vec<Col>> = None;
        let mut first_line = std::collections::HashMap::new();
        for (i, line) in reader.lines().enumerate() {
            let line_no = i + 1;
            let at = |kind| MapLineError { line: line_no, kind };
            let line = line.map_err(|e| at(MapError::Io(e.to_string())))?;
            let line = line.trim_end_matches('\r');
            if line.trim().is_empty() || line.starts_with('#') {
                continue;
            }
            let Some(cols) = &header else {
                header = Some(parse_header(line).map_err(at)?);
                continue;
            };
            let fields: Vec<&str> = line.split('\t').map(str::trim).collect();
            if fields.len() != cols.len() {
                return Err(at(MapError::FieldCount { expected: cols.len(), got: fields.len() }));
            }
            let mut entry =
                MapEntry { sample: String::new(), deme: 0, generations_ago: 0, ploidy: None, line: line_no };
            for (c, v) in cols.iter().zip(fields) {
                match c {
                    Col::Sample => entry.sample = parse_name("sample", v).map_err(at)?,
                    Col::Deme => {
                        let d = parse_name("deme", v).map_err(at)?;
                        entry.deme = map.demes.iter().position(|x| *x == d).unwrap_or_else(|| {
                            map.demes.push(d);
                            map.demes.len() - 1
                        });
                    }
                    Col::Generations => entry.generations_ago = parse_generations(v).map_err(at)?,
                    Col::Ploidy => entry.ploidy = Some(parse_ploidy(v).map_err(at)?),
                }
            }
            if let Some(&first) = first_line.get(&entry.sample) {
                return Err(at(MapError::DuplicateSample { sample: entry.sample, first_line: first }));
            }
            first_line.insert(entry.sample.clone(), line_no);
            map.entries.push(entry);
        }
        if map.entries.is_empty() {
            return Err(MapLineError { line: 0, kind: MapError::Empty });
        }
        Ok(map)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_columns_in_any_order_with_defaults() {
        let text = "# comment\ndeme\tsample\tploidy\npond\ts1\t2\nlake\ts2\t1\npond\ts3\t2\n";
        let m = SampleMap::read(text.as_bytes()).unwrap();
        assert_eq!(m.demes, ["pond", "lake"]);
        assert_eq!(
            m.entries[1],
            MapEntry { sample: "s2".into(), deme: 1, generations_ago: 0, ploidy: Some(1), line: 4 }
        );
        assert_eq!(m.entries[2].deme, 0);
    }

    #[test]
    fn errors_name_line_and_column() {
        let e = SampleMap::read("sample\tdeme\tgenerations_ago\na\tx\t-3\n".as_bytes()).unwrap_err();
        assert_eq!(e.line, 2);
        assert!(matches!(e.kind, MapError::BadValue { column: "generations_ago", .. }));
        let e = SampleMap::read("sample\tpopulation\n".as_bytes()).unwrap_err();
        assert_eq!((e.line, e.kind.to_string().contains("population")), (1, true));
        let e = SampleMap::read("sample\tdeme\na\tx\na\ty\n".as_bytes()).unwrap_err();
        assert_eq!(e.kind, MapError::DuplicateSample { sample: "a".into(), first_line: 2 });
        let e = SampleMap::read("sample\tdeme\na\n".as_bytes()).unwrap_err();
        assert_eq!(e.kind, MapError::FieldCount { expected: 2, got: 1 });
        let e = SampleMap::read("sample\tdeme\tploidy\na\tx\t3\n".as_bytes()).unwrap_err();
        assert!(e.kind.to_string().contains("1 or 2"));
        assert_eq!(SampleMap::read("sample\tdeme\n".as_bytes()).unwrap_err().kind, MapError::Empty);
    }
}
