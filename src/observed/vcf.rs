//! Reading VCF: the header through noodles' header parser, one line at a time so that an
//! error names its line, then records one by one, each column checked by its own small
//! function (`POS`, `REF`, `ALT`, `FILTER`, `INFO`, `FORMAT`, `GT`).
//!
//! Records are split into columns by `noodles_vcf::Record`; the raw line is kept so that an
//! error can quote the offending text.

use noodles::vcf;
use std::io::{self, BufRead};

/// What is wrong with the header.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum HeaderError {
    /// noodles refused a header line.
    #[error(
        "invalid VCF header line; expected `##fileformat=VCFv4.x` first, then `##key=value` lines and the `#CHROM` line"
    )]
    Parse(#[source] Box<vcf::header::ParseError>),
    /// The file ended before the `#CHROM` line.
    #[error("no `#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO[\tFORMAT\tsample...]` line before the first record")]
    MissingColumnsLine,
    /// Reading failed (including broken compression and invalid UTF-8).
    #[error("cannot read the header")]
    Io(#[source] io::Error),
}

/// What is wrong with one column of a record.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum FieldError {
    /// A line with the wrong number of tab-separated columns.
    #[error("{got} tab-separated columns, but the header line has {expected}")]
    ColumnCount {
        /// Columns of the `#CHROM` line.
        expected: usize,
        /// Columns on this line.
        got: usize,
    },
    /// An empty column.
    #[error("empty value; use `.` for a missing value")]
    Empty,
    /// POS not a positive integer.
    #[error("`{value}` is not a position; allowed: a whole number >= 0")]
    Position {
        /// The text found.
        value: String,
    },
    /// REF not a sequence of bases.
    #[error("`{value}` is not a reference allele; allowed: one or more of A, C, G, T, N")]
    Reference {
        /// The text found.
        value: String,
    },
    /// FORMAT without a GT key.
    #[error("`{value}` has no GT key; GT must be present (first) to read genotypes")]
    NoGenotype {
        /// The text found.
        value: String,
    },
    /// A GT that does not parse.
    #[error(
        "`{value}` is not a genotype; allowed: allele indices or `.` separated by `/` or `|`, e.g. 0/1, 1|0, 0, ./."
    )]
    Genotype {
        /// The text found.
        value: String,
    },
    /// A GT allele index beyond the alleles of the record.
    #[error("`{value}` names allele {allele}, but this record has {alleles} allele(s); allowed indices 0..={max} or `.`", max = alleles - 1)]
    AlleleOutOfRange {
        /// The GT text.
        value: String,
        /// The offending index.
        allele: u32,
        /// REF + ALT alleles of the record.
        alleles: usize,
    },
    /// A GT with a ploidy other than the sample's.
    #[error("`{value}` has {got} allele(s), but this sample's ploidy is {ploidy}{origin}")]
    Ploidy {
        /// The GT text.
        value: String,
        /// Alleles in this GT.
        got: usize,
        /// The sample's ploidy.
        ploidy: u8,
        /// Where the ploidy came from.
        origin: &'static str,
    },
    /// A GT with more than two alleles.
    #[error("`{value}` has {got} alleles; only haploid and diploid genotypes are supported")]
    UnsupportedPloidy {
        /// The GT text.
        value: String,
        /// Alleles in this GT.
        got: usize,
    },
}

/// A field error with the column (and sample) it concerns.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{}", where_(column, sample.as_deref()))]
pub struct RecordError {
    /// Column name: `POS`, `REF`, `ALT`, `FILTER`, `INFO`, `FORMAT`, `GT`, or `columns`
    /// for a wrong column count.
    pub column: &'static str,
    /// The sample, for `GT`.
    pub sample: Option<String>,
    /// What is wrong.
    #[source]
    pub kind: FieldError,
}

