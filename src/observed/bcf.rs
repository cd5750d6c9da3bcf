//! Reading BCF through noodles: the header (as a VCF header) and records one by one, each
//! field read by its own small function into the same [`SiteRecord`] as VCF text.
//!
//! BCF stores the genotypes of all samples of a record together; each mapped sample's `GT`
//! is looked up once per record, so the cost per record is linear in the number of
//! samples. noodles panics on some encodings it does not handle (e.g. `GT` stored in 16-bit
//! integers, which only a record with more than 63 alleles needs); such a record is turned
//! into an error instead (see [`BcfRecords::read`]).

use super::record::{Ancestral, Call, SiteRecord};
use super::vcf::{Alternates, FieldError, VcfHeader};
use noodles::bcf;
use noodles::vcf;
use noodles::vcf::variant::record::AlternateBases as _;
use noodles::vcf::variant::record::Filters as _;
use noodles::vcf::variant::record::samples::series::value::genotype::Phasing;
use std::io::{self, Read};

/// Reads BCF records after the header.
pub struct BcfRecords<R> {
    reader: bcf::io::Reader<R>,
    header: vcf::Header,
    record: bcf::Record,
    count: usize,
    mapped: Vec<usize>,
}

/// Why a BCF record could not be read.
#[derive(Debug)]
pub enum BcfError {
    /// Reading or decoding failed.
    Io(io::Error),
    /// A field is wrong: the column name (and VCF sample index for `GT`).
    Field {
        /// `CHROM`, `POS`, `REF`, `ALT`, `FILTER`, `INFO` or `GT`.
        column: &'static str,
        /// VCF index of the sample, for `GT`.
        sample: Option<usize>,
        /// What is wrong.
        source: FieldError,
    },
}

/// Reads the header of a (decompressed) BCF stream.
pub fn read_header<R: Read>(inner: R) -> io::Result<(bcf::io::Reader<R>, vcf::Header, VcfHeader)> {
    let mut reader = bcf::io::Reader::from(inner);
    let header = reader.read_header()?;
    let parts = VcfHeader::of(&header, 0);
    Ok((reader, header, parts))
}

impl<R: Read> BcfRecords<R> {
    /// Records of `reader`; `mapped[k]` is the VCF index of mapped sample k.
    pub fn new(reader: bcf::io::Reader<R>, header: vcf::Header, mapped: &[usize]) -> Self {
        BcfRecords { reader, header, record: bcf::Record::default(), count: 0, mapped: mapped.to_vec() }
    }

    /// 1-based index of the last record read.
    pub fn record_number(&self) -> usize {
        self.count
    }

    /// Reads the next record into `rec`; `Ok(false)` at the end.
    pub fn read(&mut self, rec: &mut SiteRecord) -> Result<bool, BcfError> {
        if self.reader.read_record(&mut self.record).map_err(BcfError::Io)? == 0 {
            return Ok(false);
        }
        self.count += 1;
        let (record, header, mapped) = (&self.record, &self.header, &self.mapped);
        // noodles panics (todo!/unreachable!) on encodings it does not decode; report those as
        // a bad record instead of aborting. The default hook would print the panic, so it is
        // silenced for the duration of this one record.
        let hook = std::panic::take_hook();
        std::panic::set_hook(Box::new(|_| {}));
        let out = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| fill(record, header, mapped, rec)));
        std::panic::set_hook(hook);
        match out {
            Ok(r) => r.map(|()| true),
            Err(_) => Err(BcfError::Io(io::Error::new(
                io::ErrorKind::InvalidData,
                "a field of this record uses a BCF encoding that cannot be decoded (e.g. GT in 16-bit integers)",
            ))),
        }
    }
}

fn field(column: &'static str, source: FieldError) -> BcfError {
    BcfError::Field { column, sample: None, source }
}

fn fill(record: &bcf::Record, header: &vcf::Header, mapped: &[usize], rec: &mut SiteRecord) -> Result<(), BcfError> {
    let name = contig(record, header)?;
    if rec.contig != name {
        rec.contig.clear();
        rec.contig.push_str(name);
    }
    rec.position = position(record)?;
    rec.reference = reference(record)?;
    rec.alternates = alternates(record)?;
    rec.passes = passes(record, header)?;
    rec.ancestral = ancestral_allele(record, header)?;
    rec.uniform = None;
    genotypes(record, header, mapped, rec)
}

/// `CHROM`: the contig's name from the header's string map.
fn contig<'h>(record: &bcf::Record, header: &'h vcf::Header) -> Result<&'h str, BcfError> {
    record.reference_sequence_name(header.string_maps()).map_err(BcfError::Io)
}

