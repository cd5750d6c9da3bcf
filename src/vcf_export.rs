//! VCF export of simulated haplotypes (the writer side of VCF; reading is in `observed`).
//!
//! One file per replicate, VCF 4.3 written with noodles. Loci are separate contigs
//! `locus_1`, `locus_2`, ... with positions 1..=sites each, declared with their length
//! (`##contig=<ID=locus_1,length=sites>`) so that `observe` knows each locus's span. Every site is a biallelic SNP
//! with REF = A (ancestral, also given as INFO AA) and ALT = T (derived): infinite sites
//! knows no bases, so the letters are placeholders. Genotypes are haploid (`0`/`1`), or,
//! with diploid pairing, phased pairs of consecutive haplotypes (`0|1`) of one deme and time.
//! Sample names show deme, index and time: `north_3_t0`, `south_2_t300`, `north_7_t0_seed`
//! (a seed from the bank); paired: `north_0+1_t0`.

use crate::mutation::Mutations;
use crate::scenario::SampledIndividual;
use noodles::vcf::{
    self,
    header::record::value::{
        Map,
        map::{Contig, Format, Info},
    },
    variant::io::Write as _,
    variant::record_buf::{
        AlternateBases, Filters, Info as InfoBuf, Samples, info::field::Value as InfoValue, samples::Keys,
        samples::sample::Value,
    },
};
use std::io::{self, Write};

/// Why a VCF could not be written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// Diploid pairing needs an even number of haplotypes per deme and time.
    #[error("diploid pairing needs consecutive samples of one deme and time in pairs: {label} has no partner")]
    Unpaired {
        /// The sample left alone.
        label: String,
    },
    /// Writing failed.
    #[error(transparent)]
    Io(#[from] io::Error),
}

/// The columns of the VCF: each entry lists the sample indices of one VCF sample.
pub fn columns(samples: &[SampledIndividual], diploid: bool) -> Result<Vec<(String, Vec<usize>)>, Error> {
    if !diploid {
        return Ok(samples.iter().enumerate().map(|(i, s)| (s.name(), vec![i])).collect());
    }
    let mut out = Vec::new();
    let mut i = 0;
    while i < samples.len() {
        let a = &samples[i];
        match samples.get(i + 1) {
            Some(b) if b.deme == a.deme && b.time == a.time && b.kind == a.kind => {
                let idx = b.label.rsplit('_').next().unwrap_or("");
                // `deme_i+j_tTIME[_seed]`: the haploid name of `a` with its partner's index.
                let name = a.name().replacen(&a.label, &format!("{}+{idx}", a.label), 1);
                out.push((name, vec![i, i + 1]));
                i += 2;
            }
            _ => return Err(Error::Unpaired { label: a.name() }),
        }
    }
    Ok(out)
}

/// The sample map of the VCF columns, as `observe --samples` reads it: a TSV with `sample`,
/// `deme` (its name in `deme_names`), `generations_ago` and `ploidy` (1, or 2 when paired).
pub fn sample_map(samples: &[SampledIndividual], deme_names: &[&str], diploid: bool) -> Result<String, Error> {
    let mut map = String::from("sample\tdeme\tgenerations_ago\tploidy\n");
    for (name, idx) in columns(samples, diploid)? {
        let s = &samples[idx[0]];
        let deme = deme_names.get(s.deme).copied().unwrap_or("");
        map.push_str(&format!("{name}\t{deme}\t{}\t{}\n", s.time, idx.len()));
    }
    Ok(map)
}

/// Compresses `bytes` as BGZF (the blocked gzip of the SAM/VCF specifications, readable by
/// any gzip reader).
pub fn bgzip(bytes: &[u8]) -> io::Result<Vec<u8>> {
    let mut w = noodles::bgzf::io::Writer::new(Vec::new());
    w.write_all(bytes)?;
    w.finish()
}