/// "column GT, sample s2", or "column count" for a line with the wrong number of columns.
fn where_(column: &str, sample: Option<&str>) -> String {
    match (column, sample) {
        ("columns", _) => "column count".to_string(),
        (c, Some(s)) => format!("column {c}, sample {s}"),
        (c, None) => format!("column {c}"),
    }
}

impl RecordError {
    fn at(column: &'static str, kind: FieldError) -> Self {
        RecordError { column, sample: None, kind }
    }
}

/// The parts of the header that `observe` needs.
#[derive(Debug, Clone)]
pub struct VcfHeader {
    /// Sample names in column order.
    pub samples: Vec<String>,
    /// Whether the header declares `##INFO=<ID=AA,...>`.
    pub declares_aa: bool,
    /// Number of header lines (records start on line `lines + 1`).
    pub lines: usize,
}

/// Reads header lines (those starting with `#`) and parses them with noodles.
///
/// Returns the header and its number of lines; an error carries the 1-based line number.
pub fn read_header<R: BufRead>(reader: &mut R) -> Result<VcfHeader, (usize, HeaderError)> {
    let mut parser = vcf::header::Parser::default();
    let mut line = String::new();
    let mut n = 0;
    let mut done = false;
    loop {
        let starts_with_hash = reader.fill_buf().map_err(|e| (n + 1, HeaderError::Io(e)))?.first() == Some(&b'#');
        if !starts_with_hash {
            break;
        }
        line.clear();
        reader.read_line(&mut line).map_err(|e| (n + 1, HeaderError::Io(e)))?;
        n += 1;
        let text = line.trim_end_matches(['\n', '\r']);
        if done {
            // A second `#CHROM` line or a `##` line after it.
            return Err((n, HeaderError::Parse(Box::new(vcf::header::ParseError::ExpectedEof))));
        }
        let entry = parser.parse_partial(text.as_bytes()).map_err(|e| (n, HeaderError::Parse(Box::new(e))))?;
        done = matches!(entry, vcf::header::parser::Entry::Header);
    }
    if n == 0 {
        return Err((1, HeaderError::Parse(Box::new(vcf::header::ParseError::MissingFileFormat))));
    }
    if !done {
        return Err((n + 1, HeaderError::MissingColumnsLine));
    }
    let header = parser.finish().map_err(|e| (n, HeaderError::Parse(Box::new(e))))?;
    Ok(VcfHeader {
        samples: header.sample_names().iter().cloned().collect(),
        declares_aa: header.infos().contains_key("AA"),
        lines: n,
    })
}

/// The columns every record has before the samples.
pub const FIXED_COLUMNS: [&str; 9] = ["CHROM", "POS", "ID", "REF", "ALT", "QUAL", "FILTER", "INFO", "FORMAT"];

/// Checks the number of columns and that none is empty, then splits the line with noodles.
///
/// `samples` is the number of samples in the header; lines have 8 columns without samples,
/// 9 + samples with.
pub fn parse_record(line: &str, samples: usize) -> Result<vcf::Record, RecordError> {
    let line = line.trim_end_matches(['\n', '\r']);
    let expected = if samples == 0 { 8 } else { 9 + samples };
    let got = line.split('\t').count();
    if got != expected {
        return Err(RecordError::at("columns", FieldError::ColumnCount { expected, got }));
    }
    if let Some(i) = line.split('\t').position(str::is_empty) {
        let column = FIXED_COLUMNS.get(i).copied().unwrap_or("GT");
        return Err(RecordError { column, sample: None, kind: FieldError::Empty });
    }
    vcf::Record::try_from(line.as_bytes())
        .map_err(|_| RecordError::at("columns", FieldError::ColumnCount { expected, got }))
}

/// `POS`: a whole number (0 stands for a telomere).
pub fn position(record: &vcf::Record, raw_line: &str) -> Result<u64, RecordError> {
    match record.variant_start() {
        None => Ok(0),
        Some(Ok(p)) => Ok(usize::from(p) as u64),
        Some(Err(_)) => Err(RecordError::at(
            "POS",
            FieldError::Position { value: raw_line.split('\t').nth(1).unwrap_or_default().to_string() },
        )),
    }
}

