//! Summary statistics of observed data: a VCF of biallelic SNPs and a sample map.
//!
//! [`observe`] streams the VCF record by record and computes the same statistics as
//! `simulate` ([`crate::stats::stat_columns`]), so that observed values can be set beside
//! simulated ones.
//!
//! **Sequences.** Each haploid genome counts as one sequence: a diploid `0/1` gives two.
//! A sample's ploidy is the map's `ploidy` or else the number of alleles in its first GT;
//! every later GT must have as many (a lone `.` is a missing call of any ploidy).
//! Samples are taken from the sample map ([`map`]); VCF samples absent from the map are
//! skipped (and counted); a map sample absent from the VCF is an error.
//!
//! **Sites.** Only biallelic SNPs that pass `FILTER` (`PASS` or `.`) are used. Skipped
//! sites are counted by reason ([`SkippedSites`]), in this order of precedence:
//! multi-allelic, not a SNP (indel, symbolic allele, REF not one base), filtered, no ALT
//! allele (monomorphic), ancestral allele unknown, missing data, too few called sequences,
//! monomorphic in the mapped samples.
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
//! **Haplotypes.** The number of distinct haplotypes needs the phase: it is computed only
//! when every used genotype is haploid or phased, no used site has a missing call and no
//! projection is made (M = n); otherwise it is `None` with a note.
//!
//! Samples taken at different times are pooled as if contemporaneous, as in [`crate::stats`];
//! the sampling design (deme, generations ago, sequences) is recorded for the null model.

pub mod map;
pub mod projection;
pub mod vcf;

use self::map::{MapLineError, SampleMap};
use self::projection::{ProjectedSfs, Projector};
use self::vcf::{Alternates, RecordError};
use crate::stats::{Haplotypes, stat_columns};
use serde::Serialize;
use std::collections::BTreeMap;
use std::io::{self, BufRead};
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
    #[error("{file}, line {line}: cannot read (truncated or corrupt file? a .gz must be complete bgzip)")]
    Read {
        /// The file.
        file: String,
        /// The line being read.
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
    /// A VCF record is invalid.
    #[error("{file}, line {line}")]
    Record {
        /// The file.
        file: String,
        /// 1-based line.
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
        "{file}, line {line}, column GT, sample {sample}: missing genotype at a site otherwise usable; \
         choose --project M (hypergeometric projection of every site to M sequences, M <= {n}) \
         or --drop-missing (use only sites called in all {n} sequences)"
    )]
    MissingData {
        /// The VCF file.
        file: String,
        /// 1-based line.
        line: usize,
        /// The first sample with a missing call there.
        sample: String,
        /// Sequences in the mapped samples.
        n: u32,
    },
    /// A projection size out of range.
    #[error("--project {m}: the projected sample size must be between 2 and the {n} mapped sequences")]
    Projection {
        /// The requested size.
        m: u32,
        /// Mapped sequences.
        n: u32,
    },
    /// The sample size cannot be known.
    #[error("{file}: no records, so the ploidy of sample {sample} is unknown; give a ploidy column in the sample map")]
    NoRecords {
        /// The VCF file.
        file: String,
        /// A sample with unknown ploidy.
        sample: String,
    },
    /// Fewer than two sequences.
    #[error("the mapped samples hold {n} sequence(s); at least 2 are needed")]
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

/// Input file names, recorded in the output.
#[derive(Debug, Clone, Serialize)]
pub struct Inputs {
    /// The VCF.
    pub vcf: String,
    /// The sample map.
    pub samples: String,
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
}

/// Sites skipped, by reason.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct SkippedSites {
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

