//! `seedline::observed` on VCF text: hand-computed statistics, projection, noodles-written and
//! bgzip-compressed input.

use noodles::vcf;
use seedline::observed::{self, Error, Missing, Observed};
use seedline::stats::Haplotypes;

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

fn stat(o: &Observed, name: &str) -> Option<f64> {
    o.statistics[name]
}

/// Three diploid samples in two demes (s1, s2 in pond; s3 in lake) and one unmapped (s4).
const HAND_VCF: &str = "##fileformat=VCFv4.3
##INFO=<ID=AA,Number=1,Type=String,Description=\"Ancestral allele\">
##FORMAT=<ID=GT,Number=1,Type=String,Description=\"Genotype\">
#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\ts1\ts2\ts3\ts4
1\t100\t.\tA\tG\t.\tPASS\tAA=A\tGT\t0/1\t0/0\t1/1\t1/1
1\t200\t.\tC\tT\t.\tPASS\tAA=T\tGT\t1/1\t1/0\t1/1\t0/0
1\t300\t.\tG\tA,C\t.\tPASS\t.\tGT\t0/1\t0/2\t0/0\t0/0
1\t400\t.\tAT\tA\t.\tPASS\t.\tGT\t0/1\t0/0\t0/0\t0/0
1\t500\t.\tT\tC\t.\tq10\t.\tGT\t0/1\t0/0\t0/0\t0/0
1\t600\t.\tG\tT\t.\tPASS\t.\tGT\t0/1\t./.\t0/0\t0/0
1\t700\t.\tA\tC\t.\t.\t.\tGT\t0/0\t0/1\t0/1\t0/0
1\t800\t.\tC\tG\t.\tPASS\tAA=N\tGT\t0/1\t0/0\t0/0\t0/0
1\t900\t.\tT\tA\t.\tPASS\tAA=T\tGT\t0/0\t0/0\t0/0\t1/1
";

const HAND_MAP: &str = "sample\tdeme\ns1\tpond\ns2\tpond\ns3\tlake\n";

fn hand(missing: Missing) -> Result<Observed, Error> {
    observed::observe(HAND_VCF.as_bytes(), "hand.vcf", HAND_MAP.as_bytes(), "hand.tsv", missing)
}