/// `REF`: one or more bases. Returns the base when it is a single A, C, G or T (upper case).
pub fn reference(record: &vcf::Record) -> Result<Option<u8>, RecordError> {
    let r = record.reference_bases();
    if r.is_empty() || !r.bytes().all(|b| b"ACGTNacgtn".contains(&b)) {
        return Err(RecordError::at("REF", FieldError::Reference { value: r.to_string() }));
    }
    Ok(single_nucleotide(r))
}

fn single_nucleotide(s: &str) -> Option<u8> {
    match s.as_bytes() {
        [b] if b"ACGTacgt".contains(b) => Some(b.to_ascii_uppercase()),
        _ => None,
    }
}

/// The alternate alleles of a record, as far as SNP calling cares.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Alternates {
    /// `.`: no alternate allele.
    None,
    /// One alternate allele that is a single A, C, G or T.
    Snp(u8),
    /// One alternate allele that is not a single base (indel, symbolic, breakend).
    Other,
    /// Two or more alternate alleles (count given).
    Multi(usize),
}

impl Alternates {
    /// Number of alleles REF + ALT, the range of GT indices.
    pub fn alleles(self) -> usize {
        match self {
            Alternates::None => 1,
            Alternates::Snp(_) | Alternates::Other => 2,
            Alternates::Multi(k) => 1 + k,
        }
    }
}

/// `ALT`: `.` or comma-separated alleles.
pub fn alternates(record: &vcf::Record) -> Alternates {
    let alt = record.alternate_bases();
    let alt: &str = alt.as_ref();
    if alt.is_empty() || alt == "." {
        return Alternates::None;
    }
    let k = alt.split(',').count();
    if k > 1 {
        return Alternates::Multi(k);
    }
    single_nucleotide(alt).map_or(Alternates::Other, Alternates::Snp)
}

/// `FILTER`: true when the record passed (`PASS` or `.`, unfiltered).
pub fn passes(record: &vcf::Record) -> bool {
    let f = record.filters();
    matches!(f.as_ref(), "" | "." | "PASS")
}

/// `INFO`: the value of the `AA` key (ancestral allele), if present and not `.`.
///
/// Compared case-insensitively, so low-confidence lower-case calls count.
pub fn ancestral_allele(record: &vcf::Record) -> Option<String> {
    let info = record.info();
    let raw: &str = info.as_ref();
    raw.split(';')
        .find_map(|kv| kv.strip_prefix("AA="))
        .filter(|v| !v.is_empty() && *v != ".")
        .map(|v| v.to_ascii_uppercase())
}

/// `FORMAT`: the index of the `GT` key among the keys.
pub fn genotype_key(record: &vcf::Record) -> Result<usize, RecordError> {
    let samples = record.samples();
    let keys = samples.keys();
    keys.iter().position(|k| k == "GT").ok_or_else(|| {
        RecordError::at("FORMAT", FieldError::NoGenotype { value: keys.iter().collect::<Vec<_>>().join(":") })
    })
}

/// A parsed `GT`: allele indices (None = missing) and whether it is phased.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Genotype {
    /// Allele index of each chromosome copy, `None` for `.`.
    pub alleles: Vec<Option<u32>>,
    /// True when every separator is `|` (always true for a haploid call).
    pub phased: bool,
}

/// The raw `GT` of sample `index` (0-based among the VCF samples); a missing sample value,
/// or one cut short before GT, reads as `.` as the VCF specification allows.
pub fn raw_genotype(record: &vcf::Record, gt_key: usize, index: usize) -> String {
    let samples = record.samples();
    let Some(sample) = samples.get_index(index) else {
        return ".".to_string();
    };
    let raw: &str = sample.as_ref();
    raw.split(':').nth(gt_key).unwrap_or(".").to_string()
}

