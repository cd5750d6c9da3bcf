//! Reading VCF text: the header through noodles' header parser, one line at a time so that
//! an error names its line, then records one by one, each column checked by its own small
//! function ([`chrom`], [`position`], [`reference`], [`alternates`], [`passes`],
//! [`ancestral_allele`], [`genotype_key`], [`call`]).
//!
//! **Cost.** A record is read as bytes and walked once: the tab positions are found with
//! `memchr`, and each sample column is visited once, in order, whatever the number of
//! samples; only the `GT` of mapped samples is parsed (`0|1`, `0/1`, `1` and `.` by a fast
//! path, anything else by [`genotype`]). Nothing is allocated per record once the buffers
//! have grown to the longest line.

use super::record::{Ancestral, Call, SiteRecord};
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
    /// Text that is not UTF-8.
    #[error("not UTF-8 text")]
    Utf8,
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
    /// `##contig` lines in order: name and `length`, when given.
    pub contigs: Vec<(String, Option<u64>)>,
    /// Number of header lines (records start on line `lines + 1`).
    pub lines: usize,
}

impl VcfHeader {
    /// The parts of a parsed header; `lines` is its number of lines (0 for BCF).
    pub fn of(header: &vcf::Header, lines: usize) -> Self {
        VcfHeader {
            samples: header.sample_names().iter().cloned().collect(),
            declares_aa: header.infos().contains_key("AA"),
            contigs: header.contigs().iter().map(|(k, m)| (k.to_string(), m.length().map(|l| l as u64))).collect(),
            lines,
        }
    }
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
    Ok(VcfHeader::of(&header, n))
}

/// The columns every record has before the samples.
pub const FIXED_COLUMNS: [&str; 9] = ["CHROM", "POS", "ID", "REF", "ALT", "QUAL", "FILTER", "INFO", "FORMAT"];

/// The byte ranges of the fixed columns of one line (`FORMAT` empty without samples) and
/// where the sample columns start.
#[derive(Debug, Clone, Copy, Default)]
pub struct Columns {
    bounds: [(usize, usize); 9],
    samples_start: usize,
}

impl Columns {
    /// The text of fixed column `i` (0 = CHROM .. 8 = FORMAT).
    pub fn get<'a>(&self, line: &'a [u8], i: usize) -> &'a [u8] {
        let (a, b) = self.bounds[i];
        &line[a..b]
    }
}

/// Finds the fixed columns of `line` (no trailing newline) for a header with `samples`
/// samples; lines have 8 columns without samples, 9 + samples with. A missing column or an
/// empty fixed column is an error here; the sample columns are checked as they are read.
pub fn split_columns(line: &[u8], samples: usize) -> Result<Columns, RecordError> {
    let fixed = if samples == 0 { 8 } else { 9 };
    let expected = if samples == 0 { 8 } else { 9 + samples };
    let mut c = Columns::default();
    let mut start = 0;
    let mut tabs = memchr::memchr_iter(b'\t', line);
    for (i, name) in FIXED_COLUMNS.iter().enumerate().take(fixed) {
        let end = if i + 1 < fixed || samples > 0 {
            match tabs.next() {
                Some(t) => t,
                None => return Err(count_error(line, expected)),
            }
        } else {
            // The last column without samples runs to the end; another tab is one too many.
            if tabs.next().is_some() {
                return Err(count_error(line, expected));
            }
            line.len()
        };
        if end == start {
            return Err(RecordError::at(name, FieldError::Empty));
        }
        c.bounds[i] = (start, end);
        start = end + 1;
    }
    c.samples_start = start.min(line.len());
    Ok(c)
}

