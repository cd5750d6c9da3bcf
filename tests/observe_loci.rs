//! `observe` with loci: a hand-made two-contig VCF cut into windows, with a mask of callable
//! sites; every per-locus statistic computed by hand from the published formulas. The same
//! data as regions, as BCF (written by noodles) and as plain gzip give the same result.

mod common;

use seedline::observed::{self, Error, Missing, Observed, Options};
use std::path::Path;

/// Two contigs, four haploid plants in two demes (a: s1, s2; b: s3, s4).
const VCF: &str = "##fileformat=VCFv4.3
##contig=<ID=chrA,length=100>
##contig=<ID=chrB,length=60>
##INFO=<ID=AA,Number=1,Type=String,Description=\"Ancestral allele\">
##FORMAT=<ID=GT,Number=1,Type=String,Description=\"Genotype\">
#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\ts1\ts2\ts3\ts4
chrA\t5\t.\tA\tG\t.\tPASS\tAA=A\tGT\t1\t0\t0\t0
chrA\t12\t.\tA\tG\t.\tPASS\tAA=A\tGT\t1\t0\t0\t0
chrA\t30\t.\tA\tC\t.\tPASS\tAA=A\tGT\t1\t1\t0\t0
chrA\t48\t.\tA\tT\t.\tPASS\t.\tGT\t0\t1\t1\t1
chrA\t60\t.\tG\tA\t.\tPASS\tAA=G\tGT\t0\t0\t1\t1
chrA\t90\t.\tC\tT\t.\tPASS\tAA=C\tGT\t1\t1\t1\t0
chrB\t10\t.\tC\tT\t.\tPASS\tAA=C\tGT\t0\t0\t0\t1
chrB\t55\t.\tG\tA\t.\tPASS\tAA=G\tGT\t0\t0\t0\t0
";

const MAP: &str = "sample\tdeme\ns1\ta\ns2\ta\ns3\tb\ns4\tb\n";

/// Callable: chrA bases 10..39 and 45..79, all of chrB (0-based, half-open).
const MASK: &str = "chrA\t10\t40\nchrA\t45\t80\nchrB\t0\t60\n";

const REGIONS: &str = "chrB\t0\t50\nchrA\t50\t100\nchrA\t0\t50\nchrB\t50\t60\n";

fn files(name: &str) -> std::path::PathBuf {
    let d = common::tempdir(name);
    std::fs::write(d.join("data.vcf"), VCF).unwrap();
    std::fs::write(d.join("map.tsv"), MAP).unwrap();
    std::fs::write(d.join("mask.bed"), MASK).unwrap();
    std::fs::write(d.join("regions.bed"), REGIONS).unwrap();
    d
}

fn run(vcf: &Path, d: &Path, windows: Option<u64>, regions: bool) -> Observed {
    let r = d.join("regions.bed");
    let m = d.join("mask.bed");
    let o = Options::from_files(Missing::Refuse, windows, regions.then_some(r.as_path()), Some(&m)).unwrap();
    observed::observe_files_with(vcf, &d.join("map.tsv"), &o).unwrap()
}

fn close(what: &str, got: Option<f64>, want: Option<f64>) {
    match (got, want) {
        (Some(g), Some(w)) => assert!((g - w).abs() <= 1e-12 * w.abs().max(1.0), "{what}: got {g}, want {w}"),
        (g, w) => assert_eq!(g, w, "{what}"),
    }
}

fn mean_var(xs: &[f64]) -> (f64, f64) {
    let m = xs.iter().sum::<f64>() / xs.len() as f64;
    (m, xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() as f64 - 1.0))
}

