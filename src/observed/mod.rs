//! Summary statistics of observed data: a VCF or BCF of biallelic SNPs, a sample map and
//! optionally windows, regions and a mask of callable sites.
//!
//! [`observe`] streams the records one at a time, in memory that does not grow with the
//! number of sites, and computes per locus and genome-wide the same statistics as
//! `simulate` ([`crate::stats::stat_columns`]), so that observed values can be set beside
//! simulated ones.
//!
//! **Input.** VCF text, plain, gzip or bgzip-compressed, or BCF (compressed or not), told
//! apart by their first bytes ([`open_input`]). BCF is read through noodles ([`bcf`]).
//!
//! **Plants and sequences.** A sample of the VCF is a plant. Each of its haploid genomes is
//! one sequence: a diploid `0/1` gives two. A plant's ploidy is the map's `ploidy` or else
//! the number of alleles in its first GT; every later GT must have as many (a lone `.` is a
//! missing call of any ploidy). The simulator's lineages are sequences, so the sampling
//! design ([`DesignEntry`]) gives both counts and every message says which it means.
//! Samples are taken from the sample map ([`map`]); VCF samples absent from the map are
//! skipped (and counted); a map sample absent from the VCF is an error.
//!
//! **Loci** ([`layout`]). Each contig is one locus, or each window of `--windows BP`, or
//! each region of `--regions FILE.bed`; `--mask FILE.bed` gives the callable bases. A locus
//! has a span and a callable length; `observed.tsv` has one row per locus, `observed.json`
//! the genome-wide values and, with several loci, the mean and variance across loci of π,
//! S, Tajima's D, θ_W and Fay & Wu's H (the `*_locus_mean`, `*_locus_var` columns of
//! `simulate`). Genome-wide values sum over loci (S, π, the spectra, per-deme π; θ_W, D and
//! the normalised H come from the sums; F_ST is the ratio of summed differences);
//! `haplotypes` is the mean over loci of the per-locus number of distinct haplotypes, as in
//! `simulate` ([`crate::stats::combined_column_values`]). Per-site values divide S, π and
//! θ_W by the callable length.
//!
//! **Sites.** Only biallelic SNPs that pass `FILTER` (`PASS` or `.`) are used. Skipped
//! sites are counted by reason ([`SkippedSites`]), in this order of precedence: outside
//! every locus, not callable (mask), multi-allelic, not a SNP (indel, symbolic allele, REF
//! not one base), filtered, no ALT allele (monomorphic), ancestral allele unknown, missing
//! data, too few called sequences, monomorphic in the mapped samples.
//!
//! **Polarisation.** With `INFO` `AA` on a site the derived allele is the one that is not
//! `AA` (compared case-insensitively); a site whose `AA` matches neither `REF` nor `ALT`
//! (e.g. `N`) is skipped as "ancestral allele unknown". A site without `AA` (or `AA=.`)
//! enters only what needs no polarisation: the folded spectrum η, S, π, θ_W and Tajima's D.
//! The unfolded ξ, Fay & Wu's H and its normalised form use the polarised sites only, and
//! are `None` when no site is polarised.
//!
//! **Missing genotypes** ([`Missing`]). By default every mapped sequence must be called at
//! every used site: M = n, the full sample, and the first missing call at a used site is an
//! error that names it and asks for a choice, because a spectrum mixing sites of different
//! sample sizes is not the spectrum of any sample. `--drop-missing` uses only the sites
//! called in every sequence; `--project M` projects each site with n_called >= M to M
//! sequences by the hypergeometric distribution ([`projection`]; Marth et al. 2004) and
//! drops the others. Projected S and ξ are expected values and may be fractional.
//!
//! **Per deme.** π of deme a sums, over the used sites, 2 c (m - c) / (m (m - 1)) with m
//! the called sequences of deme a at the site and c the derived ones among them (sites
//! where m < 2 add nothing); Hudson's F_ST = 1 - (π_a + π_b)/2 / H_b with
//! H_b = Σ (c_a (m_b - c_b) + c_b (m_a - c_a)) / (m_a m_b) (Hudson, Slatkin & Maddison 1992).
//! These use the called sequences, not the projected sample.
//!
//! **Haplotypes.** The number of distinct haplotypes of a locus needs the phase: it is
//! counted ([`locus`], by hashing) only when every used genotype of the locus is haploid or
//! phased, no used site of it has a missing call and no projection is made (M = n);
//! otherwise it is `None` with a note. The genome-wide value is defined when every locus's is.
//!
//! Samples taken at different times are pooled as if contemporaneous, as in [`crate::stats`];
//! the sampling design (deme, generations ago, plants, sequences) is recorded for the null
//! model, and so is the layout of loci (their callable lengths), which `null --like`,
//! `compare` and `design` simulate.

pub mod bcf;
pub mod layout;
pub mod locus;
pub mod map;
pub mod projection;
pub mod record;
pub mod vcf;

use self::layout::{Bed, BedLineError, BedUse, ContigPlan, Layout, Loci};
use self::locus::{LocusSums, NoHaplotypes, Polarity};
use self::map::{MapLineError, SampleMap};
use self::projection::Projector;
use self::record::{Ancestral, Call, SiteRecord};
use self::vcf::{Alternates, RecordError};
use crate::stats::stat_columns;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap, HashSet};
use std::io::{self, BufRead, Read};
use std::num::NonZero;
use std::path::Path;

/// Why observed data could not be read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A file could not be opened.
    #[error("cannot open {file}")]
    Open {
        /// The file.
        file: String,
        /// The cause.
        #[source]
        source: io::Error,
    },
    /// Reading failed mid-file (truncated or corrupt compression, invalid UTF-8).
    #[error("{file}, {unit} {line}: cannot read (truncated or corrupt file?)")]
    Read {
        /// The file.
        file: String,
        /// `line` (VCF text) or `record` (BCF).
        unit: &'static str,
        /// The line (record) being read.
        line: usize,
        /// The cause.
        #[source]
        source: io::Error,
    },
    /// The VCF header is invalid.
    #[error("{file}, line {line}")]
    Header {
        /// The file.
        file: String,
        /// 1-based line.
        line: usize,
        /// What is wrong.
        #[source]
        source: vcf::HeaderError,
    },
    /// A record is invalid.
    #[error("{file}, {unit} {line}")]
    Record {
        /// The file.
        file: String,
        /// `line` (VCF text) or `record` (BCF).
        unit: &'static str,
        /// 1-based line (record).
        line: usize,
        /// The column (and sample) and what is wrong.
        #[source]
        source: Box<RecordError>,
    },
    /// The sample map is invalid.
    #[error("sample map {file}")]
    Map {
        /// The file.
        file: String,
        /// The line and what is wrong.
        #[source]
        source: Box<MapLineError>,
    },
    /// A BED file (regions or mask) is invalid.
    #[error("{what} {file}")]
    Bed {
        /// `regions` or `mask`.
        what: &'static str,
        /// The file.
        file: String,
        /// The line and what is wrong.
        #[source]
        source: Box<BedLineError>,
    },
    /// A sample of the map is not a sample of the VCF.
    #[error("sample map {map}, line {line}: sample {sample} is not among the {count} samples of {vcf}")]
    SampleNotInVcf {
        /// The map file.
        map: String,
        /// Line of the sample in the map.
        line: usize,
        /// The sample.
        sample: String,
        /// The VCF file.
        vcf: String,
        /// Samples in the VCF header.
        count: usize,
    },
    /// A missing genotype at a used site while missing data are refused.
    #[error(
        "{file}, {unit} {line}, column GT, sample {sample}: missing genotype at a site otherwise usable; \
         choose --project M (hypergeometric projection of every site to M sequences, M <= {n}) \
         or --drop-missing (use only sites called in all {n} sequences)"
    )]
    MissingData {
        /// The VCF file.
        file: String,
        /// `line` or `record`.
        unit: &'static str,
        /// 1-based line (record).
        line: usize,
        /// The first sample with a missing call there.
        sample: String,
        /// Sequences in the mapped samples.
        n: u32,
    },
    /// Records out of order where loci need order.
    #[error(
        "{file}, {unit} {line}: {contig}:{position} comes after {contig}:{previous}; windows, regions and masks \
         need the records sorted by position within each contig: sort the file"
    )]
    Unsorted {
        /// The file.
        file: String,
        /// `line` or `record`.
        unit: &'static str,
        /// 1-based line (record).
        line: usize,
        /// The contig.
        contig: String,
        /// This record's position.
        position: u64,
        /// The largest position before it.
        previous: u64,
    },
    /// A contig whose records are not together.
    #[error(
        "{file}, {unit} {line}: contig {contig} appears again after other contigs; each contig is a locus (or holds \
         loci) and its records must come together: sort the file by contig"
    )]
    ContigSplit {
        /// The file.
        file: String,
        /// `line` or `record`.
        unit: &'static str,
        /// 1-based line (record).
        line: usize,
        /// The contig.
        contig: String,
    },
    /// A record past the contig's declared length.
    #[error(
        "{file}, {unit} {line}: position {position} lies beyond the length {length} of contig {contig} in the header"
    )]
    BeyondContig {
        /// The file.
        file: String,
        /// `line` or `record`.
        unit: &'static str,
        /// 1-based line (record).
        line: usize,
        /// The contig.
        contig: String,
        /// The position.
        position: u64,
        /// The declared length.
        length: u64,
    },
    /// No locus with a callable site.
    #[error("{file}: no locus has a callable site ({why})")]
    NoLoci {
        /// The VCF.
        file: String,
        /// Why.
        why: String,
    },
    /// A window size of 0.
    #[error("--windows 0: a window needs at least one base")]
    ZeroWindow,
    /// A projection size out of range.
    #[error("--project {m}: the projected sample size must be between 2 and the {n} mapped sequences")]
    Projection {
        /// The requested size.
        m: u32,
        /// Mapped sequences.
        n: u32,
    },
    /// The sample size cannot be known.
    #[error("{file}: no records, so the ploidy of plant {sample} is unknown; give a ploidy column in the sample map")]
    NoRecords {
        /// The VCF file.
        file: String,
        /// A sample with unknown ploidy.
        sample: String,
    },
    /// Fewer than two sequences.
    #[error("the mapped samples hold {n} sequence(s) (haploid genomes); at least 2 are needed")]
    TooFewSequences {
        /// Mapped sequences.
        n: u32,
    },
}