fn count_error(line: &[u8], expected: usize) -> RecordError {
    let got = memchr::memchr_iter(b'\t', line).count() + 1;
    RecordError::at("columns", FieldError::ColumnCount { expected, got })
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

/// `CHROM`: any non-empty text without tabs (checked by [`split_columns`]).
pub fn chrom(value: &[u8]) -> Result<&str, RecordError> {
    std::str::from_utf8(value).map_err(|_| RecordError::at("CHROM", FieldError::Utf8))
}

/// `POS`: a whole number (0 stands for a telomere).
pub fn position(value: &[u8]) -> Result<u64, RecordError> {
    let bad = || RecordError::at("POS", FieldError::Position { value: text(value) });
    if value.is_empty() || value.len() > 19 || !value.iter().all(u8::is_ascii_digit) {
        return Err(bad());
    }
    Ok(value.iter().fold(0u64, |acc, &b| acc * 10 + u64::from(b - b'0')))
}

/// `REF`: one or more bases. Returns the base when it is a single A, C, G or T (upper case).
pub fn reference(value: &[u8]) -> Result<Option<u8>, RecordError> {
    if value.is_empty() || !value.iter().all(|b| b"ACGTNacgtn".contains(b)) {
        return Err(RecordError::at("REF", FieldError::Reference { value: text(value) }));
    }
    Ok(single_nucleotide(value))
}

fn single_nucleotide(s: &[u8]) -> Option<u8> {
    match s {
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

    /// Classifies a list of alternate alleles (`.` left out).
    pub fn of<'a>(alts: impl Iterator<Item = &'a [u8]>) -> Alternates {
        let mut k = 0;
        let mut first: &[u8] = &[];
        for a in alts {
            if k == 0 {
                first = a;
            }
            k += 1;
        }
        match k {
            0 => Alternates::None,
            1 => single_nucleotide(first).map_or(Alternates::Other, Alternates::Snp),
            k => Alternates::Multi(k),
        }
    }
}

/// `ALT`: `.` or comma-separated alleles.
pub fn alternates(value: &[u8]) -> Alternates {
    if value.is_empty() || value == b"." {
        return Alternates::None;
    }
    Alternates::of(value.split(|&b| b == b','))
}

/// `FILTER`: true when the record passed (`PASS` or `.`, unfiltered).
pub fn passes(value: &[u8]) -> bool {
    matches!(value, b"" | b"." | b"PASS")
}

/// `INFO`: the `AA` key (ancestral allele), compared case-insensitively, so that
/// low-confidence lower-case calls count.
pub fn ancestral_allele(value: &[u8]) -> Ancestral {
    let Some(v) = value.split(|&b| b == b';').find_map(|kv| kv.strip_prefix(b"AA=")) else {
        return Ancestral::Absent;
    };
    Ancestral::of(v)
}

/// `FORMAT`: the index of the `GT` key among the keys.
pub fn genotype_key(value: &[u8]) -> Result<usize, RecordError> {
    value
        .split(|&b| b == b':')
        .position(|k| k == b"GT")
        .ok_or_else(|| RecordError::at("FORMAT", FieldError::NoGenotype { value: text(value) }))
}

/// The `GT` subfield of one sample column; a sample value cut short before GT reads as `.`,
/// as the VCF specification allows.
fn gt_of(column: &[u8], gt_key: usize) -> &[u8] {
    if gt_key == 0 {
        return match memchr::memchr(b':', column) {
            Some(i) => &column[..i],
            None => column,
        };
    }
    column.split(|&b| b == b':').nth(gt_key).unwrap_or(b".")
}

/// One allele index of the fast path: a digit below `alleles`, or `.`.
#[inline(always)]
fn digit_allele(b: u8, alleles: usize, value: &[u8]) -> Result<u8, FieldError> {
    match b {
        b'.' => Ok(Call::MISSING),
        b'0'..=b'9' => {
            let a = b - b'0';
            if usize::from(a) >= alleles {
                return Err(FieldError::AlleleOutOfRange { value: text(value), allele: u32::from(a), alleles });
            }
            Ok(a)
        }
        _ => Err(FieldError::Genotype { value: text(value) }),
    }
}

/// `GT` of one sample: `0|1`, `0/1`, `1` and `.` directly, anything else through
/// [`genotype`]. Allele indices above 253 are kept as 253 (only 0 and 1 matter downstream).
#[inline]
pub fn call(value: &[u8], alleles: usize) -> Result<Call, FieldError> {
    match *value {
        [b'.'] => Ok(Call { alleles: [Call::MISSING; 2], count: 1, phased: true, lone_missing: true }),
        [a] => Ok(Call {
            alleles: [digit_allele(a, alleles, value)?, Call::MISSING],
            count: 1,
            phased: true,
            lone_missing: false,
        }),
        [a, sep @ (b'|' | b'/'), b] => Ok(Call {
            alleles: [digit_allele(a, alleles, value)?, digit_allele(b, alleles, value)?],
            count: 2,
            phased: sep == b'|',
            lone_missing: false,
        }),
        _ => {
            let s = std::str::from_utf8(value).map_err(|_| FieldError::Genotype { value: text(value) })?;
            let g = genotype(s, alleles)?;
            let code = |a: Option<u32>| a.map_or(Call::MISSING, |x| x.min(253) as u8);
            Ok(Call {
                alleles: [code(g.alleles[0]), g.alleles.get(1).copied().map_or(Call::MISSING, code)],
                count: g.alleles.len() as u8,
                phased: g.phased,
                lone_missing: false,
            })
        }
    }
}

/// Reads the records of a text VCF after its header, one at a time into a [`SiteRecord`].
pub struct TextRecords<R> {
    reader: R,
    line: Vec<u8>,
    line_no: usize,
    n_samples: usize,
    /// For each VCF sample, its slot among the mapped samples (`usize::MAX`: not mapped).
    slot: Vec<usize>,
    /// [`allele_table`] for records with `table_alleles` alleles.
    table: [u8; 256],
    table_alleles: usize,
}

impl<R: BufRead> TextRecords<R> {
    /// Records of `reader`, positioned after a header of `header_lines` lines with
    /// `n_samples` samples; `mapped[k]` is the VCF index of mapped sample k.
    pub fn new(reader: R, header_lines: usize, n_samples: usize, mapped: &[usize]) -> Self {
        let mut slot = vec![usize::MAX; n_samples];
        for (k, &i) in mapped.iter().enumerate() {
            slot[i] = k;
        }
        TextRecords {
            reader,
            line: Vec::with_capacity(1 << 12),
            line_no: header_lines,
            n_samples,
            slot,
            table: allele_table(2),
            table_alleles: 2,
        }
    }

    /// Line number of the last record read.
    pub fn line(&self) -> usize {
        self.line_no
    }

    /// Reads the next record into `rec` (its calls in mapped order); `Ok(false)` at the end.
    /// Errors carry the column (and sample, by VCF index) but not the line, which
    /// [`TextRecords::line`] gives.
    pub fn read(&mut self, rec: &mut SiteRecord) -> Result<bool, ReadError> {
        self.line.clear();
        let n = self.reader.read_until(b'\n', &mut self.line).map_err(ReadError::Io)?;
        if n == 0 {
            return Ok(false);
        }
        self.line_no += 1;
        let mut end = self.line.len();
        while end > 0 && matches!(self.line[end - 1], b'\n' | b'\r') {
            end -= 1;
        }
        let line = &self.line[..end];
        let cols = split_columns(line, self.n_samples).map_err(ReadError::Record)?;
        let name = chrom(cols.get(line, 0)).map_err(ReadError::Record)?;
        if rec.contig != name {
            rec.contig.clear();
            rec.contig.push_str(name);
        }
        rec.position = position(cols.get(line, 1)).map_err(ReadError::Record)?;
        rec.reference = reference(cols.get(line, 3)).map_err(ReadError::Record)?;
        rec.alternates = alternates(cols.get(line, 4));
        rec.passes = passes(cols.get(line, 6));
        rec.ancestral = ancestral_allele(cols.get(line, 7));
        if self.n_samples == 0 {
            return Ok(true);
        }
        let format = cols.get(line, 8);
        let gt_key = genotype_key(format).map_err(ReadError::Record)?;
        let alleles = rec.alternates.alleles();
        let region = &line[cols.samples_start.min(line.len())..];
        if self.table_alleles != alleles {
            self.table = allele_table(alleles);
            self.table_alleles = alleles;
        }
        rec.uniform = None;
        if format == b"GT" {
            rec.uniform = uniform_calls(region, &self.table, &self.slot, &mut rec.uniform_alleles);
            if rec.uniform.is_some() {
                return Ok(true);
            }
        }
        let expected = 9 + self.n_samples;
        let mut start = cols.samples_start;
        for i in 0..self.n_samples {
            let stop = if i + 1 < self.n_samples {
                match memchr::memchr(b'\t', &line[start..]) {
                    Some(t) => start + t,
                    None => return Err(ReadError::Record(count_error(line, expected))),
                }
            } else {
                if memchr::memchr(b'\t', &line[start..]).is_some() {
                    return Err(ReadError::Record(count_error(line, expected)));
                }
                line.len()
            };
            let column = &line[start..stop];
            if column.is_empty() {
                return Err(ReadError::Sample { index: i, source: FieldError::Empty });
            }
            let k = self.slot[i];
            if k != usize::MAX {
                rec.calls[k] =
                    call(gt_of(column, gt_key), alleles).map_err(|source| ReadError::Sample { index: i, source })?;
            }
            start = stop + 1;
        }
        Ok(true)
    }
}

/// Marks a byte that is not an allele of the fast path.
const BAD: u8 = 254;

/// The code of every byte as one allele of the fast path: its index for a digit below
/// `alleles`, [`Call::MISSING`] for `.`, [`BAD`] for anything else.
fn allele_table(alleles: usize) -> [u8; 256] {
    let mut t = [BAD; 256];
    for d in 0..alleles.min(10) {
        t[usize::from(b'0') + d] = d as u8;
    }
    t[usize::from(b'.')] = Call::MISSING;
    t
}

/// The common case read in one pass without searching: every sample column is a one-byte
/// haploid GT (`0`, `1`) or every one a three-byte diploid GT (`0|1`, `1/0`, `./.`), so that
/// the columns sit at fixed offsets. Writes the alleles of the mapped samples (`p` each, in
/// mapped order) and returns `(p, all phased)`; returns `None` for anything else (a lone `.`
/// included, or anything malformed), which the general path then reads and reports.
fn uniform_calls(region: &[u8], table: &[u8; 256], slot: &[usize], out: &mut [u8]) -> Option<(u8, bool)> {
    let n = slot.len();
    if n == 0 {
        return None;
    }
    let code = |b: u8| table[usize::from(b)];
    let mut ok = true;
    if region.len() == 4 * n - 1 {
        // Every column but the last is `a|b\t`; the last has no tab.
        let mut pipes = 0usize;
        for (c, &k) in region.chunks(4).zip(slot) {
            let (a, sep, b) = (code(c[0]), c[1], code(c[2]));
            ok &= (sep == b'|' || sep == b'/') & (a != BAD) & (b != BAD);
            pipes += usize::from(sep == b'|' || k == usize::MAX);
            if k != usize::MAX {
                out[2 * k] = a;
                out[2 * k + 1] = b;
            }
        }
        (ok && region.iter().skip(3).step_by(4).all(|&t| t == b'\t')).then_some((2, pipes == n))
    } else if region.len() == 2 * n - 1 {
        for (c, &k) in region.chunks(2).zip(slot) {
            let a = code(c[0]);
            // A lone `.` may stand for any ploidy: leave it to the general path.
            ok &= (a != BAD) & (a != Call::MISSING);
            if k != usize::MAX {
                out[k] = a;
            }
        }
        (ok && region.iter().skip(1).step_by(2).all(|&t| t == b'\t')).then_some((1, true))
    } else {
        None
    }
}

/// Why a record could not be read.
#[derive(Debug)]
pub enum ReadError {
    /// Reading failed (truncated or corrupt compression).
    Io(io::Error),
    /// A column is wrong.
    Record(RecordError),
    /// The `GT` of sample `index` (VCF order) is wrong.
    Sample {
        /// VCF index of the sample.
        index: usize,
        /// What is wrong.
        source: FieldError,
    },
}

/// A parsed `GT`: allele indices (None = missing) and whether it is phased.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Genotype {
    /// Allele index of each chromosome copy, `None` for `.`.
    pub alleles: Vec<Option<u32>>,
    /// True when every separator is `|` (always true for a haploid call).
    pub phased: bool,
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
        let line = b"1\t7\t.\tA\tG\t.\tq10\tDP=3;AA=g\tGT:DP\t0|1:3\t1";
        let c = split_columns(line, 2).unwrap();
        assert_eq!(chrom(c.get(line, 0)), Ok("1"));
        assert_eq!(position(c.get(line, 1)), Ok(7));
        assert_eq!(reference(c.get(line, 3)), Ok(Some(b'A')));
        assert_eq!(alternates(c.get(line, 4)), Alternates::Snp(b'G'));
        assert!(!passes(c.get(line, 6)));
        assert_eq!(ancestral_allele(c.get(line, 7)), Ancestral::Base(b'G'));
        assert_eq!(genotype_key(c.get(line, 8)), Ok(0));
        assert_eq!(gt_of(b"0|1:3", 0), b"0|1");
        assert_eq!(gt_of(b"3", 1), b".");
        let mut rec = SiteRecord::new(3);
        let mut r = TextRecords::new(&line[..], 0, 3, &[0, 1, 2]);
        match r.read(&mut rec) {
            Err(ReadError::Record(e)) => assert_eq!(e.kind, FieldError::ColumnCount { expected: 12, got: 11 }),
            other => panic!("expected a column count error, got {other:?}"),
        }
        let bad = b"1\tx7\t.\tAT\tA,C\t.\tPASS\t.\tDP\t3";
        let c = split_columns(bad, 1).unwrap();
        assert!(matches!(position(c.get(bad, 1)), Err(RecordError { column: "POS", .. })));
        assert_eq!(reference(c.get(bad, 3)), Ok(None));
        assert_eq!(alternates(c.get(bad, 4)), Alternates::Multi(2));
        assert!(passes(c.get(bad, 6)));
        assert_eq!(genotype_key(c.get(bad, 8)).unwrap_err().column, "FORMAT");
        assert_eq!(split_columns(b"1\t\t.\tA\tG\t.\t.\t.", 0).unwrap_err().column, "POS");
    }

    #[test]
    fn fast_calls_agree_with_the_general_parser() {
        // Every one- and three-byte GT of digits 0..3, `.`, `|` and `/` against [`genotype`].
        let atoms = [b'0', b'1', b'2', b'3', b'.'];
        let mut values: Vec<Vec<u8>> = atoms.iter().map(|&a| vec![a]).collect();
        for &a in &atoms {
            for sep in [b'|', b'/'] {
                for &b in &atoms {
                    values.push(vec![a, sep, b]);
                }
            }
        }
        for v in values {
            let s = std::str::from_utf8(&v).unwrap();
            match (call(&v, 3), genotype(s, 3)) {
                (Ok(c), Ok(g)) => {
                    let want: Vec<u8> = g.alleles.iter().map(|a| a.map_or(Call::MISSING, |x| x as u8)).collect();
                    assert_eq!(&c.alleles[..c.count as usize], &want[..], "{s}");
                    assert_eq!(c.phased, g.phased, "{s}");
                }
                (Err(a), Err(b)) => assert_eq!(a, b, "{s}"),
                (a, b) => panic!("{s}: fast {a:?} vs general {b:?}"),
            }
        }
    }
}