#[test]
fn hand_made_vcf_drop_missing() {
    // Sites by hand (n = 6 sequences; s4 is not mapped):
    //  100 A>G AA=A: derived G in s1 (1) + s3 (2) = 3            -> polarised, j = 3
    //  200 C>T AA=T: derived C (REF) only in s2's second copy = 1 -> polarised, j = 1
    //  300 multi-allelic, 400 indel, 500 FILTER q10              -> skipped
    //  600 s2 ./.                                                 -> missing data (dropped)
    //  700 A>C no AA: ALT in s2 + s3 = 2                          -> folded only
    //  800 AA=N matches neither                                   -> ancestral allele unknown
    //  900 all mapped 0/0 (only s4 carries ALT)                   -> monomorphic
    let o = hand(Missing::Drop).unwrap();
    let k = &o.sites.skipped;
    assert_eq!((o.sites.records, o.sites.used, o.sites.polarised, o.sites.unpolarised), (9, 3, 2, 1));
    assert_eq!((k.multi_allelic, k.not_snp, k.filtered, k.missing_data), (1, 1, 1, 1));
    assert_eq!((k.ancestral_allele_unknown, k.monomorphic, k.too_few_called), (1, 1, 0));
    assert_eq!(o.unmapped_vcf_samples, ["s4"]);
    assert_eq!((o.projection.m, o.projection.n), (6, 6));

    // Unfolded ξ of the polarised sites: ξ_1 = 1 (site 200), ξ_3 = 1 (site 100).
    assert_eq!(o.xi.as_deref(), Some(&[1.0, 0.0, 1.0, 0.0, 0.0][..]));
    // All sites folded (n = 6): η_1 = 1, η_2 = 1 (site 700), η_3 = 1.
    assert_eq!(o.eta, [1.0, 1.0, 1.0]);
    // S = 3. π = Σ 2k(6-k)ξ_k/30 over classes 1, 2, 3 = (10 + 16 + 18)/30 = 22/15 (Tajima 1983).
    assert_eq!(stat(&o, "segregating_sites"), Some(3.0));
    assert!(close(stat(&o, "pi").unwrap(), 22.0 / 15.0, 1e-12));
    // θ_W = 3/a_6, a_6 = 137/60 (Watterson 1975).
    assert!(close(stat(&o, "theta_w").unwrap(), 180.0 / 137.0, 1e-12));
    // Tajima (1989), n = 6: a1 = 137/60, a2 = 5269/3600, b1 = 7/15, b2 = 1/3,
    // c1 = 7/15 - 60/137 = 59/2055, c2 = 1/3 - 80/137 + 5269/18769 = 1696/56307,
    // e1 = c1/a1 = 236/18769, e2 = c2/(a1² + a2) = (1696/56307)/(24038/3600).
    // π - S/a1 = 22/15 - 180/137 = 314/2055.
    let e1: f64 = 236.0 / 18769.0;
    let e2: f64 = (1696.0 / 56307.0) / (24038.0 / 3600.0);
    let d = (314.0 / 2055.0) / (3.0 * e1 + 6.0 * e2).sqrt();
    assert!(close(stat(&o, "tajima_d").unwrap(), d, 1e-12), "{:?} vs {d}", stat(&o, "tajima_d"));
    // Fay & Wu (2000) on the polarised sites: π = (10 + 18)/30 = 14/15, θ_H = (2·1 + 2·9)/30 = 2/3,
    // H = 14/15 - 2/3 = 4/15.
    assert!(close(stat(&o, "fay_wu_h").unwrap(), 4.0 / 15.0, 1e-12));
    assert!(stat(&o, "fay_wu_h_norm").is_some());
    // Unphased diploids: no haplotype count.
    assert_eq!(stat(&o, "haplotypes"), None);
    // Per deme, 2c(m-c)/(m(m-1)) per site: pond (m = 4) c = 1, 1, 1 -> 3 · 6/12 = 3/2;
    // lake (m = 2) c = 2, 0, 1 -> 0 + 0 + 1 = 1.
    // H_b = Σ (c_a(m_b-c_b) + c_b(m_a-c_a))/(m_a m_b) = 6/8 + 2/8 + 4/8 = 3/2;
    // F_ST = 1 - (3/2 + 1)/2 / (3/2) = 1/6 (Hudson, Slatkin & Maddison 1992).
    assert!(close(stat(&o, "pi_pond").unwrap(), 1.5, 1e-12));
    assert!(close(stat(&o, "pi_lake").unwrap(), 1.0, 1e-12));
    assert!(close(stat(&o, "fst_pond_lake").unwrap(), 1.0 / 6.0, 1e-12));
    // Sampling design: pond 4 sequences, lake 2.
    let design: Vec<(&str, u32)> = o.design.iter().map(|g| (g.deme.as_str(), g.sequences)).collect();
    assert_eq!(design, [("pond", 4), ("lake", 2)]);
    assert!(o.notes.iter().any(|n| n.contains("1 of 3 used sites have no ancestral allele")));
    // One TSV row for the one contig: key columns, then the statistics.
    let mut tsv = Vec::new();
    observed::write_table(&o, &mut tsv).unwrap();
    let tsv = String::from_utf8(tsv).unwrap();
    let mut lines = tsv.lines();
    assert_eq!(lines.next().unwrap().split('\t').collect::<Vec<_>>(), observe_table_header(&["pond", "lake"]));
    let row: Vec<&str> = lines.next().unwrap().split('\t').collect();
    // Contig 1 has no length in the header: its locus ends at its last record (900).
    assert_eq!(&row[..5], ["1", "0", "900", "900", "3"]);
    assert_eq!(row[5 + 6], "", "haplotypes undefined");
    assert!(lines.next().is_none());
}