/// What to do with missing genotypes at otherwise usable sites.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Missing {
    /// Refuse (the default): the error asks for one of the other two.
    #[default]
    Refuse,
    /// Drop every site with a missing call among the mapped sequences.
    Drop,
    /// Project every site with at least M called sequences to M (hypergeometric).
    Project(u32),
}

/// How to read the data: missing genotypes, loci and mask.
#[derive(Debug, Clone, Default)]
pub struct Options {
    /// Missing-data treatment.
    pub missing: Missing,
    /// Loci and callable mask.
    pub layout: Layout,
    /// Names of the regions and mask files, for the output.
    pub files: LayoutFiles,
}

/// Names of the files that made the layout.
#[derive(Debug, Clone, Default, Serialize, PartialEq, Eq)]
pub struct LayoutFiles {
    /// `--regions` file.
    pub regions: Option<String>,
    /// `--mask` file.
    pub mask: Option<String>,
}

impl Options {
    /// Options from the command line: windows in bases, BED files of regions and mask.
    pub fn from_files(
        missing: Missing,
        windows: Option<u64>,
        regions: Option<&Path>,
        mask: Option<&Path>,
    ) -> Result<Options, Error> {
        let read = |path: &Path, what: &'static str, usage: BedUse| -> Result<Bed, Error> {
            let file = path.display().to_string();
            let f = std::fs::File::open(path).map_err(|source| Error::Open { file: file.clone(), source })?;
            Bed::read(io::BufReader::new(f), usage).map_err(|e| Error::Bed { what, file, source: Box::new(e) })
        };
        let loci = match (windows, regions) {
            (Some(0), _) => return Err(Error::ZeroWindow),
            (Some(w), _) => Loci::Windows(w),
            (None, Some(r)) => Loci::Regions(read(r, "regions", BedUse::Regions)?),
            (None, None) => Loci::Contigs,
        };
        let callable = mask.map(|m| read(m, "mask", BedUse::Mask)).transpose()?;
        Ok(Options {
            missing,
            layout: Layout { loci, mask: callable },
            files: LayoutFiles {
                regions: regions.filter(|_| windows.is_none()).map(|p| p.display().to_string()),
                mask: mask.map(|p| p.display().to_string()),
            },
        })
    }
}

/// Input file names and format, recorded in the output.
#[derive(Debug, Clone, Serialize)]
pub struct Inputs {
    /// The VCF (or BCF).
    pub vcf: String,
    /// The sample map.
    pub samples: String,
    /// `vcf`, `vcf.gz` (gzip or bgzip) or `bcf`.
    pub format: String,
}

/// One group of the sampling design.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DesignEntry {
    /// Deme name.
    pub deme: String,
    /// Generations before the present.
    pub generations_ago: u64,
    /// Sequences of this group in the (projected) sample of size M: the group's share
    /// M n_g / n rounded by largest remainder, so that they sum to M.
    pub sequences: u32,
    /// Sequences of this group in the VCF (haploid genomes), n_g.
    pub sequences_in_data: u32,
    /// Plants (VCF samples) of this group.
    pub plants: u32,
}

/// Sites skipped, by reason.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct SkippedSites {
    /// Outside every locus (regions), or at position 0.
    pub outside_loci: u64,
    /// Outside the mask of callable sites.
    pub not_callable: u64,
    /// More than one ALT allele.
    pub multi_allelic: u64,
    /// Indel, symbolic allele or multi-base REF/ALT.
    pub not_snp: u64,
    /// FILTER other than PASS or `.`.
    pub filtered: u64,
    /// AA matching neither REF nor ALT.
    pub ancestral_allele_unknown: u64,
    /// A missing call, with [`Missing::Drop`].
    pub missing_data: u64,
    /// Fewer called sequences than M, with [`Missing::Project`].
    pub too_few_called: u64,
    /// No ALT allele, or one allele in all called mapped sequences.
    pub monomorphic: u64,
}

/// Counts of records and sites.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct SiteCounts {
    /// Records read.
    pub records: u64,
    /// Sites used (segregating biallelic SNPs in the mapped samples).
    pub used: u64,
    /// Used sites with an ancestral allele (INFO AA).
    pub polarised: u64,
    /// Used sites without one: folded spectrum only.
    pub unpolarised: u64,
    /// Skipped sites by reason.
    pub skipped: SkippedSites,
}

/// The missing-data treatment applied.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ProjectionInfo {
    /// `complete` (no missing data allowed), `drop_missing` or `project`.
    pub mode: &'static str,
    /// Sample size M of the spectrum and of every SFS statistic.
    pub m: u32,
    /// Sequences n in the mapped samples.
    pub n: u32,
}

/// S, π and θ_W divided by the callable length.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PerSite {
    /// S per callable site.
    pub segregating_sites: Option<f64>,
    /// π per callable site.
    pub pi: Option<f64>,
    /// θ_W per callable site.
    pub theta_w: Option<f64>,
}

impl PerSite {
    fn of(values: &[Option<f64>], callable: u64) -> PerSite {
        let per = |v: Option<f64>| v.filter(|_| callable > 0).map(|x| x / callable as f64);
        PerSite { segregating_sites: per(values[0]), pi: per(values[1]), theta_w: per(values[2]) }
    }
}