/// `GT`: allele indices separated by `/` (unphased) or `|` (phased), with an optional
/// leading phasing prefix (VCF 4.4), each index < `alleles` or `.`.
pub fn genotype(value: &str, alleles: usize) -> Result<Genotype, FieldError> {
    let bad = || FieldError::Genotype { value: value.to_string() };
    let body = value.strip_prefix(['|', '/']).unwrap_or(value);
    if body.is_empty() {
        return Err(bad());
    }
    // Phased when no separator (nor the VCF 4.4 prefix) is `/`; a haploid call is phased.
    let phased = !value.contains('/');
    let mut out = Vec::with_capacity(2);
    for part in body.split(['/', '|']) {
        out.push(match part {
            "." => None,
            p if !p.is_empty() && p.bytes().all(|b| b.is_ascii_digit()) => {
                let a: u32 = p.parse().map_err(|_| bad())?;
                if a as usize >= alleles {
                    return Err(FieldError::AlleleOutOfRange { value: value.to_string(), allele: a, alleles });
                }
                Some(a)
            }
            _ => return Err(bad()),
        });
    }
    if out.len() > 2 {
        return Err(FieldError::UnsupportedPloidy { value: value.to_string(), got: out.len() });
    }
    Ok(Genotype { alleles: out, phased })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn genotypes() {
        // VCF 4.3 §1.6.2: GT is allele values separated by / (unphased) or | (phased).
        assert_eq!(genotype("0/1", 2), Ok(Genotype { alleles: vec![Some(0), Some(1)], phased: false }));
        assert_eq!(genotype("1|0", 2), Ok(Genotype { alleles: vec![Some(1), Some(0)], phased: true }));
        assert_eq!(genotype("./.", 2).unwrap().alleles, vec![None, None]);
        assert_eq!(genotype("1", 2), Ok(Genotype { alleles: vec![Some(1)], phased: true }));
        assert!(genotype("|0|1", 2).unwrap().phased);
        assert_eq!(
            genotype("0/3", 2),
            Err(FieldError::AlleleOutOfRange { value: "0/3".into(), allele: 3, alleles: 2 })
        );
        assert!(matches!(genotype("0/x", 2), Err(FieldError::Genotype { .. })));
        assert!(matches!(genotype("", 2), Err(FieldError::Genotype { .. })));
        assert!(matches!(genotype("0//1", 2), Err(FieldError::Genotype { .. })));
        assert!(matches!(genotype("0/1/1", 2), Err(FieldError::UnsupportedPloidy { got: 3, .. })));
    }

    #[test]
    fn columns_of_a_record() {
        let line = "1\t7\t.\tA\tG\t.\tq10\tDP=3;AA=g\tGT:DP\t0|1:3\t1\n";
        let r = parse_record(line, 2).unwrap();
        assert_eq!(position(&r, line), Ok(7));
        assert_eq!(reference(&r), Ok(Some(b'A')));
        assert_eq!(alternates(&r), Alternates::Snp(b'G'));
        assert!(!passes(&r));
        assert_eq!(ancestral_allele(&r).as_deref(), Some("G"));
        assert_eq!(genotype_key(&r), Ok(0));
        assert_eq!(raw_genotype(&r, 0, 1), "1");
        let e = parse_record(line, 3).unwrap_err();
        assert_eq!(e.kind, FieldError::ColumnCount { expected: 12, got: 11 });
        let bad = "1\tx7\t.\tAT\tA,C\t.\tPASS\t.\tDP\t3\n";
        let r = parse_record(bad, 1).unwrap();
        assert!(matches!(position(&r, bad), Err(RecordError { column: "POS", .. })));
        assert_eq!(reference(&r), Ok(None));
        assert_eq!(alternates(&r), Alternates::Multi(2));
        assert!(passes(&r));
        assert_eq!(genotype_key(&r).unwrap_err().column, "FORMAT");
    }
}
