//! Loci of observed data: whole contigs, windows of fixed size, or regions from a BED file,
//! with an optional mask of callable sites.
//!
//! Coordinates are 0-based and half-open, as in BED (UCSC/ENCODE definition): the interval
//! `chr1 100 200` holds the 100 bases at VCF positions 101..=200. A VCF record at position
//! p (1-based) is base p - 1.
//!
//! - **Contigs** (the default): each contig is one locus `[0, length)`, the length from the
//!   header's `##contig=<ID=..,length=..>`; without a length the contig ends at its last record.
//! - **Windows** (`--windows BP`): each contig is cut into `[0, BP)`, `[BP, 2 BP)`, ... the last
//!   one ending with the contig.
//! - **Regions** (`--regions FILE.bed`): each BED interval is a locus; regions may not overlap.
//!   Records outside every region are skipped.
//! - **Mask** (`--mask FILE.bed`): the callable bases. A record outside the mask is skipped;
//!   the callable length of a locus is the number of its bases inside the mask (every base
//!   of the locus without a mask). A locus with no callable base is dropped.

use std::collections::HashMap;
use std::io::BufRead;

/// What is wrong with a BED file.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum BedError {
    /// A line with fewer than three fields.
    #[error("{got} field(s); a BED line needs at least chrom, start and end separated by tabs")]
    Fields {
        /// Fields found.
        got: usize,
    },
    /// A start or end that is not a whole number.
    #[error("column {column}: `{value}` is not a position; allowed: a whole number >= 0 (0-based, half-open)")]
    Number {
        /// `start` or `end`.
        column: &'static str,
        /// The text found.
        value: String,
    },
    /// An interval with end <= start.
    #[error("end {end} is not after start {start}; BED intervals are 0-based and half-open, so end > start")]
    Empty {
        /// Start.
        start: u64,
        /// End.
        end: u64,
    },
    /// Two regions overlap.
    #[error(
        "region {contig}:{start}-{end} overlaps the region on line {other_line}; regions are loci and may not overlap"
    )]
    Overlap {
        /// Contig.
        contig: String,
        /// Start.
        start: u64,
        /// End.
        end: u64,
        /// The line of the other region.
        other_line: usize,
    },
    /// No interval at all.
    #[error("no interval: the file has no `chrom<TAB>start<TAB>end` line")]
    NoIntervals,
    /// Reading failed.
    #[error("cannot read: {0}")]
    Io(String),
}

/// A BED error with its line (0 for the whole file).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("line {line}")]
pub struct BedLineError {
    /// 1-based line.
    pub line: usize,
    /// What is wrong.
    #[source]
    pub kind: BedError,
}

/// One interval of a BED file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Interval {
    /// 0-based start.
    pub start: u64,
    /// End (exclusive).
    pub end: u64,
    /// Line in the file.
    pub line: usize,
}

/// The intervals of a BED file, per contig (sorted by start), contigs in file order.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Bed {
    contigs: Vec<(String, Vec<Interval>)>,
}

/// How a BED file is used: regions may not overlap; a mask's overlaps are merged.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BedUse {
    /// Loci.
    Regions,
    /// Callable sites.
    Mask,
}

fn bed_number(column: &'static str, value: &str) -> Result<u64, BedError> {
    value.parse().map_err(|_| BedError::Number { column, value: value.to_string() })
}