/// Checks every value of the hand computation below.
fn check(o: &Observed) {
    // n = 4: a1 = 11/6, a2 = 49/36 (Watterson 1975). Tajima (1989): b1 = 5/9, b2 = 23/54,
    // c1 = b1 - 1/a1 = 1/99, c2 = b2 - (n+2)/(a1 n) + a2/a1² = 83/6534,
    // e1 = c1/a1 = 2/363, e2 = c2/(a1² + a2) = (83/6534)/(170/36).
    let a1 = 11.0 / 6.0;
    let e1 = 2.0 / 363.0;
    let e2 = (83.0 / 6534.0) / (170.0 / 36.0);
    let d = |pi: f64, s: f64| (pi - s / a1) / (e1 * s + e2 * s * (s - 1.0)).sqrt();
    // Zeng, Fu, Shi & Wu (2006), n = 4: lin = (n-2)/(6(n-1)) = 1/9,
    // quad = [18 n² (3n+2) B - (88n³ + 9n² - 13n + 6)] / (9 n (n-1)²) with B = Σ_{i<=4} 1/i² = 205/144:
    // (5740 - 5730)/324 = 5/162; θ̂ = S/a1, θ̂² = S(S-1)/(a1² + a2) = S(S-1)·36/170.
    let hn = |pi_minus_l: f64, s: f64| {
        pi_minus_l / ((1.0 / 9.0) * s / a1 + (5.0 / 162.0) * s * (s - 1.0) * 36.0 / 170.0).sqrt()
    };

    // Windows of 50 under the mask. Locus [start, end), callable bases:
    // chrA 0-50: 10..40 and 45..50 = 35; chrA 50-100: 50..80 = 30; chrB 0-50: 50; chrB 50-60: 10.
    let spans: Vec<(&str, u64, u64, u64)> =
        o.loci.iter().map(|l| (l.contig.as_str(), l.start, l.end, l.callable_sites)).collect();
    assert_eq!(spans, [("chrA", 0, 50, 35), ("chrA", 50, 100, 30), ("chrB", 0, 50, 50), ("chrB", 50, 60, 10)]);
    // POS 5 (base 4) and 90 (base 89) are outside the mask; chrB 55 is monomorphic.
    let k = &o.sites.skipped;
    assert_eq!((o.sites.records, o.sites.used, o.sites.polarised, o.sites.unpolarised), (8, 5, 4, 1));
    assert_eq!((k.not_callable, k.monomorphic, k.outside_loci), (2, 1, 0));

    // Per locus, π = Σ 2k(n-k)/(n(n-1)) per site (Tajima 1983), θ_W = S/a1, H = π - θ_H with
    // θ_H = Σ 2k²/(n(n-1)) over polarised sites (Fay & Wu 2000), θ_L = Σ k/(n-1) (Zeng et al.
    // 2006); per deme π_a = Σ 2c(m-c)/(m(m-1)), H_b = Σ (c_a(m_b-c_b) + c_b(m_a-c_a))/(m_a m_b),
    // F_ST = 1 - (π_a + π_b)/2 / H_b (Hudson, Slatkin & Maddison 1992).
    //
    // chrA 0-50: sites k = 1 {s1}, k = 2 {s1, s2} (polarised), ALT in {s2, s3, s4} (no AA).
    //   S = 3, π = (3 + 4 + 3)/6 = 5/3, π - S/a1 = 1/33; polarised π = 7/6, θ_H = (2 + 8)/12 = 5/6,
    //   H = 1/3, θ_L = (1 + 2)/3 = 1, π - θ_L = 1/6 with polarised S = 2;
    //   rows s1 110, s2 011, s3 001, s4 001: 3 haplotypes;
    //   π_a = 1 + 0 + 1 = 2, π_b = 0, H_b = 1/2 + 1 + 1/2 = 2, F_ST = 1 - 1/2 = 1/2.
    // chrA 50-100: k = 2 {s3, s4}: S = 1, π = 2/3, H = 2/3 - 2/3 = 0, π - θ_L = 0;
    //   2 haplotypes; π_a = π_b = 0, H_b = 1, F_ST = 1.
    // chrB 0-50: k = 1 {s4}: S = 1, π = 1/2, θ_H = 1/6, H = 1/3, θ_L = 1/3, π - θ_L = 1/6;
    //   2 haplotypes; π_a = 0, π_b = 1, H_b = 1/2, F_ST = 1 - (1/2)/(1/2) = 0.
    // chrB 50-60: no used site: S = π = θ_W = H = 0, D and normalised H undefined,
    //   1 haplotype, F_ST undefined (H_b = 0).
    type Row = [Option<f64>; 10];
    let want: [Row; 4] = [
        [
            Some(3.0),
            Some(5.0 / 3.0),
            Some(3.0 / a1),
            Some(d(5.0 / 3.0, 3.0)),
            Some(1.0 / 3.0),
            Some(hn(1.0 / 6.0, 2.0)),
            Some(3.0),
            Some(2.0),
            Some(0.0),
            Some(0.5),
        ],
        [
            Some(1.0),
            Some(2.0 / 3.0),
            Some(1.0 / a1),
            Some(d(2.0 / 3.0, 1.0)),
            Some(0.0),
            Some(0.0),
            Some(2.0),
            Some(0.0),
            Some(0.0),
            Some(1.0),
        ],
        [
            Some(1.0),
            Some(0.5),
            Some(1.0 / a1),
            Some(d(0.5, 1.0)),
            Some(1.0 / 3.0),
            Some(hn(1.0 / 6.0, 1.0)),
            Some(2.0),
            Some(0.0),
            Some(1.0),
            Some(0.0),
        ],
        [Some(0.0), Some(0.0), Some(0.0), None, Some(0.0), None, Some(1.0), Some(0.0), Some(0.0), None],
    ];
    assert_eq!(o.locus_columns, seedline::stats::stat_columns(&["a", "b"]));
    for (l, w) in o.loci.iter().zip(&want) {
        for (j, name) in o.locus_columns.iter().enumerate() {
            close(&format!("{}:{}-{} {name}", l.contig, l.start, l.end), l.values[j], w[j]);
        }
        // Per callable site.
        close("S per site", l.per_site.segregating_sites, w[0].map(|s| s / l.callable_sites as f64));
        close("pi per site", l.per_site.pi, w[1].map(|p| p / l.callable_sites as f64));
        close("theta_w per site", l.per_site.theta_w, w[2].map(|t| t / l.callable_sites as f64));
    }

    // Genome-wide: sums over loci; haplotypes the mean over loci (3 + 2 + 2 + 1)/4 = 2;
    // F_ST = 1 - ((2 + 1)/2) / (2 + 1 + 1/2) = 4/7.
    let stat = |n: &str| o.statistics[n];
    let pi = 5.0 / 3.0 + 2.0 / 3.0 + 0.5;
    close("S", stat("segregating_sites"), Some(5.0));
    close("pi", stat("pi"), Some(pi));
    close("theta_w", stat("theta_w"), Some(5.0 / a1));
    close("tajima_d", stat("tajima_d"), Some(d(pi, 5.0)));
    close("fay_wu_h", stat("fay_wu_h"), Some(2.0 / 3.0));
    close("haplotypes", stat("haplotypes"), Some(2.0));
    close("pi_a", stat("pi_a"), Some(2.0));
    close("pi_b", stat("pi_b"), Some(1.0));
    close("fst_a_b", stat("fst_a_b"), Some(4.0 / 7.0));
    assert_eq!(o.layout.callable_sites, 125);
    close("pi per site", o.per_site.pi, Some(pi / 125.0));
    // Across loci: mean and sample variance (n - 1) over the loci where defined.
    let col = |j: usize| -> Vec<f64> { want.iter().filter_map(|w| w[j]).collect() };
    for (name, j) in [("pi", 1), ("segregating_sites", 0), ("tajima_d", 3), ("theta_w", 2), ("fay_wu_h", 4)] {
        let (m, v) = mean_var(&col(j));
        close(&format!("{name}_locus_mean"), stat(&format!("{name}_locus_mean")), Some(m));
        close(&format!("{name}_locus_var"), stat(&format!("{name}_locus_var")), Some(v));
    }
}