/// How the loci were made.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LayoutInfo {
    /// `contigs`, `windows` or `regions`.
    pub loci: &'static str,
    /// Window size in bases, with `windows`.
    pub window: Option<u64>,
    /// The files of regions and mask.
    #[serde(flatten)]
    pub files: LayoutFiles,
    /// Number of loci.
    pub count: usize,
    /// Callable sites over all loci.
    pub callable_sites: u64,
    /// Loci dropped because none of their bases is callable.
    pub dropped_loci: usize,
}

/// One locus of the observed data: where, how long, and its statistics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LocusRow {
    /// Contig.
    pub contig: String,
    /// 0-based start (BED convention).
    pub start: u64,
    /// End, exclusive.
    pub end: u64,
    /// Callable bases (the span without a mask).
    pub callable_sites: u64,
    /// Used sites.
    pub used_sites: u64,
    /// Values in the order of [`stat_columns`] (`null` when undefined).
    #[serde(serialize_with = "serialize_values")]
    pub values: Vec<Option<f64>>,
    /// Per-site values.
    pub per_site: PerSite,
    #[serde(skip)]
    rank: usize,
}

fn serialize_values<S: serde::Serializer>(v: &[Option<f64>], s: S) -> Result<S::Ok, S::Error> {
    s.collect_seq(v.iter())
}

/// The result of [`observe`]; serialised as `observed.json`.
#[derive(Debug, Clone, Serialize)]
pub struct Observed {
    /// The run that made this file: version, command, seed, inputs with checksums, settings
    /// (set by the command; absent for library callers that give none).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub run: Option<crate::report::record::RunRecord>,
    /// seedline version.
    pub seedline: &'static str,
    /// Input files.
    pub inputs: Inputs,
    /// Deme names, in order of first appearance in the sample map.
    pub demes: Vec<String>,
    /// Sampling design: one entry per (deme, generations_ago), in map order.
    pub design: Vec<DesignEntry>,
    /// Missing-data treatment and sample sizes.
    pub projection: ProjectionInfo,
    /// Statistic names: [`stat_columns`], then with several loci the across-locus mean and
    /// variance columns of [`crate::stats::locus_spread_columns`].
    pub columns: Vec<String>,
    /// Genome-wide statistic values by name (`null` when undefined).
    pub statistics: BTreeMap<String, Option<f64>>,
    /// Genome-wide S, π and θ_W per callable site.
    pub per_site: PerSite,
    /// How the loci were made.
    pub layout: LayoutInfo,
    /// Column names of `loci[].values`: [`stat_columns`].
    pub locus_columns: Vec<String>,
    /// One entry per locus, in contig order (header order, then first appearance) and by start.
    pub loci: Vec<LocusRow>,
    /// Unfolded spectrum ξ_1..ξ_{M-1} of the polarised sites; `null` when none is polarised.
    pub xi: Option<Vec<f64>>,
    /// Folded spectrum η_1..η_{floor(M/2)} of all used sites.
    pub eta: Vec<f64>,
    /// Records, used and skipped sites.
    pub sites: SiteCounts,
    /// VCF samples not in the sample map (skipped).
    pub unmapped_vcf_samples: Vec<String>,
    /// What the reader should know about how the numbers were obtained.
    pub notes: Vec<String>,
}

impl Observed {
    /// Values in the order of [`Observed::columns`].
    pub fn values(&self) -> Vec<Option<f64>> {
        self.columns.iter().map(|c| self.statistics.get(c).copied().flatten()).collect()
    }
}

/// A mapped sample: its VCF column, deme and ploidy.
struct Mapped {
    vcf_index: usize,
    name: String,
    deme: usize,
    ploidy: Option<u8>,
    ploidy_from_map: bool,
}

/// Sizes fixed once every ploidy is known (after the first record).
struct Shape {
    n: u32,
    projector: Projector,
    deme_size: Vec<u32>,
    empty: LocusSums,
}

/// The contig being read.
struct OpenContig {
    name: String,
    rank: usize,
    plan: ContigPlan,
    last: Option<u64>,
    open: Option<(usize, LocusSums)>,
    next: usize,
}

/// Where records are read from, with errors already located.
trait Records {
    fn read(&mut self, rec: &mut SiteRecord, names: &[String]) -> Result<bool, Error>;
    /// `("line", n)` or `("record", n)` of the last record.
    fn at(&self) -> (&'static str, usize);
}

struct Text<R> {
    inner: vcf::TextRecords<R>,
    file: String,
}

impl<R: BufRead> Records for Text<R> {
    fn read(&mut self, rec: &mut SiteRecord, names: &[String]) -> Result<bool, Error> {
        let out = self.inner.read(rec);
        let line = self.inner.line();
        out.map_err(|e| match e {
            vcf::ReadError::Io(source) => Error::Read { file: self.file.clone(), unit: "line", line: line + 1, source },
            vcf::ReadError::Record(source) => {
                Error::Record { file: self.file.clone(), unit: "line", line, source: Box::new(source) }
            }
            vcf::ReadError::Sample { index, source } => {
                let source = RecordError { column: "GT", sample: names.get(index).cloned(), kind: source };
                Error::Record { file: self.file.clone(), unit: "line", line, source: Box::new(source) }
            }
        })
    }

    fn at(&self) -> (&'static str, usize) {
        ("line", self.inner.line())
    }
}

struct Binary<R> {
    inner: bcf::BcfRecords<R>,
    file: String,
}

impl<R: Read> Records for Binary<R> {
    fn read(&mut self, rec: &mut SiteRecord, names: &[String]) -> Result<bool, Error> {
        let out = self.inner.read(rec);
        let line = self.inner.record_number();
        out.map_err(|e| match e {
            bcf::BcfError::Io(source) => {
                Error::Read { file: self.file.clone(), unit: "record", line: line.max(1), source }
            }
            bcf::BcfError::Field { column, sample, source } => {
                let source = RecordError { column, sample: sample.and_then(|i| names.get(i).cloned()), kind: source };
                Error::Record { file: self.file.clone(), unit: "record", line, source: Box::new(source) }
            }
        })
    }

    fn at(&self) -> (&'static str, usize) {
        ("record", self.inner.record_number())
    }
}

/// A decompressed input, its format told by its first bytes.
pub struct Input<'a> {
    reader: Box<dyn BufRead + 'a>,
    compressed: bool,
}

/// Opens a VCF or BCF file: plain, gzip or bgzip (by the gzip magic bytes; bgzip by its
/// `BC` extra field, read with noodles).
pub fn open_input(path: &Path) -> Result<Input<'static>, Error> {
    let file = path.display().to_string();
    if path.is_dir() {
        // Opening a directory succeeds on Unix; reading it fails with a puzzling message.
        let source = io::Error::new(
            io::ErrorKind::InvalidInput,
            "it is a directory: give a VCF (plain, gzip or bgzip) or BCF file",
        );
        return Err(Error::Open { file, source });
    }
    let f = std::fs::File::open(path).map_err(|source| Error::Open { file: file.clone(), source })?;
    let mut r = io::BufReader::with_capacity(1 << 16, f);
    let magic = r.fill_buf().map_err(|source| Error::Read { file, unit: "line", line: 1, source })?;
    let gzip = magic.starts_with(&[0x1f, 0x8b]);
    // RFC 1952: FLG bit 2 = FEXTRA; XLEN at bytes 10-11; BGZF's subfield is `BC` (SAM spec §4.1).
    let bgzf = gzip && magic.len() >= 14 && magic[3] & 4 != 0 && &magic[12..14] == b"BC";
    // Decompression runs on other threads, so that reading costs about the larger of
    // decompressing and parsing rather than their sum.
    let reader: Box<dyn BufRead> = if bgzf {
        Box::new(noodles::bgzf::io::MultithreadedReader::with_worker_count(NonZero::<usize>::MIN, r))
    } else if gzip {
        Box::new(ThreadedReader::new(flate2::bufread::MultiGzDecoder::new(r)))
    } else {
        Box::new(r)
    };
    Ok(Input { reader, compressed: gzip })
}