impl Bed {
    /// Reads a BED file (first three columns; `#`, `track` and `browser` lines and blank lines
    /// are skipped).
    pub fn read<R: BufRead>(reader: R, usage: BedUse) -> Result<Bed, BedLineError> {
        let mut bed = Bed::default();
        let mut index: HashMap<String, usize> = HashMap::new();
        for (i, line) in reader.lines().enumerate() {
            let line_no = i + 1;
            let at = |kind| BedLineError { line: line_no, kind };
            let line = line.map_err(|e| at(BedError::Io(e.to_string())))?;
            let line = line.trim_end_matches('\r');
            if line.trim().is_empty()
                || line.starts_with('#')
                || line.starts_with("track")
                || line.starts_with("browser")
            {
                continue;
            }
            let fields: Vec<&str> = line.split('\t').collect();
            if fields.len() < 3 {
                return Err(at(BedError::Fields { got: fields.len() }));
            }
            let start = bed_number("start", fields[1].trim()).map_err(at)?;
            let end = bed_number("end", fields[2].trim()).map_err(at)?;
            if end <= start {
                return Err(at(BedError::Empty { start, end }));
            }
            let contig = fields[0].trim().to_string();
            let k = *index.entry(contig.clone()).or_insert_with(|| {
                bed.contigs.push((contig, Vec::new()));
                bed.contigs.len() - 1
            });
            bed.contigs[k].1.push(Interval { start, end, line: line_no });
        }
        if bed.contigs.is_empty() {
            return Err(BedLineError { line: 0, kind: BedError::NoIntervals });
        }
        for (contig, list) in bed.contigs.iter_mut() {
            list.sort_by_key(|iv| (iv.start, iv.end));
            match usage {
                BedUse::Regions => {
                    for w in list.windows(2) {
                        if w[1].start < w[0].end {
                            let (a, b) = if w[0].line > w[1].line { (w[0], w[1]) } else { (w[1], w[0]) };
                            return Err(BedLineError {
                                line: a.line,
                                kind: BedError::Overlap {
                                    contig: contig.clone(),
                                    start: a.start,
                                    end: a.end,
                                    other_line: b.line,
                                },
                            });
                        }
                    }
                }
                BedUse::Mask => {
                    let mut merged: Vec<Interval> = Vec::with_capacity(list.len());
                    for iv in list.drain(..) {
                        match merged.last_mut() {
                            Some(last) if iv.start <= last.end => last.end = last.end.max(iv.end),
                            _ => merged.push(iv),
                        }
                    }
                    *list = merged;
                }
            }
        }
        Ok(bed)
    }

    /// The intervals of one contig, sorted (empty when the contig is absent).
    pub fn intervals(&self, contig: &str) -> &[Interval] {
        self.contigs.iter().find(|(c, _)| c == contig).map_or(&[], |(_, v)| v.as_slice())
    }

    /// Contig names in file order.
    pub fn contigs(&self) -> impl Iterator<Item = &str> {
        self.contigs.iter().map(|(c, _)| c.as_str())
    }

    /// Total length of the intervals.
    pub fn total(&self) -> u64 {
        self.contigs.iter().flat_map(|(_, v)| v).map(|iv| iv.end - iv.start).sum()
    }
}

/// Bases of `[start, end)` inside the sorted, disjoint `intervals`.
pub fn overlap(intervals: &[Interval], start: u64, end: u64) -> u64 {
    let first = intervals.partition_point(|iv| iv.end <= start);
    intervals[first..].iter().take_while(|iv| iv.start < end).map(|iv| iv.end.min(end) - iv.start.max(start)).sum()
}

/// Whether base `x` lies in one of the sorted, disjoint `intervals`.
pub fn contains(intervals: &[Interval], x: u64) -> bool {
    let i = intervals.partition_point(|iv| iv.end <= x);
    intervals.get(i).is_some_and(|iv| iv.start <= x)
}

/// How the genome is cut into loci.
#[derive(Debug, Clone, Default)]
pub enum Loci {
    /// One locus per contig.
    #[default]
    Contigs,
    /// Windows of this many bases.
    Windows(u64),
    /// The regions of a BED file.
    Regions(Bed),
}

/// Loci and the callable mask.
#[derive(Debug, Clone, Default)]
pub struct Layout {
    /// How loci are made.
    pub loci: Loci,
    /// Callable sites; every base is callable without one.
    pub mask: Option<Bed>,
}

impl Layout {
    /// Whether records must come sorted by position within each contig.
    pub fn needs_order(&self) -> bool {
        !matches!(self.loci, Loci::Contigs) || self.mask.is_some()
    }

    /// Callable bases of `[start, end)` on `contig`.
    pub fn callable(&self, contig: &str, start: u64, end: u64) -> u64 {
        match &self.mask {
            None => end - start,
            Some(m) => overlap(m.intervals(contig), start, end),
        }
    }

    /// Whether base `x` of `contig` is callable.
    pub fn is_callable(&self, contig: &str, x: u64) -> bool {
        self.mask.as_ref().is_none_or(|m| contains(m.intervals(contig), x))
    }
}

/// The loci of one contig: its length (when known) and how it is cut.
#[derive(Debug, Clone)]
pub struct ContigPlan {
    /// Length from the header.
    pub length: Option<u64>,
    cut: Cut,
}