#[test]
fn windows_and_mask_by_hand() {
    let d = files("loci-hand");
    let o = run(&d.join("data.vcf"), &d, Some(50), false);
    check(&o);
    assert_eq!(o.layout.loci, "windows");
    // The same loci given as regions (in any order in the file).
    let r = run(&d.join("data.vcf"), &d, None, true);
    check(&r);
    assert_eq!(r.layout.loci, "regions");
}

#[test]
fn bcf_and_plain_gzip_read_the_same() {
    use noodles::vcf::variant::io::Write as _;
    use std::io::Write as _;
    let d = files("loci-formats");
    // BCF written by noodles from the VCF text.
    let mut reader = noodles::vcf::io::Reader::new(VCF.as_bytes());
    let header = reader.read_header().unwrap();
    let mut w = noodles::bcf::io::Writer::new(std::fs::File::create(d.join("data.bcf")).unwrap());
    w.write_header(&header).unwrap();
    for r in reader.record_bufs(&header) {
        w.write_variant_record(&header, &r.unwrap()).unwrap();
    }
    w.try_finish().unwrap();
    drop(w);
    // Plain gzip (one member, no BGZF blocks).
    let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    gz.write_all(VCF.as_bytes()).unwrap();
    std::fs::write(d.join("data.vcf.gz"), gz.finish().unwrap()).unwrap();
    for f in ["data.bcf", "data.vcf.gz"] {
        let o = run(&d.join(f), &d, Some(50), false);
        check(&o);
    }
    assert_eq!(run(&d.join("data.bcf"), &d, Some(50), false).inputs.format, "bcf");
}

#[test]
fn order_and_layout_errors_name_the_place() {
    let d = files("loci-errors");
    let unsorted = VCF.replace("chrA\t12\t", "chrA\t62\t");
    std::fs::write(d.join("unsorted.vcf"), unsorted).unwrap();
    let o = Options::from_files(Missing::Refuse, Some(50), None, None).unwrap();
    match observed::observe_files_with(&d.join("unsorted.vcf"), &d.join("map.tsv"), &o) {
        Err(e @ Error::Unsorted { .. }) => assert!(e.to_string().contains("chrA:30 comes after chrA:62"), "{e}"),
        other => panic!("expected Unsorted, got {other:?}"),
    }
    let split = format!("{VCF}chrA\t99\t.\tA\tG\t.\tPASS\tAA=A\tGT\t1\t0\t0\t0\n");
    std::fs::write(d.join("split.vcf"), split).unwrap();
    let e = observed::observe_files(&d.join("split.vcf"), &d.join("map.tsv"), Missing::Refuse).unwrap_err();
    assert!(matches!(e, Error::ContigSplit { line: 15, .. }), "{e}");
    std::fs::write(d.join("overlap.bed"), "chrA\t0\t50\nchrA\t40\t60\n").unwrap();
    let e = Options::from_files(Missing::Refuse, None, Some(&d.join("overlap.bed")), None).unwrap_err();
    let text = format!("{e}: {}", std::error::Error::source(&e).unwrap());
    assert!(text.contains("overlap.bed") && text.contains("line 2"), "{text}");
    let beyond = VCF.replace("chrB\t55\t", "chrB\t61\t");
    std::fs::write(d.join("beyond.vcf"), beyond).unwrap();
    let e = observed::observe_files(&d.join("beyond.vcf"), &d.join("map.tsv"), Missing::Refuse).unwrap_err();
    assert!(matches!(e, Error::BeyondContig { position: 61, length: 60, .. }), "{e}");
}