/// A reader that reads `inner` on its own thread, a block ahead.
struct ThreadedReader {
    rx: std::sync::mpsc::Receiver<io::Result<Vec<u8>>>,
    back: std::sync::mpsc::SyncSender<Vec<u8>>,
    block: Vec<u8>,
    at: usize,
}

impl ThreadedReader {
    fn new<R: Read + Send + 'static>(mut inner: R) -> Self {
        let (tx, rx) = std::sync::mpsc::sync_channel::<io::Result<Vec<u8>>>(4);
        let (back, spare) = std::sync::mpsc::sync_channel::<Vec<u8>>(8);
        std::thread::spawn(move || {
            loop {
                let mut buf = spare.try_recv().unwrap_or_default();
                buf.resize(1 << 18, 0);
                let mut filled = 0;
                // Fill the block (short reads are common) so that blocks stay large.
                let result = loop {
                    match inner.read(&mut buf[filled..]) {
                        Ok(0) => break Ok(()),
                        Ok(k) => {
                            filled += k;
                            if filled == buf.len() {
                                break Ok(());
                            }
                        }
                        Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                        Err(e) => break Err(e),
                    }
                };
                buf.truncate(filled);
                let end = filled == 0;
                let sent = match result {
                    Ok(()) => tx.send(Ok(buf)),
                    Err(e) => {
                        let _ = tx.send(Ok(buf));
                        let _ = tx.send(Err(e));
                        return;
                    }
                };
                if sent.is_err() || end {
                    return;
                }
            }
        });
        ThreadedReader { rx, back, block: Vec::new(), at: 0 }
    }
}

impl Read for ThreadedReader {
    fn read(&mut self, out: &mut [u8]) -> io::Result<usize> {
        let available = self.fill_buf()?;
        let k = out.len().min(available.len());
        out[..k].copy_from_slice(&available[..k]);
        self.consume(k);
        Ok(k)
    }
}

impl BufRead for ThreadedReader {
    fn fill_buf(&mut self) -> io::Result<&[u8]> {
        while self.at == self.block.len() {
            match self.rx.recv() {
                Ok(Ok(b)) if b.is_empty() => return Ok(&[]),
                Ok(Ok(b)) => {
                    let old = std::mem::replace(&mut self.block, b);
                    let _ = self.back.try_send(old);
                    self.at = 0;
                }
                Ok(Err(e)) => return Err(e),
                Err(_) => return Ok(&[]),
            }
        }
        Ok(&self.block[self.at..])
    }

    fn consume(&mut self, amount: usize) {
        self.at = (self.at + amount).min(self.block.len());
    }
}

impl<'a> Input<'a> {
    /// An input from an already decompressed stream.
    pub fn from_reader(reader: Box<dyn BufRead + 'a>) -> Self {
        Input { reader, compressed: false }
    }
}

/// Reads the VCF text and the sample map and computes the observed statistics, each contig
/// one locus. `vcf_name` and `map_name` label errors and the output.
pub fn observe<R: BufRead, S: BufRead>(
    vcf_in: R,
    vcf_name: &str,
    map_in: S,
    map_name: &str,
    missing: Missing,
) -> Result<Observed, Error> {
    let options = Options { missing, ..Options::default() };
    observe_with(Input::from_reader(Box::new(vcf_in)), vcf_name, map_in, map_name, &options)
}

/// [`observe`] with loci, mask and any input format.
pub fn observe_with<S: BufRead>(
    input: Input<'_>,
    vcf_name: &str,
    map_in: S,
    map_name: &str,
    options: &Options,
) -> Result<Observed, Error> {
    let map = SampleMap::read(map_in)
        .map_err(|source| Error::Map { file: map_name.to_string(), source: Box::new(source) })?;
    let Input { mut reader, compressed } = input;
    let head = reader.fill_buf().map_err(|source| Error::Read {
        file: vcf_name.to_string(),
        unit: "line",
        line: 1,
        source,
    })?;
    let file = vcf_name.to_string();
    if head.starts_with(b"BCF") {
        let (r, header, parts) = bcf::read_header(reader).map_err(|source| Error::Read {
            file: file.clone(),
            unit: "record",
            line: 0,
            source,
        })?;
        let mut run = Run::new(&map, &parts, vcf_name, map_name, options)?;
        let idx: Vec<usize> = run.mapped.iter().map(|m| m.vcf_index).collect();
        let mut src = Binary { inner: bcf::BcfRecords::new(r, header, &idx), file };
        run.format = "bcf";
        run.read_all(&mut src, &parts.samples)?;
        run.finish(&map, &parts, vcf_name, map_name)
    } else {
        let parts = vcf::read_header(&mut reader).map_err(|(line, source)| match source {
            vcf::HeaderError::Io(e) => Error::Read { file: file.clone(), unit: "line", line, source: e },
            source => Error::Header { file: file.clone(), line, source },
        })?;
        let mut run = Run::new(&map, &parts, vcf_name, map_name, options)?;
        let idx: Vec<usize> = run.mapped.iter().map(|m| m.vcf_index).collect();
        let mut src = Text { inner: vcf::TextRecords::new(reader, parts.lines, parts.samples.len(), &idx), file };
        run.format = if compressed { "vcf.gz" } else { "vcf" };
        run.read_all(&mut src, &parts.samples)?;
        run.finish(&map, &parts, vcf_name, map_name)
    }
}

/// [`observe_with`] on files: the VCF or BCF (plain, gzip or bgzip) and the sample map.
pub fn observe_files_with(vcf: &Path, samples: &Path, options: &Options) -> Result<Observed, Error> {
    let map_name = samples.display().to_string();
    let map = std::fs::File::open(samples).map_err(|source| Error::Open { file: map_name.clone(), source })?;
    let input = open_input(vcf)?;
    observe_with(input, &vcf.display().to_string(), io::BufReader::new(map), &map_name, options)
}

/// [`observe`] on files, each contig one locus.
pub fn observe_files(vcf: &Path, samples: &Path, missing: Missing) -> Result<Observed, Error> {
    observe_files_with(vcf, samples, &Options { missing, ..Options::default() })
}

/// The state of one pass over the records.
struct Run<'a> {
    file: &'a str,
    options: &'a Options,
    mapped: Vec<Mapped>,
    demes: usize,
    header_contigs: HashMap<String, (usize, Option<u64>)>,
    shape: Option<Shape>,
    contig: Option<OpenContig>,
    seen: HashSet<String>,
    next_rank: usize,
    rows: Vec<LocusRow>,
    haplotypes: Vec<Result<usize, NoHaplotypes>>,
    total: Option<LocusSums>,
    counts: SiteCounts,
    dropped: usize,
    unknown_length: Vec<String>,
    format: &'static str,
    // Per-record scratch.
    alleles: Vec<u8>,
    m_deme: Vec<u32>,
    c_deme: Vec<u32>,
    /// Position of each mapped sample's first sequence in `alleles`, where sequences are
    /// grouped by deme so that per-deme counts run over contiguous ranges.
    offset: Vec<usize>,
    /// The range of each deme in `alleles`.
    deme_range: Vec<(usize, usize)>,
    /// The ploidy of every mapped sample, when they all have the same.
    uniform_ploidy: Option<u8>,
    /// `offset[k] = p k`: mapped order is already deme-grouped.
    identity_layout: bool,
    scratch: Vec<Call>,
}