#[test]
fn hand_made_vcf_projected_to_four() {
    // --project 4: site 600 now has n_called = 4 (identity); the others have 6 called and are
    // projected hypergeometrically (Marth et al. 2004), C(6,4) = 15.
    // P(segregating) per site: 100 (j=3): P(k=0) = C(3,4)/15 = 0, P(k=4) = 0 -> 1;
    // 200 (j=1): P(k=0) = C(5,4)/15 = 1/3 -> 2/3; 700 (j=2): P(k=0) = C(4,4)/15 -> 14/15; 600: 1.
    // S = 1 + 2/3 + 14/15 + 1 = 18/5.
    // π is preserved in expectation per site: 2·3·3/30 + 2·1·5/30 + 2·2·4/30 + 2·1·3/12
    // = 3/5 + 1/3 + 8/15 + 1/2 = 59/30.
    let o = hand(Missing::Project(4)).unwrap();
    assert_eq!(o.sites.used, 4);
    assert!(close(stat(&o, "segregating_sites").unwrap(), 18.0 / 5.0, 1e-12));
    assert!(close(stat(&o, "pi").unwrap(), 59.0 / 30.0, 1e-12));
    // θ_W = S/a_4 = (18/5)/(11/6) = 108/55.
    assert!(close(stat(&o, "theta_w").unwrap(), 108.0 / 55.0, 1e-12));
    // Design shares M = 4 as 4·4/6 = 2.67 and 4·2/6 = 1.33: largest remainder gives 3 and 1.
    let shares: Vec<u32> = o.design.iter().map(|g| g.sequences).collect();
    assert_eq!(shares, [3, 1]);
    // M above n is refused.
    assert!(matches!(hand(Missing::Project(7)), Err(Error::Projection { m: 7, n: 6 })));
}

#[test]
fn missing_data_is_refused_by_default() {
    // Default: the first used site with a missing call is an error naming line and sample.
    match hand(Missing::Refuse) {
        Err(Error::MissingData { line, sample, n, .. }) => assert_eq!((line, sample.as_str(), n), (10, "s2", 6)),
        other => panic!("expected MissingData, got {other:?}"),
    }
}

/// A small deterministic generator (64-bit LCG, Knuth's MMIX constants) for test matrices.
fn lcg(state: &mut u64) -> u64 {
    *state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
    *state >> 33
}

/// 6 haploid samples in demes a (0..3) and b (3..6), 40 sites, genotype matrix rows[sample][site].
fn matrix() -> Vec<Vec<u8>> {
    let mut s = 11u64;
    let mut rows = vec![vec![0u8; 40]; 6];
    for site in 0..40 {
        let p = lcg(&mut s) % 100;
        for row in rows.iter_mut() {
            row[site] = u8::from(lcg(&mut s) % 100 < p);
        }
    }
    rows
}

/// Writes the matrix as VCF with noodles: REF A, ALT G, AA=A on every site, haploid GTs.
fn noodles_vcf(rows: &[Vec<u8>]) -> Vec<u8> {
    use noodles::core::Position;
    use noodles::vcf::variant::io::Write as _;
    use noodles::vcf::variant::record_buf::{AlternateBases, Filters, Info, Samples, info, samples};
    let mut builder = vcf::Header::builder();
    for i in 0..rows.len() {
        builder = builder.add_sample_name(format!("h{i}"));
    }
    let header = builder.build();
    let mut w = vcf::io::Writer::new(Vec::new());
    w.write_variant_header(&header).unwrap();
    for site in 0..rows[0].len() {
        let keys: samples::Keys = [String::from("GT")].into_iter().collect();
        let values = rows.iter().map(|r| vec![Some(samples::sample::Value::from(r[site].to_string()))]).collect();
        let info: Info = [(String::from("AA"), Some(info::field::Value::from("A")))].into_iter().collect();
        let record = vcf::variant::RecordBuf::builder()
            .set_reference_sequence_name("chr1")
            .set_variant_start(Position::try_from(site + 1).unwrap())
            .set_reference_bases("A")
            .set_alternate_bases(AlternateBases::from(vec![String::from("G")]))
            .set_filters(Filters::pass())
            .set_info(info)
            .set_samples(Samples::new(keys, values))
            .build();
        w.write_variant_record(&header, &record).unwrap();
    }
    w.into_inner()
}

const MATRIX_MAP: &str = "sample\tdeme\nh0\ta\nh1\ta\nh2\ta\nh3\tb\nh4\tb\nh5\tb\n";