/// The result of [`observe`]; serialised as `observed.json`.
#[derive(Debug, Clone, Serialize)]
pub struct Observed {
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
    /// Statistic names in the order of [`stat_columns`].
    pub columns: Vec<String>,
    /// Statistic values by name (`null` when undefined).
    pub statistics: BTreeMap<String, Option<f64>>,
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

/// Running sums over the used sites.
struct Accumulator {
    projector: Projector,
    polarised: Vec<f64>,
    unpolarised: Vec<f64>,
    within: Vec<f64>,
    between: Vec<f64>,
    deme_gaps: u64,
    deme_sizes: Vec<u32>,
    haplotypes: Option<Haplotypes>,
    unphased: bool,
}

/// Which allele is derived at a site.
#[derive(Clone, Copy, PartialEq)]
enum Polarity {
    /// AA = REF: ALT is derived.
    Alt,
    /// AA = ALT: REF is derived.
    Ref,
    /// No AA: orient by ALT, fold later.
    Unknown,
}

/// Reads the VCF and the sample map and computes the observed statistics.
///
/// `vcf_name` and `map_name` label errors and the output. Records are read one at a time;
/// memory grows with the number of used sites only when haplotypes can be counted (n bits
/// per site).
pub fn observe<R: BufRead, S: BufRead>(
    mut vcf_in: R,
    vcf_name: &str,
    map_in: S,
    map_name: &str,
    missing: Missing,
) -> Result<Observed, Error> {
    let map = SampleMap::read(map_in)
        .map_err(|source| Error::Map { file: map_name.to_string(), source: Box::new(source) })?;
    let header = vcf::read_header(&mut vcf_in).map_err(|(line, source)| match source {
        vcf::HeaderError::Io(e) => Error::Read { file: vcf_name.to_string(), line, source: e },
        source => Error::Header { file: vcf_name.to_string(), line, source },
    })?;
    let mut mapped = resolve_samples(&map, &header, map_name, vcf_name)?;
    mapped.sort_by_key(|m| m.vcf_index);
    let unmapped: Vec<String> =
        header.samples.iter().filter(|s| !map.entries.iter().any(|e| &e.sample == *s)).cloned().collect();
    let demes = map.demes.len();

    let mut acc: Option<Accumulator> = None;
    let mut counts = SiteCounts::default();
    let mut line = String::new();
    let mut line_no = header.lines;
    let mut alleles: Vec<Option<u32>> = Vec::new();
    let mut phased: Vec<bool> = Vec::new();
    let mut n_total = 0u32;
    let (mut m_used, mut c_used) = (vec![0u32; demes], vec![0u32; demes]);
    loop {
        line.clear();
        let read = vcf_in.read_line(&mut line).map_err(|source| Error::Read {
            file: vcf_name.to_string(),
            line: line_no + 1,
            source,
        })?;
        if read == 0 {
            break;
        }
        line_no += 1;
        let at =
            |source: RecordError| Error::Record { file: vcf_name.to_string(), line: line_no, source: Box::new(source) };
        let record = vcf::parse_record(&line, header.samples.len()).map_err(at)?;
        counts.records += 1;
        vcf::position(&record, &line).map_err(at)?;
        let ref_base = vcf::reference(&record).map_err(at)?;
        let alts = vcf::alternates(&record);
        let pass = vcf::passes(&record);
        let aa = vcf::ancestral_allele(&record);

        // Genotypes of the mapped samples, checked on every record.
        alleles.clear();
        phased.clear();
        if !mapped.is_empty() {
            let gt_key = vcf::genotype_key(&record).map_err(at)?;
            for s in mapped.iter_mut() {
                let raw = vcf::raw_genotype(&record, gt_key, s.vcf_index);
                let g = match vcf::genotype(&raw, alts.alleles()) {
                    Ok(g) => g,
                    Err(kind) => return Err(gt_error(vcf_name, line_no, &s.name, kind)),
                };
                let ploidy = *s.ploidy.get_or_insert(g.alleles.len() as u8);
                if g.alleles.len() != ploidy as usize {
                    if raw == "." {
                        // A lone `.` is a missing call of any ploidy.
                        alleles.extend(std::iter::repeat_n(None, ploidy as usize));
                        phased.push(true);
                        continue;
                    }
                    let origin = if s.ploidy_from_map { " (sample map)" } else { " (its first GT)" };
                    let kind = vcf::FieldError::Ploidy { value: raw.clone(), got: g.alleles.len(), ploidy, origin };
                    return Err(gt_error(vcf_name, line_no, &s.name, kind));
                }
                alleles.extend(&g.alleles);
                phased.push(g.phased || ploidy == 1);
            }
        }
        if acc.is_none() {
            // Every ploidy is known after the first record.
            n_total = mapped.iter().map(|s| u32::from(s.ploidy.unwrap_or(0))).sum();
            acc = Some(Accumulator::new(check_m(missing, n_total)?, demes, &mapped));
        }
        let sums = acc.as_mut().expect("just set");

        let alt_base = match alts {
            Alternates::Multi(_) => {
                counts.skipped.multi_allelic += 1;
                continue;
            }
            Alternates::Other => {
                counts.skipped.not_snp += 1;
                continue;
            }
            Alternates::Snp(b) if ref_base.is_some() => b,
            Alternates::Snp(_) => {
                counts.skipped.not_snp += 1;
                continue;
            }
            Alternates::None => {
                if pass {
                    counts.skipped.monomorphic += 1;
                } else {
                    counts.skipped.filtered += 1;
                }
                continue;
            }
        };
        if !pass {
            counts.skipped.filtered += 1;
            continue;
        }
        let polarity = match aa.as_deref().map(str::as_bytes) {
            None => Polarity::Unknown,
            Some([b]) if Some(*b) == ref_base => Polarity::Alt,
            Some([b]) if *b == alt_base => Polarity::Ref,
            Some(_) => {
                counts.skipped.ancestral_allele_unknown += 1;
                continue;
            }
        };

        let n_called = alleles.iter().flatten().count() as u32;
        if n_called < n_total {
            match missing {
                Missing::Refuse => {
                    let mut seq = 0;
                    let who = mapped.iter().find(|s| {
                        let p = s.ploidy.unwrap_or(0) as usize;
                        seq += p;
                        alleles[seq - p..seq].iter().any(Option::is_none)
                    });
                    return Err(Error::MissingData {
                        file: vcf_name.to_string(),
                        line: line_no,
                        sample: who.map_or_else(String::new, |s| s.name.clone()),
                        n: n_total,
                    });
                }
                Missing::Drop => {
                    counts.skipped.missing_data += 1;
                    continue;
                }
                Missing::Project(m) if n_called < m => {
                    counts.skipped.too_few_called += 1;
                    continue;
                }
                Missing::Project(_) => {}
            }
        }
        // Derived allele index: 1 (ALT) unless AA = ALT.
        let derived = u32::from(polarity != Polarity::Ref);
        let j = alleles.iter().flatten().filter(|&&a| a == derived).count() as u32;
        if j == 0 || j == n_called {
            counts.skipped.monomorphic += 1;
            continue;
        }
        counts.used += 1;
        if polarity == Polarity::Unknown {
            counts.unpolarised += 1;
        } else {
            counts.polarised += 1;
        }
        m_used.iter_mut().for_each(|x| *x = 0);
        c_used.iter_mut().for_each(|x| *x = 0);
        let mut seq = 0;
        for s in &mapped {
            for a in alleles[seq..seq + s.ploidy.unwrap_or(0) as usize].iter().flatten() {
                m_used[s.deme] += 1;
                c_used[s.deme] += u32::from(*a == derived);
            }
            seq += s.ploidy.unwrap_or(0) as usize;
        }
        sums.add_site(n_called, j, polarity, &m_used, &c_used);
        sums.add_haplotypes(&alleles, &phased, n_called == n_total);
    }

    let acc = match acc {
        Some(a) => a,
        None => {
            if let Some(s) = mapped.iter().find(|s| s.ploidy.is_none()) {
                return Err(Error::NoRecords { file: vcf_name.to_string(), sample: s.name.clone() });
            }
            n_total = mapped.iter().map(|s| u32::from(s.ploidy.unwrap_or(0))).sum();
            Accumulator::new(check_m(missing, n_total)?, demes, &mapped)
        }
    };
    Ok(finish(acc, counts, &map, &mapped, n_total, missing, unmapped, header.declares_aa, vcf_name, map_name))
}

fn gt_error(file: &str, line: usize, sample: &str, kind: vcf::FieldError) -> Error {
    let source = RecordError { column: "GT", sample: Some(sample.to_string()), kind };
    Error::Record { file: file.to_string(), line, source: Box::new(source) }
}

/// Finds each map sample among the VCF samples.
fn resolve_samples(
    map: &SampleMap,
    header: &vcf::VcfHeader,
    map_name: &str,
    vcf_name: &str,
) -> Result<Vec<Mapped>, Error> {
    map.entries
        .iter()
        .map(|e| {
            let vcf_index =
                header.samples.iter().position(|s| *s == e.sample).ok_or_else(|| Error::SampleNotInVcf {
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

impl Accumulator {
    fn new(m: u32, demes: usize, mapped: &[Mapped]) -> Self {
        let labels: Vec<u32> =
            mapped.iter().flat_map(|s| std::iter::repeat_n(s.deme as u32, s.ploidy.unwrap_or(0) as usize)).collect();
        let n = labels.len() as u32;
        let mut deme_sizes = vec![0u32; demes];
        for &d in &labels {
            deme_sizes[d as usize] += 1;
        }
        Accumulator {
            deme_sizes,
            projector: Projector::new(m),
            polarised: vec![0.0; m as usize + 1],
            unpolarised: vec![0.0; m as usize + 1],
            within: vec![0.0; demes],
            between: vec![0.0; demes * demes],
            deme_gaps: 0,
            // Haplotypes are only meaningful for the full sample.
            haplotypes: (m == n).then(|| Haplotypes::new(labels)),
            unphased: false,
        }
    }

    fn add_site(&mut self, n_called: u32, j: u32, polarity: Polarity, m: &[u32], c: &[u32]) {
        let classes = if polarity == Polarity::Unknown { &mut self.unpolarised } else { &mut self.polarised };
        self.projector.add_site(n_called, j, classes);
        let d = m.len();
        for a in 0..d {
            let (ma, ca) = (f64::from(m[a]), f64::from(c[a]));
            if m[a] >= 2 {
                self.within[a] += 2.0 * ca * (ma - ca) / (ma * (ma - 1.0));
            } else if self.deme_sizes[a] >= 2 {
                // Only a gap when missing calls, not the deme's size, left fewer than 2.
                self.deme_gaps += 1;
            }
            for b in a + 1..d {
                let (mb, cb) = (f64::from(m[b]), f64::from(c[b]));
                if m[a] > 0 && m[b] > 0 {
                    self.between[a * d + b] += (ca * (mb - cb) + cb * (ma - ca)) / (ma * mb);
                }
            }
        }
    }

    fn add_haplotypes(&mut self, alleles: &[Option<u32>], phased: &[bool], complete: bool) {
        if !complete || phased.iter().any(|p| !p) {
            self.unphased |= phased.iter().any(|p| !p);
            self.haplotypes = None;
        }
        if let Some(h) = &mut self.haplotypes {
            let carriers: Vec<usize> = (0..alleles.len()).filter(|&i| alleles[i] == Some(1)).collect();
            // Indices are in range by construction (one per mapped sequence).
            let _ = h.push_site_carriers(&carriers);
        }
    }
}

/// Turns the running sums into the result.
#[allow(clippy::too_many_arguments)]
fn finish(
    acc: Accumulator,
    sites: SiteCounts,
    map: &SampleMap,
    mapped: &[Mapped],
    n: u32,
    missing: Missing,
    unmapped: Vec<String>,
    declares_aa: bool,
    vcf_name: &str,
    map_name: &str,
) -> Observed {
    let m = acc.projector.m();
    let pol = ProjectedSfs::from_classes(&acc.polarised).expect("m >= 2 checked");
    let unpol = ProjectedSfs::from_classes(&acc.unpolarised).expect("m >= 2 checked");
    let all = pol.plus(&unpol);
    let any_polarised = sites.polarised > 0;
    let demes = map.demes.len();
    let mut deme_size = vec![0u32; demes];
    for s in mapped {
        deme_size[s.deme] += u32::from(s.ploidy.unwrap_or(0));
    }
    let deme_pi: Vec<Option<f64>> = (0..demes).map(|a| (deme_size[a] >= 2).then_some(acc.within[a])).collect();
    let mut values = vec![
        Some(all.segregating_sites()),
        Some(all.theta_pi()),
        Some(all.theta_w()),
        all.tajima_d(),
        any_polarised.then(|| pol.fay_wu_h()),
        if any_polarised { pol.normalized_fay_wu_h() } else { None },
        acc.haplotypes.as_ref().map(|h| h.distinct_haplotypes() as f64),
    ];
    values.extend(&deme_pi);
    for a in 0..demes {
        for b in a + 1..demes {
            let hb = acc.between[a * demes + b];
            values.push(match (deme_pi[a], deme_pi[b]) {
                (Some(pa), Some(pb)) if hb > 0.0 => Some(1.0 - 0.5 * (pa + pb) / hb),
                _ => None,
            });
        }
    }
    let names: Vec<&str> = map.demes.iter().map(String::as_str).collect();
    let columns = stat_columns(&names);
    let statistics = columns.iter().cloned().zip(values.iter().copied()).collect();

    let mut notes = Vec::new();
    match missing {
        Missing::Project(_) => notes.push(format!(
            "every site with at least {m} of the {n} sequences called is projected to {m} sequences \
             (hypergeometric; Marth et al. 2004): S and the spectra are expected values and may be fractional"
        )),
        Missing::Drop => notes.push(format!("only sites called in all {n} sequences are used (--drop-missing)")),
        Missing::Refuse => {}
    }
    if sites.used > 0 && !any_polarised {
        notes.push(format!(
            "no used site carries an ancestral allele (INFO AA{}): xi, fay_wu_h and fay_wu_h_norm are left empty; \
             eta, S, pi, theta_w and tajima_d need no polarisation",
            if declares_aa { "" } else { ", not declared in the header" }
        ));
    } else if sites.unpolarised > 0 {
        notes.push(format!(
            "{} of {} used sites have no ancestral allele (INFO AA): they enter eta, S, pi, theta_w and tajima_d; \
             xi, fay_wu_h and fay_wu_h_norm use the {} polarised sites only",
            sites.unpolarised, sites.used, sites.polarised
        ));
    }
    if acc.haplotypes.is_none() {
        notes.push(
            if m < n {
                "haplotypes left empty: the count of distinct haplotypes is not defined for a projected sample"
            } else if acc.unphased {
                "haplotypes left empty: some used diploid genotypes are unphased"
            } else {
                "haplotypes left empty: some used sites have missing calls"
            }
            .to_string(),
        );
    }
    if acc.deme_gaps > 0 {
        notes.push(format!(
            "{} (site, deme) pairs had fewer than 2 called sequences in the deme and add nothing to pi_<deme>",
            acc.deme_gaps
        ));
    }
    if !unmapped.is_empty() {
        notes.push(format!("{} VCF sample(s) not in the sample map were skipped", unmapped.len()));
    }
    if map.entries.iter().any(|e| e.generations_ago > 0) {
        notes.push("samples of different ages are pooled as if contemporaneous in every statistic".to_string());
    }

    Observed {
        seedline: env!("CARGO_PKG_VERSION"),
        inputs: Inputs { vcf: vcf_name.to_string(), samples: map_name.to_string() },
        demes: map.demes.clone(),
        design: design(map, mapped, m, n),
        projection: ProjectionInfo {
            mode: match missing {
                Missing::Refuse => "complete",
                Missing::Drop => "drop_missing",
                Missing::Project(_) => "project",
            },
            m,
            n,
        },
        columns,
        statistics,
        xi: any_polarised.then(|| pol.xi().to_vec()),
        eta: all.folded(),
        sites,
        unmapped_vcf_samples: unmapped,
        notes,
    }
}

/// Groups the samples by (deme, generations ago) and shares M among them.
fn design(map: &SampleMap, mapped: &[Mapped], m: u32, n: u32) -> Vec<DesignEntry> {
    let mut groups: Vec<DesignEntry> = Vec::new();
    for e in &map.entries {
        let p = mapped.iter().find(|s| s.name == e.sample).and_then(|s| s.ploidy).unwrap_or(0);
        let name = &map.demes[e.deme];
        match groups.iter_mut().find(|g| g.deme == *name && g.generations_ago == e.generations_ago) {
            Some(g) => g.sequences_in_data += u32::from(p),
            None => groups.push(DesignEntry {
                deme: name.clone(),
                generations_ago: e.generations_ago,
                sequences: 0,
                sequences_in_data: u32::from(p),
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

/// Opens a VCF, plain or bgzip-compressed (by the `.gz` suffix or the gzip magic bytes).
pub fn open_vcf(path: &Path) -> Result<Box<dyn BufRead>, Error> {
    let file = path.display().to_string();
    let f = std::fs::File::open(path).map_err(|source| Error::Open { file: file.clone(), source })?;
    let mut r = io::BufReader::new(f);
    let magic = r.fill_buf().map_err(|source| Error::Read { file, line: 1, source })?;
    let gz = magic.starts_with(&[0x1f, 0x8b]) || path.extension().is_some_and(|e| e == "gz");
    Ok(if gz { Box::new(noodles::bgzf::io::Reader::new(r)) } else { Box::new(r) })
}

/// [`observe`] on files: the VCF (plain or bgzip) and the sample map.
pub fn observe_files(vcf: &Path, samples: &Path, missing: Missing) -> Result<Observed, Error> {
    let map_name = samples.display().to_string();
    let map = std::fs::File::open(samples).map_err(|source| Error::Open { file: map_name.clone(), source })?;
    let reader = open_vcf(vcf)?;
    observe(reader, &vcf.display().to_string(), io::BufReader::new(map), &map_name, missing)
}

/// Files written by [`write_outputs`].
pub const OBSERVE_FILES: [&str; 3] = ["observed.json", "observed.tsv", "sfs.tsv"];

fn cell(v: Option<f64>) -> String {
    // Shortest representation that reads back to the same f64.
    v.map(|x| format!("{x}")).unwrap_or_default()
}

/// `observed.tsv`: the [`stat_columns`] header and one row (empty cells where undefined).
pub fn write_table<W: io::Write>(obs: &Observed, out: &mut W) -> io::Result<()> {
    writeln!(out, "{}", obs.columns.join("\t"))?;
    writeln!(out, "{}", obs.values().into_iter().map(cell).collect::<Vec<_>>().join("\t"))
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
    let mut out = format!(
        "{}: {} sequences in {} deme(s), statistics for M = {} ({})\n",
        obs.inputs.vcf,
        p.n,
        obs.demes.len(),
        p.m,
        p.mode
    );
    out.push_str(&format!(
        "{} records, {} sites used ({} polarised); skipped: {} multi-allelic, {} not SNP, {} filtered, \
         {} ancestral allele unknown, {} missing data, {} too few called, {} monomorphic\n",
        s.records,
        s.used,
        s.polarised,
        k.multi_allelic,
        k.not_snp,
        k.filtered,
        k.ancestral_allele_unknown,
        k.missing_data,
        k.too_few_called,
        k.monomorphic
    ));
    for (name, v) in obs.columns.iter().zip(obs.values()) {
        out.push_str(&format!("{name:<20} {:>14}\n", v.map_or_else(|| "-".to_string(), fmt_num)));
    }
    for n in &obs.notes {
        out.push_str(&format!("note: {n}\n"));
    }
    out
}