impl<'a> Run<'a> {
    fn new(
        map: &SampleMap,
        header: &vcf::VcfHeader,
        vcf_name: &'a str,
        map_name: &str,
        options: &'a Options,
    ) -> Result<Self, Error> {
        let mut mapped = resolve_samples(map, header, map_name, vcf_name)?;
        mapped.sort_by_key(|m| m.vcf_index);
        let demes = map.demes.len();
        let header_contigs =
            header.contigs.iter().enumerate().map(|(i, (name, len))| (name.clone(), (i, *len))).collect();
        Ok(Run {
            file: vcf_name,
            options,
            mapped,
            demes,
            header_contigs,
            shape: None,
            contig: None,
            seen: HashSet::new(),
            next_rank: header.contigs.len(),
            rows: Vec::new(),
            haplotypes: Vec::new(),
            total: None,
            counts: SiteCounts::default(),
            dropped: 0,
            unknown_length: Vec::new(),
            format: "vcf",
            alleles: Vec::new(),
            m_deme: vec![0; demes],
            c_deme: vec![0; demes],
            offset: Vec::new(),
            deme_range: Vec::new(),
            uniform_ploidy: None,
            identity_layout: false,
            scratch: Vec::new(),
        })
    }

    fn read_all(&mut self, src: &mut dyn Records, names: &[String]) -> Result<(), Error> {
        let mut rec = SiteRecord::new(self.mapped.len());
        while src.read(&mut rec, names)? {
            let (unit, line) = src.at();
            self.record(&rec, unit, line)?;
        }
        Ok(())
    }

    /// Fixes the sample sizes once every ploidy is known.
    fn set_shape(&mut self) -> Result<(), Error> {
        let n: u32 = self.mapped.iter().map(|s| u32::from(s.ploidy.unwrap_or(0))).sum();
        let m = check_m(self.options.missing, n)?;
        let mut deme_size = vec![0u32; self.demes];
        for s in &self.mapped {
            deme_size[s.deme] += u32::from(s.ploidy.unwrap_or(0));
        }
        let mut start = vec![0usize; self.demes];
        for d in 1..self.demes {
            start[d] = start[d - 1] + deme_size[d - 1] as usize;
        }
        self.deme_range = (0..self.demes).map(|d| (start[d], start[d] + deme_size[d] as usize)).collect();
        self.offset = self
            .mapped
            .iter()
            .map(|s| {
                let o = start[s.deme];
                start[s.deme] += s.ploidy.unwrap_or(0) as usize;
                o
            })
            .collect();
        let first = self.mapped.first().and_then(|s| s.ploidy);
        self.uniform_ploidy = first.filter(|&p| self.mapped.iter().all(|s| s.ploidy == Some(p)));
        self.identity_layout =
            self.uniform_ploidy.is_some_and(|p| self.offset.iter().enumerate().all(|(k, &o)| o == usize::from(p) * k));
        let empty = LocusSums::new(m, self.demes, n as usize);
        self.total = Some(empty.clone());
        self.alleles = vec![Call::MISSING; n as usize];
        self.shape = Some(Shape { n, projector: Projector::new(m), deme_size, empty });
        Ok(())
    }

    /// Puts the calls of the mapped samples into `alleles` (one per sequence), checking
    /// ploidies; returns whether every call is phased (haploid calls are).
    fn calls(&mut self, rec: &SiteRecord, unit: &'static str, line: usize) -> Result<bool, Error> {
        if let Some((p, phased)) = rec.uniform {
            if self.uniform_ploidy == Some(p) {
                let from = &rec.uniform_alleles[..self.alleles.len()];
                if self.identity_layout {
                    self.alleles.copy_from_slice(from);
                } else {
                    let p = usize::from(p);
                    for (k, &o) in self.offset.iter().enumerate() {
                        self.alleles[o..o + p].copy_from_slice(&from[p * k..p * k + p]);
                    }
                }
                return Ok(phased);
            }
            // The first record, or ploidies that differ: read it call by call.
            let mut calls = std::mem::take(&mut self.scratch);
            calls.clear();
            let pu = usize::from(p);
            calls.extend(rec.uniform_alleles.chunks(pu).take(self.mapped.len()).map(|a| Call {
                alleles: [a[0], if pu == 2 { a[1] } else { Call::MISSING }],
                count: p,
                phased,
                lone_missing: false,
            }));
            let out = self.calls_of(&calls, unit, line);
            self.scratch = calls;
            return out;
        }
        self.calls_of(&rec.calls, unit, line)
    }

    fn calls_of(&mut self, calls: &[Call], unit: &'static str, line: usize) -> Result<bool, Error> {
        let mut phased = true;
        let first = self.shape.is_none();
        for (k, (s, c)) in self.mapped.iter_mut().zip(calls).enumerate() {
            let ploidy = *s.ploidy.get_or_insert(c.count);
            if c.count != ploidy {
                if c.lone_missing {
                    if !first {
                        let o = self.offset[k];
                        self.alleles[o..o + ploidy as usize].fill(Call::MISSING);
                    }
                    continue;
                }
                let origin = if s.ploidy_from_map { " (sample map)" } else { " (its first GT)" };
                let kind = vcf::FieldError::Ploidy { value: c.render(), got: c.count as usize, ploidy, origin };
                let source = RecordError { column: "GT", sample: Some(s.name.clone()), kind };
                return Err(Error::Record { file: self.file.to_string(), unit, line, source: Box::new(source) });
            }
            if !first {
                let o = self.offset[k];
                self.alleles[o] = c.alleles[0];
                if ploidy == 2 {
                    self.alleles[o + 1] = c.alleles[1];
                }
            }
            phased &= c.phased || ploidy == 1;
        }
        if first {
            self.set_shape()?;
            // Now that the sizes are known, lay out this first record's calls.
            for (k, (s, c)) in self.mapped.iter().zip(calls).enumerate() {
                let (p, o) = (s.ploidy.unwrap_or(0) as usize, self.offset[k]);
                if c.count as usize == p {
                    self.alleles[o..o + p].copy_from_slice(&c.alleles[..p]);
                } else {
                    self.alleles[o..o + p].fill(Call::MISSING);
                }
            }
        }
        Ok(phased)
    }

    fn record(&mut self, rec: &SiteRecord, unit: &'static str, line: usize) -> Result<(), Error> {
        self.counts.records += 1;
        let phased = self.calls(rec, unit, line)?;
        if self.contig.as_ref().is_none_or(|c| c.name != rec.contig) {
            self.close_contig();
            if !self.seen.insert(rec.contig.clone()) {
                return Err(Error::ContigSplit { file: self.file.to_string(), unit, line, contig: rec.contig.clone() });
            }
            self.open_contig(&rec.contig);
        }
        let needs_order = self.options.layout.needs_order();
        let c = self.contig.as_mut().expect("opened above");
        if rec.position == 0 {
            self.counts.skipped.outside_loci += 1;
            return Ok(());
        }
        let x = rec.position - 1;
        if let Some(len) = c.plan.length
            && x >= len
        {
            return Err(Error::BeyondContig {
                file: self.file.to_string(),
                unit,
                line,
                contig: c.name.clone(),
                position: rec.position,
                length: len,
            });
        }
        if needs_order && c.last.is_some_and(|l| x < l) {
            return Err(Error::Unsorted {
                file: self.file.to_string(),
                unit,
                line,
                contig: c.name.clone(),
                position: rec.position,
                previous: c.last.map_or(0, |l| l + 1),
            });
        }
        c.last = Some(c.last.map_or(x, |l| l.max(x)));
        let Some(idx) = c.plan.index_of(x) else {
            self.counts.skipped.outside_loci += 1;
            return Ok(());
        };
        if c.open.as_ref().is_none_or(|(i, _)| *i != idx) {
            self.advance_to(idx);
        }
        if !self.options.layout.is_callable(&rec.contig, x) {
            self.counts.skipped.not_callable += 1;
            return Ok(());
        }
        self.site(rec, phased, unit, line)
    }