#[test]
fn noodles_written_vcf_matches_the_genotype_matrix() {
    let rows = matrix();
    let bytes = noodles_vcf(&rows);
    let o = observed::observe(&bytes[..], "m.vcf", MATRIX_MAP.as_bytes(), "m.tsv", Missing::Refuse).unwrap();
    // Direct computation from the matrix with stats::Haplotypes (derived allele = 1 = G).
    let direct = Haplotypes::from_rows(&rows, vec![0, 0, 0, 1, 1, 1]).unwrap().stats();
    let monomorphic = (0..40).filter(|&j| rows.iter().all(|r| r[j] == rows[0][j])).count() as u64;
    assert!(direct.segregating_sites > 10, "the generator should give segregating sites");
    assert_eq!(o.sites.skipped.monomorphic, monomorphic);
    assert_eq!(o.sites.used, direct.segregating_sites);
    let xi: Vec<f64> = direct.sfs.iter().map(|&x| x as f64).collect();
    assert_eq!(o.xi.as_deref(), Some(&xi[..]));
    let want = direct.column_values(2);
    for (name, (got, w)) in o.columns.iter().zip(o.values().into_iter().zip(want)) {
        match (got, w) {
            (Some(g), Some(w)) => assert!(close(g, w, 1e-12), "{name}: {g} vs {w}"),
            (g, w) => assert_eq!(g, w, "{name}"),
        }
    }
    // Haploid calls count as phased, so the haplotype count is defined.
    assert_eq!(stat(&o, "haplotypes"), Some(direct.distinct_haplotypes as f64));
}

#[test]
fn bgzip_input_gives_the_same_result_as_plain() {
    use std::io::Write;
    let bytes = noodles_vcf(&matrix());
    let dir = std::env::temp_dir().join(format!("seedline-observe-bgzf-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let plain = dir.join("m.vcf");
    let gz = dir.join("m.vcf.gz");
    let map = dir.join("m.tsv");
    std::fs::write(&plain, &bytes).unwrap();
    std::fs::write(&map, MATRIX_MAP).unwrap();
    let mut w = noodles::bgzf::io::Writer::new(Vec::new());
    w.write_all(&bytes).unwrap();
    let compressed = w.finish().unwrap();
    assert_eq!(&compressed[..2], &[0x1f, 0x8b], "gzip magic");
    std::fs::write(&gz, &compressed).unwrap();
    // Also a compressed file without the .gz suffix: detected by its magic bytes.
    let disguised = dir.join("m.bin");
    std::fs::write(&disguised, &compressed).unwrap();
    let a = observed::observe_files(&plain, &map, Missing::Refuse).unwrap();
    for path in [&gz, &disguised] {
        let b = observed::observe_files(path, &map, Missing::Refuse).unwrap();
        assert_eq!(a.values(), b.values());
        assert_eq!((a.xi.clone(), a.eta.clone(), a.sites.clone()), (b.xi.clone(), b.eta.clone(), b.sites.clone()));
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn no_polarised_site_leaves_unfolded_statistics_empty() {
    // Three haploid samples, two sites without AA.
    // ALT counts 1 and 2 of n = 3 -> folded η_1 = 2, S = 2, π = (2·1·2 + 2·2·1)/6 = 8/6 (Tajima 1983).
    let vcf = "##fileformat=VCFv4.3\n#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\tx\ty\tz\n\
               1\t1\t.\tA\tC\t.\tPASS\t.\tGT\t1\t0\t0\n1\t2\t.\tA\tC\t.\tPASS\t.\tGT\t1\t1\t0\n";
    let map = "sample\tdeme\nx\tp\ny\tp\nz\tp\n";
    let o = observed::observe(vcf.as_bytes(), "v", map.as_bytes(), "m", Missing::Refuse).unwrap();
    assert_eq!(o.xi, None);
    assert_eq!(o.eta, [2.0]);
    assert_eq!((stat(&o, "fay_wu_h"), stat(&o, "fay_wu_h_norm")), (None, None));
    assert!(close(stat(&o, "pi").unwrap(), 8.0 / 6.0, 1e-12));
    assert!(o.notes.iter().any(|n| n.contains("no used site carries an ancestral allele")));
    let mut sfs = Vec::new();
    observed::write_sfs(&o, &mut sfs).unwrap();
    assert_eq!(String::from_utf8(sfs).unwrap(), "xi_1\txi_2\n\t\n");
}

/// The header of `observed.tsv`: locus key columns, the statistics, the per-site columns.
fn observe_table_header(demes: &[&str]) -> Vec<String> {
    let mut h: Vec<String> = observed::LOCUS_KEY_COLUMNS.iter().map(|s| s.to_string()).collect();
    h.extend(seedline::stats::stat_columns(demes));
    h.extend(observed::PER_SITE_COLUMNS.iter().map(|s| s.to_string()));
    h
}