#[derive(Debug, Clone)]
enum Cut {
    Whole,
    Windows(u64),
    Regions(Vec<(u64, u64)>),
}

impl ContigPlan {
    /// The plan of `contig` under `layout`.
    pub fn new(layout: &Layout, contig: &str, length: Option<u64>) -> Self {
        let cut = match &layout.loci {
            Loci::Contigs => Cut::Whole,
            Loci::Windows(w) => Cut::Windows(*w),
            Loci::Regions(bed) => Cut::Regions(bed.intervals(contig).iter().map(|iv| (iv.start, iv.end)).collect()),
        };
        ContigPlan { length, cut }
    }

    /// Where the contig ends: its length, or else just after its last record `last` (0-based).
    fn end(&self, last: Option<u64>) -> u64 {
        self.length.unwrap_or_else(|| last.map_or(0, |x| x + 1))
    }

    /// The locus holding base `x`, if any.
    pub fn index_of(&self, x: u64) -> Option<usize> {
        match &self.cut {
            Cut::Whole => Some(0),
            Cut::Windows(w) => Some((x / w) as usize),
            Cut::Regions(r) => {
                let i = r.partition_point(|&(_, e)| e <= x);
                r.get(i).filter(|&&(s, _)| s <= x).map(|_| i)
            }
        }
    }

    /// Number of loci, given the last record seen on the contig (0-based base).
    pub fn count(&self, last: Option<u64>) -> usize {
        match &self.cut {
            Cut::Whole => usize::from(self.end(last) > 0),
            Cut::Windows(w) => self.end(last).div_ceil(*w) as usize,
            Cut::Regions(r) => r.len(),
        }
    }

    /// The span `[start, end)` of locus `i`.
    pub fn span(&self, i: usize, last: Option<u64>) -> (u64, u64) {
        match &self.cut {
            Cut::Whole => (0, self.end(last)),
            Cut::Windows(w) => {
                let start = i as u64 * w;
                (start, (start + w).min(self.end(last)))
            }
            Cut::Regions(r) => r[i],
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bed_is_zero_based_half_open() {
        // BED: `c 10 20` holds bases 10..19 (0-based), i.e. VCF positions 11..=20.
        let bed = Bed::read("c\t10\t20\nc\t15\t30\n#x\nd\t0\t5\n".as_bytes(), BedUse::Mask).unwrap();
        let iv = bed.intervals("c");
        assert_eq!(iv.iter().map(|i| (i.start, i.end)).collect::<Vec<_>>(), [(10, 30)], "merged");
        assert!(!contains(iv, 9) && contains(iv, 10) && contains(iv, 29) && !contains(iv, 30));
        assert_eq!(overlap(iv, 0, 12), 2);
        assert_eq!(overlap(iv, 25, 100), 5);
        assert_eq!(bed.total(), 25);
        let e = Bed::read("c\t10\t20\nc\t15\t30\n".as_bytes(), BedUse::Regions).unwrap_err();
        assert_eq!(e.line, 2);
        assert!(matches!(e.kind, BedError::Overlap { other_line: 1, .. }));
        let e = Bed::read("c\t10\t10\n".as_bytes(), BedUse::Regions).unwrap_err();
        assert_eq!(e.kind, BedError::Empty { start: 10, end: 10 });
        let e = Bed::read("c\tx\t10\n".as_bytes(), BedUse::Mask).unwrap_err();
        assert!(matches!(e.kind, BedError::Number { column: "start", .. }));
        assert_eq!(Bed::read("# nothing\n".as_bytes(), BedUse::Mask).unwrap_err().kind, BedError::NoIntervals);
    }

    #[test]
    fn windows_cut_a_contig() {
        let layout = Layout { loci: Loci::Windows(100), mask: None };
        let p = ContigPlan::new(&layout, "c", Some(250));
        assert_eq!(p.count(None), 3);
        assert_eq!(p.span(2, None), (200, 250));
        assert_eq!(p.index_of(199), Some(1));
        // Without a length the contig ends after its last record.
        let q = ContigPlan::new(&layout, "c", None);
        assert_eq!((q.count(Some(120)), q.span(1, Some(120))), (2, (100, 121)));
    }
}