    /// Classifies a record inside a locus and adds it when it is a used site.
    fn site(&mut self, rec: &SiteRecord, phased: bool, unit: &'static str, line: usize) -> Result<(), Error> {
        let skipped = &mut self.counts.skipped;
        let alt_base = match rec.alternates {
            Alternates::Multi(_) => {
                skipped.multi_allelic += 1;
                return Ok(());
            }
            Alternates::Other => {
                skipped.not_snp += 1;
                return Ok(());
            }
            Alternates::Snp(b) if rec.reference.is_some() => b,
            Alternates::Snp(_) => {
                skipped.not_snp += 1;
                return Ok(());
            }
            Alternates::None => {
                if rec.passes {
                    skipped.monomorphic += 1;
                } else {
                    skipped.filtered += 1;
                }
                return Ok(());
            }
        };
        if !rec.passes {
            skipped.filtered += 1;
            return Ok(());
        }
        let polarity = match rec.ancestral {
            Ancestral::Absent => Polarity::Unknown,
            Ancestral::Base(b) if Some(b) == rec.reference => Polarity::Alt,
            Ancestral::Base(b) if b == alt_base => Polarity::Ref,
            _ => {
                skipped.ancestral_allele_unknown += 1;
                return Ok(());
            }
        };
        let shape = self.shape.as_mut().expect("set by the first record");
        // Derived allele index: 1 (ALT) unless AA = ALT.
        let derived = u8::from(polarity != Polarity::Ref);
        // Called and derived sequences per deme, each over its contiguous range.
        for (d, &(a, b)) in self.deme_range.iter().enumerate() {
            let range = &self.alleles[a..b];
            self.m_deme[d] = range.iter().filter(|&&x| x != Call::MISSING).count() as u32;
            self.c_deme[d] = range.iter().filter(|&&x| x == derived).count() as u32;
        }
        let n_called: u32 = self.m_deme.iter().sum();
        let j: u32 = self.c_deme.iter().sum();
        if n_called < shape.n {
            match self.options.missing {
                Missing::Refuse => {
                    let who =
                        self.mapped.iter().zip(&self.offset).find(|&(s, &o)| {
                            self.alleles[o..o + s.ploidy.unwrap_or(0) as usize].contains(&Call::MISSING)
                        });
                    return Err(Error::MissingData {
                        file: self.file.to_string(),
                        unit,
                        line,
                        sample: who.map_or_else(String::new, |(s, _)| s.name.clone()),
                        n: shape.n,
                    });
                }
                Missing::Drop => {
                    skipped.missing_data += 1;
                    return Ok(());
                }
                Missing::Project(m) if n_called < m => {
                    skipped.too_few_called += 1;
                    return Ok(());
                }
                Missing::Project(_) => {}
            }
        }
        if j == 0 || j == n_called {
            skipped.monomorphic += 1;
            return Ok(());
        }
        self.counts.used += 1;
        if polarity == Polarity::Unknown {
            self.counts.unpolarised += 1;
        } else {
            self.counts.polarised += 1;
        }
        let c = self.contig.as_mut().expect("a record is in a contig");
        let sums = &mut c.open.as_mut().expect("advanced to the record's locus").1;
        let site = locus::Site { n_called, derived: j, polarity, m: &self.m_deme, c: &self.c_deme };
        sums.add_site(&mut shape.projector, &site, &shape.deme_size);
        if !phased {
            sums.spoil_haplotypes(NoHaplotypes::Unphased);
        }
        if n_called < shape.n {
            sums.spoil_haplotypes(NoHaplotypes::Missing);
        }
        sums.add_carriers(&self.alleles, derived);
        Ok(())
    }

    fn open_contig(&mut self, name: &str) {
        let (rank, length) = match self.header_contigs.get(name) {
            Some(&(i, len)) => (i, len),
            None => {
                self.next_rank += 1;
                (self.next_rank - 1, None)
            }
        };
        if length.is_none() && !matches!(self.options.layout.loci, Loci::Regions(_)) {
            self.unknown_length.push(name.to_string());
        }
        let plan = ContigPlan::new(&self.options.layout, name, length);
        self.contig = Some(OpenContig { name: name.to_string(), rank, plan, last: None, open: None, next: 0 });
    }

    /// Emits the open locus and the empty ones before `idx`, then opens locus `idx`.
    fn advance_to(&mut self, idx: usize) {
        let mut c = self.contig.take().expect("a contig is open");
        if let Some((i, sums)) = c.open.take() {
            self.emit(&c, i, Some(sums));
        }
        for i in c.next..idx {
            self.emit(&c, i, None);
        }
        let empty = self.shape.as_ref().expect("set by the first record").empty.clone();
        c.open = Some((idx, empty));
        c.next = idx + 1;
        self.contig = Some(c);
    }

    /// Emits every locus of the contig not yet emitted.
    fn close_contig(&mut self) {
        let Some(mut c) = self.contig.take() else { return };
        if let Some((i, sums)) = c.open.take() {
            self.emit(&c, i, Some(sums));
        }
        for i in c.next..c.plan.count(c.last) {
            self.emit(&c, i, None);
        }
    }

    /// One locus row from its sums (`None`: a locus without records).
    fn emit(&mut self, c: &OpenContig, i: usize, sums: Option<LocusSums>) {
        let (start, end) = c.plan.span(i, c.last);
        let callable = self.options.layout.callable(&c.name, start, end);
        if callable == 0 {
            self.dropped += 1;
            return;
        }
        let shape = self.shape.as_ref().expect("set before any locus is emitted");
        let sums = sums.unwrap_or_else(|| shape.empty.clone());
        let hap = sums.haplotypes();
        // H is filled in as if the data were polarised; [`Run::finish`] clears it otherwise.
        let values = sums.values(&shape.deme_size, true, hap.ok().map(|h| h as f64));
        self.total.as_mut().expect("set with the shape").absorb(&sums);
        self.haplotypes.push(hap);
        self.rows.push(LocusRow {
            contig: c.name.clone(),
            start,
            end,
            callable_sites: callable,
            used_sites: sums.used,
            per_site: PerSite::of(&values, callable),
            values,
            rank: c.rank,
        });
    }

    /// Loci of contigs without records: declared in the header with a length (contigs,
    /// windows), or holding regions.
    fn unseen_contigs(&mut self, header: &vcf::VcfHeader) {
        let mut names: Vec<(String, usize, Option<u64>)> = Vec::new();
        match &self.options.layout.loci {
            Loci::Regions(bed) => {
                for name in bed.contigs() {
                    if !self.seen.contains(name) {
                        let (rank, len) = self.header_contigs.get(name).copied().unwrap_or_else(|| {
                            self.next_rank += 1;
                            (self.next_rank - 1, None)
                        });
                        names.push((name.to_string(), rank, len));
                    }
                }
            }
            _ => {
                for (name, len) in &header.contigs {
                    if !self.seen.contains(name)
                        && let Some(l) = len
                    {
                        names.push((name.clone(), self.header_contigs[name].0, Some(*l)));
                    }
                }
            }
        }
        for (name, rank, len) in names {
            let plan = ContigPlan::new(&self.options.layout, &name, len);
            let c = OpenContig { name: name.clone(), rank, plan, last: None, open: None, next: 0 };
            self.seen.insert(name);
            for i in 0..c.plan.count(None) {
                self.emit(&c, i, None);
            }
        }
    }