/// `POS` (1-based; 0 for a telomere).
fn position(record: &bcf::Record) -> Result<u64, BcfError> {
    match record.variant_start() {
        None => Ok(0),
        Some(Ok(p)) => Ok(usize::from(p) as u64),
        Some(Err(e)) => Err(BcfError::Io(e)),
    }
}

/// `REF`: checked as in VCF text.
fn reference(record: &bcf::Record) -> Result<Option<u8>, BcfError> {
    super::vcf::reference(record.reference_bases().as_ref()).map_err(|e| field("REF", e.kind))
}

/// `ALT`: the alternate alleles.
fn alternates(record: &bcf::Record) -> Result<Alternates, BcfError> {
    let alts = record.alternate_bases();
    let list: Vec<&str> = alts.iter().collect::<io::Result<_>>().map_err(BcfError::Io)?;
    Ok(Alternates::of(list.iter().map(|a| a.as_bytes()).filter(|a| *a != b".")))
}

/// `FILTER`: passed when empty or `PASS`.
fn passes(record: &bcf::Record, header: &vcf::Header) -> Result<bool, BcfError> {
    let filters = record.filters();
    let names: Vec<&str> = filters.iter(header).collect::<io::Result<_>>().map_err(BcfError::Io)?;
    Ok(names.iter().all(|n| *n == "PASS" || *n == "."))
}

/// `INFO` `AA`.
fn ancestral_allele(record: &bcf::Record, header: &vcf::Header) -> Result<Ancestral, BcfError> {
    use noodles::vcf::variant::record::info::field::Value;
    let info = record.info();
    match info.get(header, "AA") {
        None | Some(Ok(None)) => Ok(Ancestral::Absent),
        Some(Ok(Some(Value::String(s)))) => Ok(Ancestral::of(s.as_bytes())),
        Some(Ok(Some(Value::Character(c)))) => Ok(Ancestral::of(c.to_string().as_bytes())),
        Some(Ok(Some(_))) => Ok(Ancestral::Other),
        Some(Err(e)) => Err(BcfError::Io(e)),
    }
}

/// `GT` of every mapped sample; a record without `GT` is an error, as in VCF text.
fn genotypes(
    record: &bcf::Record,
    header: &vcf::Header,
    mapped: &[usize],
    rec: &mut SiteRecord,
) -> Result<(), BcfError> {
    use noodles::vcf::variant::record::samples::series::Value;
    if mapped.is_empty() {
        return Ok(());
    }
    let alleles = rec.alternates.alleles();
    let samples = record.samples().map_err(BcfError::Io)?;
    let series = match samples.select(header, "GT") {
        Some(s) => s.map_err(BcfError::Io)?,
        None => return Err(field("FORMAT", FieldError::NoGenotype { value: "(BCF record without GT)".into() })),
    };
    for (k, &i) in mapped.iter().enumerate() {
        let at = |source| BcfError::Field { column: "GT", sample: Some(i), source };
        let call = match series.get(header, i) {
            None | Some(None) => Call::default(),
            Some(Some(Err(e))) => return Err(BcfError::Io(e)),
            Some(Some(Ok(Value::Genotype(g)))) => {
                let mut c = Call { alleles: [Call::MISSING; 2], count: 0, phased: true, lone_missing: false };
                for (j, item) in g.iter().enumerate() {
                    let (position, phasing) = item.map_err(BcfError::Io)?;
                    if j >= 2 {
                        let value = format!("{} alleles", j + 1);
                        return Err(at(FieldError::UnsupportedPloidy { value, got: j + 1 }));
                    }
                    if let Some(p) = position
                        && p >= alleles
                    {
                        let value = c.render();
                        return Err(at(FieldError::AlleleOutOfRange { value, allele: p as u32, alleles }));
                    }
                    c.alleles[j] = position.map_or(Call::MISSING, |p| p.min(253) as u8);
                    c.count += 1;
                    // The first allele's phasing means nothing before VCF 4.4.
                    if j > 0 && phasing == Phasing::Unphased {
                        c.phased = false;
                    }
                }
                if c.count == 0 {
                    Call::default()
                } else {
                    c.lone_missing = c.count == 1 && c.alleles[0] == Call::MISSING;
                    c
                }
            }
            Some(Some(Ok(_))) => return Err(at(FieldError::Genotype { value: "(not a genotype)".into() })),
        };
        rec.calls[k] = call;
    }
    Ok(())
}
