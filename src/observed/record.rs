//! One record as both readers (VCF text and BCF) hand it to `observe`: the site columns that
//! matter and the genotype calls of the mapped samples.

use super::vcf::Alternates;

/// The `GT` of one sample at one record.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Call {
    /// Allele indices of the first `count` copies ([`Call::MISSING`] for `.`).
    pub alleles: [u8; 2],
    /// Number of alleles written (1 or 2).
    pub count: u8,
    /// True when no separator is `/` (a haploid call is phased).
    pub phased: bool,
    /// The call is a lone `.`, a missing call of any ploidy.
    pub lone_missing: bool,
}

impl Call {
    /// The code of a missing allele.
    pub const MISSING: u8 = 255;

    /// The GT text of the call, for messages.
    pub fn render(&self) -> String {
        let a = |x: u8| if x == Call::MISSING { ".".to_string() } else { x.to_string() };
        let sep = if self.phased { "|" } else { "/" };
        self.alleles[..self.count as usize].iter().map(|&x| a(x)).collect::<Vec<_>>().join(sep)
    }
}

impl Default for Call {
    fn default() -> Self {
        Call { alleles: [Call::MISSING; 2], count: 1, phased: true, lone_missing: true }
    }
}

/// The `AA` key of `INFO`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ancestral {
    /// No `AA`, or `AA=.`.
    Absent,
    /// One base (upper case).
    Base(u8),
    /// Anything else (`N`, several bases): matches neither allele.
    Other,
}

impl Ancestral {
    /// Reads an `AA` value, case-insensitively.
    pub fn of(v: &[u8]) -> Ancestral {
        match v {
            [] | b"." => Ancestral::Absent,
            [b] => Ancestral::Base(b.to_ascii_uppercase()),
            _ => Ancestral::Other,
        }
    }
}

/// A record: where it is, what its alleles are, and the calls of the mapped samples.
#[derive(Debug, Clone)]
pub struct SiteRecord {
    /// `CHROM`.
    pub contig: String,
    /// `POS`, 1-based (0 stands for a telomere).
    pub position: u64,
    /// `REF` when it is a single A, C, G or T.
    pub reference: Option<u8>,
    /// `ALT`.
    pub alternates: Alternates,
    /// `FILTER` is `PASS` or missing.
    pub passes: bool,
    /// `INFO` `AA`.
    pub ancestral: Ancestral,
    /// One call per mapped sample, in mapped order (unless `uniform`).
    pub calls: Vec<Call>,
    /// Set when every mapped sample has a call of the same ploidy p and none is a lone `.`:
    /// `(p, every call phased)`; the alleles are then in `uniform_alleles` (p per mapped
    /// sample, in mapped order) and `calls` is not filled.
    pub uniform: Option<(u8, bool)>,
    /// The alleles of a `uniform` record.
    pub uniform_alleles: Vec<u8>,
}

impl SiteRecord {
    /// An empty record for `mapped` samples.
    pub fn new(mapped: usize) -> Self {
        SiteRecord {
            contig: String::new(),
            position: 0,
            reference: None,
            alternates: Alternates::None,
            passes: true,
            ancestral: Ancestral::Absent,
            calls: vec![Call::default(); mapped],
            uniform: None,
            uniform_alleles: vec![Call::MISSING; 2 * mapped],
        }
    }
}