    /// Turns the loci and running sums into the result.
    fn finish(
        mut self,
        map: &SampleMap,
        header: &vcf::VcfHeader,
        vcf_name: &str,
        map_name: &str,
    ) -> Result<Observed, Error> {
        if self.shape.is_none() {
            if let Some(s) = self.mapped.iter().find(|s| s.ploidy.is_none()) {
                return Err(Error::NoRecords { file: vcf_name.to_string(), sample: s.name.clone() });
            }
            self.set_shape()?;
        }
        self.close_contig();
        self.unseen_contigs(header);
        if self.rows.is_empty() {
            let why = match (&self.options.layout.loci, &self.options.layout.mask) {
                (_, Some(_)) => "the mask leaves no callable base in any locus",
                (Loci::Regions(_), _) => "the regions are empty",
                _ => "no record and no contig with a length in the header",
            };
            return Err(Error::NoLoci { file: vcf_name.to_string(), why: why.to_string() });
        }
        let shape = self.shape.as_ref().expect("set above");
        let (n, m) = (shape.n, shape.projector.m());
        let total = self.total.take().expect("set with the shape");
        let any_polarised = self.counts.polarised > 0;
        // Sort the rows and their haplotype counts together: contig rank, then start.
        let mut order: Vec<usize> = (0..self.rows.len()).collect();
        order.sort_by_key(|&i| (self.rows[i].rank, self.rows[i].start));
        let mut rows: Vec<LocusRow> = order.iter().map(|&i| self.rows[i].clone()).collect();
        let haps: Vec<Result<usize, NoHaplotypes>> = order.iter().map(|&i| self.haplotypes[i]).collect();
        if !any_polarised {
            for r in rows.iter_mut() {
                r.values[4] = None;
                r.values[5] = None;
            }
        }
        let hap_mean: Result<f64, NoHaplotypes> =
            haps.iter().map(|h| h.map(|x| x as f64)).sum::<Result<f64, _>>().map(|s| s / haps.len() as f64);
        let mut values = total.values(&shape.deme_size, any_polarised, hap_mean.ok());
        let names: Vec<&str> = map.demes.iter().map(String::as_str).collect();
        let locus_columns = stat_columns(&names);
        let mut columns = locus_columns.clone();
        if rows.len() > 1 {
            for (name, (mean, var)) in crate::stats::LOCUS_SPREAD.iter().zip(spread(&rows, &locus_columns)) {
                columns.push(format!("{name}_locus_mean"));
                columns.push(format!("{name}_locus_var"));
                values.push(mean);
                values.push(var);
            }
        }
        let statistics = columns.iter().cloned().zip(values.iter().copied()).collect();
        let callable: u64 = rows.iter().map(|r| r.callable_sites).sum();
        let pol = total.polarised_sfs();
        let all = total.all_sfs();

        let mut notes = Vec::new();
        let missing = self.options.missing;
        match missing {
            Missing::Project(_) => notes.push(format!(
                "every site with at least {m} of the {n} sequences called is projected to {m} sequences \
                 (hypergeometric; Marth et al. 2004): S and the spectra are expected values and may be fractional"
            )),
            Missing::Drop => notes.push(format!("only sites called in all {n} sequences are used (--drop-missing)")),
            Missing::Refuse => {}
        }
        let sites = &self.counts;
        if sites.used > 0 && !any_polarised {
            notes.push(format!(
                "no used site carries an ancestral allele (INFO AA{}): xi, fay_wu_h and fay_wu_h_norm are left empty; \
                 eta, S, pi, theta_w and tajima_d need no polarisation",
                if header.declares_aa { "" } else { ", not declared in the header" }
            ));
        } else if sites.unpolarised > 0 {
            notes.push(format!(
                "{} of {} used sites have no ancestral allele (INFO AA): they enter eta, S, pi, theta_w and tajima_d; \
                 xi, fay_wu_h and fay_wu_h_norm use the {} polarised sites only",
                sites.unpolarised, sites.used, sites.polarised
            ));
        }
        if let Err(why) = hap_mean {
            let spoiled = haps.iter().filter(|h| h.is_err()).count();
            notes.push(match why {
                NoHaplotypes::Projected => {
                    "haplotypes left empty: the count of distinct haplotypes is not defined for a projected sample"
                        .to_string()
                }
                NoHaplotypes::Unphased => format!(
                    "haplotypes left empty: some used diploid genotypes are unphased ({spoiled} of {} loci)",
                    haps.len()
                ),
                NoHaplotypes::Missing => format!(
                    "haplotypes left empty: some used sites have missing calls ({spoiled} of {} loci)",
                    haps.len()
                ),
            });
        }
        if total.deme_gaps > 0 {
            notes.push(format!(
                "{} (site, deme) pairs had fewer than 2 called sequences in the deme and add nothing to pi_<deme>",
                total.deme_gaps
            ));
        }
        let unmapped: Vec<String> =
            header.samples.iter().filter(|s| !map.entries.iter().any(|e| &e.sample == *s)).cloned().collect();
        if !unmapped.is_empty() {
            notes.push(format!("{} VCF sample(s) (plants) not in the sample map were skipped", unmapped.len()));
        }
        if map.entries.iter().any(|e| e.generations_ago > 0) {
            notes.push("samples of different ages are pooled as if contemporaneous in every statistic".to_string());
        }
        if !self.unknown_length.is_empty() {
            let shown: Vec<&str> = self.unknown_length.iter().take(5).map(String::as_str).collect();
            notes.push(format!(
                "{} contig(s) ({}{}) have no length in the header: each ends at its last record, and its callable \
                 length is counted to there; give ##contig lengths or --regions/--mask for exact lengths",
                self.unknown_length.len(),
                shown.join(", "),
                if self.unknown_length.len() > 5 { ", ..." } else { "" }
            ));
        }
        if self.dropped > 0 {
            notes.push(format!("{} loci without a callable base were dropped", self.dropped));
        }
        let empty = rows.iter().filter(|r| r.used_sites == 0).count();
        if empty > 0 && rows.len() > 1 {
            notes.push(format!("{empty} of {} loci have no used site (S = 0 there)", rows.len()));
        }
        let layout = LayoutInfo {
            loci: match self.options.layout.loci {
                Loci::Contigs => "contigs",
                Loci::Windows(_) => "windows",
                Loci::Regions(_) => "regions",
            },
            window: match self.options.layout.loci {
                Loci::Windows(w) => Some(w),
                _ => None,
            },
            files: self.options.files.clone(),
            count: rows.len(),
            callable_sites: callable,
            dropped_loci: self.dropped,
        };
        Ok(Observed {
            run: None,
            seedline: env!("CARGO_PKG_VERSION"),
            inputs: Inputs {
                vcf: vcf_name.to_string(),
                samples: map_name.to_string(),
                format: self.format.to_string(),
            },
            demes: map.demes.clone(),
            design: design(map, &self.mapped, m, n),
            projection: ProjectionInfo {
                mode: match missing {
                    Missing::Refuse => "complete",
                    Missing::Drop => "drop_missing",
                    Missing::Project(_) => "project",
                },
                m,
                n,
            },
            per_site: PerSite::of(&values, callable),
            columns,
            statistics,
            layout,
            locus_columns,
            loci: rows,
            xi: any_polarised.then(|| pol.xi().to_vec()),
            eta: all.folded(),
            sites: self.counts,
            unmapped_vcf_samples: unmapped,
            notes,
        })
    }
}

/// Mean and sample variance (n - 1) across loci of each statistic of
/// [`crate::stats::LOCUS_SPREAD`], over the loci where it is defined, as `simulate` does.
fn spread(rows: &[LocusRow], columns: &[String]) -> Vec<(Option<f64>, Option<f64>)> {
    crate::stats::LOCUS_SPREAD
        .iter()
        .map(|name| {
            let j = columns.iter().position(|c| c == name).expect("a statistic column");
            let xs: Vec<f64> = rows.iter().filter_map(|r| r.values[j]).collect();
            crate::stats::mean_var(&xs)
        })
        .collect()
}

/// Finds each map sample among the VCF samples.
fn resolve_samples(
    map: &SampleMap,
    header: &vcf::VcfHeader,
    map_name: &str,
    vcf_name: &str,
) -> Result<Vec<Mapped>, Error> {
    let index: HashMap<&str, usize> = header.samples.iter().enumerate().map(|(i, s)| (s.as_str(), i)).collect();
    map.entries
        .iter()
        .map(|e| {
            let vcf_index = *index.get(e.sample.as_str()).ok_or_else(|| Error::SampleNotInVcf {
                map: map_name.to_string(),
                line: e.line,
                sample: e.sample.clone(),
                vcf: vcf_name.to_string(),
                count: header.samples.len(),
            })?;
            Ok(Mapped {
                vcf_index,
                name: e.sample.clone(),
                deme: e.deme,
                ploidy: e.ploidy,
                ploidy_from_map: e.ploidy.is_some(),
            })
        })
        .collect()
}