/// Writes one replicate's loci as VCF 4.3 into `out`; `lengths[l]` is the number of sites of
/// locus l.
pub fn write<W: Write>(
    out: W,
    samples: &[SampledIndividual],
    loci: &[&Mutations],
    lengths: &[u64],
    diploid: bool,
    comment: &str,
) -> Result<(), Error> {
    let cols = columns(samples, diploid)?;
    let mut builder = vcf::Header::builder()
        .set_file_format(vcf::header::FileFormat::new(4, 3))
        .add_info("AA", Map::<Info>::from("AA"))
        .add_format("GT", Map::<Format>::from("GT"))
        .insert("source".parse().expect("a valid key"), vcf::header::record::Value::String(comment.to_string()))
        .map_err(|e| io::Error::new(io::ErrorKind::InvalidInput, e))?;
    for l in 0..loci.len() {
        let mut contig = Map::<Contig>::new();
        *contig.length_mut() = lengths.get(l).map(|&x| x as usize);
        builder = builder.add_contig(format!("locus_{}", l + 1), contig);
    }
    for (name, _) in &cols {
        builder = builder.add_sample_name(name.clone());
    }
    let header = builder.build();
    let mut writer = vcf::io::Writer::new(out);
    writer.write_header(&header)?;
    let keys: Keys = ["GT".to_string()].into_iter().collect();
    for (l, m) in loci.iter().enumerate() {
        let contig = format!("locus_{}", l + 1);
        for (site, &pos) in m.positions.iter().enumerate() {
            let values: Vec<Vec<Option<Value>>> = cols
                .iter()
                .map(|(_, idx)| {
                    let gt: Vec<&str> =
                        idx.iter().map(|&s| if m.haplotypes.get(s, site) { "1" } else { "0" }).collect();
                    let gt = gt.join("|");
                    vec![Some(Value::Genotype(gt.parse().expect("a genotype of 0 and 1 alleles")))]
                })
                .collect();
            let info: InfoBuf = [("AA".to_string(), Some(InfoValue::String("A".to_string())))].into_iter().collect();
            let record = vcf::variant::RecordBuf::builder()
                .set_reference_sequence_name(contig.clone())
                .set_variant_start(
                    noodles::core::Position::try_from(pos as usize)
                        .map_err(|e| io::Error::new(io::ErrorKind::InvalidInput, e))?,
                )
                .set_reference_bases("A")
                .set_alternate_bases(AlternateBases::from(vec!["T".to_string()]))
                .set_filters(Filters::pass())
                .set_info(info)
                .set_samples(Samples::new(keys.clone(), values))
                .build();
            writer.write_variant_record(&header, &record)?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::Scenario;

    #[test]
    fn sample_map_names_every_column_with_its_deme_time_and_ploidy() {
        let s = Scenario::from_yaml_str(
            "demes: [{name: pond, size: 50}, {name: lake, size: 50}]\nsamples: [{deme: pond, count: 2}, {deme: lake, count: 2, generations_ago: 30}]\n",
            "t",
        )
        .unwrap();
        let names: Vec<&str> = s.demes().iter().map(|d| d.name()).collect();
        let map = sample_map(s.samples(), &names, true).unwrap();
        assert_eq!(map, "sample\tdeme\tgenerations_ago\tploidy\npond_0+1_t0\tpond\t0\t2\nlake_0+1_t30\tlake\t30\t2\n");
        let haploid = sample_map(s.samples(), &names, false).unwrap();
        assert_eq!(haploid.lines().count(), 5);
        assert!(haploid.contains("lake_1_t30\tlake\t30\t1\n"));
    }

    #[test]
    fn bgzip_output_is_read_back_by_a_plain_gzip_reader() {
        // flate2's multi-member gzip reader is the outside reference: BGZF is a series of
        // gzip members ending in an empty one (SAM/BAM format specification, section 4.1).
        let text: Vec<u8> = (0..200_000u32).flat_map(|i| format!("{i}\t").into_bytes()).collect();
        let z = bgzip(&text).unwrap();
        assert!(z.len() < text.len());
        let mut back = Vec::new();
        std::io::Read::read_to_end(&mut flate2::read::MultiGzDecoder::new(&z[..]), &mut back).unwrap();
        assert_eq!(back, text);
        // The end-of-file marker block of the specification, byte for byte.
        let eof =
            [0x1f, 0x8b, 8, 4, 0, 0, 0, 0, 0, 0xff, 6, 0, 0x42, 0x43, 2, 0, 0x1b, 0, 3, 0, 0, 0, 0, 0, 0, 0, 0, 0];
        assert_eq!(&z[z.len() - eof.len()..], &eof);
    }
}