/// M for the chosen treatment, checked against n.
fn check_m(missing: Missing, n: u32) -> Result<u32, Error> {
    if n < 2 {
        return Err(Error::TooFewSequences { n });
    }
    match missing {
        Missing::Project(m) if m < 2 || m > n => Err(Error::Projection { m, n }),
        Missing::Project(m) => Ok(m),
        Missing::Refuse | Missing::Drop => Ok(n),
    }
}

/// Groups the samples by (deme, generations ago) and shares M among them.
fn design(map: &SampleMap, mapped: &[Mapped], m: u32, n: u32) -> Vec<DesignEntry> {
    let mut groups: Vec<DesignEntry> = Vec::new();
    for e in &map.entries {
        let p = mapped.iter().find(|s| s.name == e.sample).and_then(|s| s.ploidy).unwrap_or(0);
        let name = &map.demes[e.deme];
        match groups.iter_mut().find(|g| g.deme == *name && g.generations_ago == e.generations_ago) {
            Some(g) => {
                g.sequences_in_data += u32::from(p);
                g.plants += 1;
            }
            None => groups.push(DesignEntry {
                deme: name.clone(),
                generations_ago: e.generations_ago,
                sequences: 0,
                sequences_in_data: u32::from(p),
                plants: 1,
            }),
        }
    }
    // Largest remainder (Hamilton) apportionment of M; ties to the earlier group.
    let quota = |g: &DesignEntry| f64::from(m) * f64::from(g.sequences_in_data) / f64::from(n.max(1));
    for g in groups.iter_mut() {
        g.sequences = quota(g).floor() as u32;
    }
    let mut left = m - groups.iter().map(|g| g.sequences).sum::<u32>();
    let mut order: Vec<usize> = (0..groups.len()).collect();
    order.sort_by(|&a, &b| {
        let (ra, rb) = (quota(&groups[a]).fract(), quota(&groups[b]).fract());
        rb.total_cmp(&ra).then(a.cmp(&b))
    });
    for i in order {
        if left == 0 {
            break;
        }
        groups[i].sequences += 1;
        left -= 1;
    }
    groups
}

/// Files written by [`write_outputs`].
pub const OBSERVE_FILES: [&str; 3] = ["observed.json", "observed.tsv", "sfs.tsv"];

fn cell(v: Option<f64>) -> String {
    // Shortest representation that reads back to the same f64.
    v.map(|x| format!("{x}")).unwrap_or_default()
}

/// Leading columns of `observed.tsv`, before the statistics.
pub const LOCUS_KEY_COLUMNS: [&str; 5] = ["contig", "start", "end", "callable_sites", "used_sites"];

/// Trailing per-site columns of `observed.tsv`.
pub const PER_SITE_COLUMNS: [&str; 3] = ["segregating_sites_per_site", "pi_per_site", "theta_w_per_site"];

/// `observed.tsv`: one row per locus: [`LOCUS_KEY_COLUMNS`] (start 0-based, end exclusive,
/// as BED), the [`stat_columns`] of the locus and [`PER_SITE_COLUMNS`] (empty cells where
/// undefined).
pub fn write_table<W: io::Write>(obs: &Observed, out: &mut W) -> io::Result<()> {
    let head: Vec<&str> = LOCUS_KEY_COLUMNS
        .iter()
        .copied()
        .chain(obs.locus_columns.iter().map(String::as_str))
        .chain(PER_SITE_COLUMNS)
        .collect();
    writeln!(out, "{}", head.join("\t"))?;
    for r in &obs.loci {
        let mut fields = vec![
            r.contig.clone(),
            r.start.to_string(),
            r.end.to_string(),
            r.callable_sites.to_string(),
            r.used_sites.to_string(),
        ];
        fields.extend(r.values.iter().map(|v| cell(*v)));
        fields.extend([r.per_site.segregating_sites, r.per_site.pi, r.per_site.theta_w].map(cell));
        writeln!(out, "{}", fields.join("\t"))?;
    }
    Ok(())
}

/// `sfs.tsv`: columns `xi_1`..`xi_{M-1}` and one row (empty cells when no site is polarised).
pub fn write_sfs<W: io::Write>(obs: &Observed, out: &mut W) -> io::Result<()> {
    let m = obs.projection.m as usize;
    let head: Vec<String> = (1..m).map(|i| format!("xi_{i}")).collect();
    writeln!(out, "{}", head.join("\t"))?;
    let row: Vec<String> = (0..m - 1).map(|i| cell(obs.xi.as_ref().map(|x| x[i]))).collect();
    writeln!(out, "{}", row.join("\t"))
}

/// Writes `observed.json`, `observed.tsv` and `sfs.tsv` into `dir` (created if needed),
/// each through a temporary name and a rename.
pub fn write_outputs(obs: &Observed, dir: &Path) -> io::Result<()> {
    std::fs::create_dir_all(dir)?;
    let json = serde_json::to_string_pretty(obs).map_err(io::Error::other)?;
    crate::report::write_atomic(&dir.join(OBSERVE_FILES[0]), json.as_bytes())?;
    let mut buf = Vec::new();
    write_table(obs, &mut buf)?;
    crate::report::write_atomic(&dir.join(OBSERVE_FILES[1]), &buf)?;
    buf.clear();
    write_sfs(obs, &mut buf)?;
    crate::report::write_atomic(&dir.join(OBSERVE_FILES[2]), &buf)
}

/// A compact human-readable table of the result.
pub fn render(obs: &Observed) -> String {
    use crate::report::fmt_num;
    let p = &obs.projection;
    let s = &obs.sites;
    let k = &s.skipped;
    let plants: u32 = obs.design.iter().map(|g| g.plants).sum();
    let mut out = format!(
        "{} ({}): {} plants, {} sequences in {} deme(s), statistics for M = {} sequences ({})\n",
        obs.inputs.vcf,
        obs.inputs.format,
        plants,
        p.n,
        obs.demes.len(),
        p.m,
        p.mode
    );
    for g in &obs.design {
        out.push_str(&format!(
            "  {} at {} generations ago: {} plants, {} sequences ({} in the statistics)\n",
            g.deme, g.generations_ago, g.plants, g.sequences_in_data, g.sequences
        ));
    }
    let l = &obs.layout;
    out.push_str(&format!(
        "{} loci ({}{}{}), {} callable sites{}\n",
        l.count,
        l.loci,
        l.window.map_or(String::new(), |w| format!(" of {w} bases")),
        l.files.regions.as_ref().map_or(String::new(), |f| format!(" from {f}")),
        l.callable_sites,
        l.files.mask.as_ref().map_or(String::new(), |f| format!(" (mask {f})")),
    ));
    out.push_str(&format!(
        "{} records, {} sites used ({} polarised); skipped: {} outside loci, {} not callable, {} multi-allelic, \
         {} not SNP, {} filtered, {} ancestral allele unknown, {} missing data, {} too few called, {} monomorphic\n",
        s.records,
        s.used,
        s.polarised,
        k.outside_loci,
        k.not_callable,
        k.multi_allelic,
        k.not_snp,
        k.filtered,
        k.ancestral_allele_unknown,
        k.missing_data,
        k.too_few_called,
        k.monomorphic
    ));
    for (name, v) in obs.columns.iter().zip(obs.values()) {
        out.push_str(&format!("{name:<24} {:>14}\n", v.map_or_else(|| "-".to_string(), fmt_num)));
    }
    let ps = &obs.per_site;
    out.push_str(&format!(
        "per callable site: S {}, pi {}, theta_w {}\n",
        ps.segregating_sites.map_or("-".into(), fmt_num),
        ps.pi.map_or("-".into(), fmt_num),
        ps.theta_w.map_or("-".into(), fmt_num)
    ));
    for n in &obs.notes {
        out.push_str(&format!("note: {n}\n"));
    }
    out
}
