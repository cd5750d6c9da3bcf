//! `observe` throughput against decompressing the same file, for 50, 100, 200 and 400
//! phased diploids; the fitted exponent of the per-site cost in the number of samples.
//!
//! Run `cargo bench --bench observe` (10^5 sites per size; about a minute) or
//! `cargo bench --bench observe -- --full` (10^6 sites, as in issue 13; several minutes).
//! Each VCF is generated here (random biallelic SNPs with an ancestral allele), written
//! bgzip-compressed by noodles, then timed twice over, alternating: decompressing it to the
//! end with noodles' BGZF reader (the yardstick), and `observe` on the file (which includes
//! the same decompression). Figures go to docs/performance.md.

use noodles::bgzf;
use seedline::observed::{self, Missing};
use std::io::{Read, Write};
use std::path::Path;
use std::time::Instant;

fn lcg(state: &mut u64) -> u64 {
    *state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
    *state >> 33
}

/// Writes `sites` records of `diploids` phased diploid plants as bgzip into `path`.
fn write_vcf(path: &Path, diploids: usize, sites: usize) {
    let f = std::fs::File::create(path).unwrap();
    let mut w = bgzf::io::Writer::new(std::io::BufWriter::new(f));
    let mut head = String::from(
        "##fileformat=VCFv4.3\n##contig=<ID=chr1,length=100000000>\n##INFO=<ID=AA,Number=1,Type=String,Description=\"Ancestral allele\">\n##FORMAT=<ID=GT,Number=1,Type=String,Description=\"Genotype\">\n#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT",
    );
    for i in 0..diploids {
        head.push_str(&format!("\tp{i}"));
    }
    head.push('\n');
    w.write_all(head.as_bytes()).unwrap();
    let mut s = 17u64;
    let mut line = Vec::with_capacity(64 + 4 * diploids);
    for site in 0..sites {
        line.clear();
        write!(line, "chr1\t{}\t.\tA\tT\t.\tPASS\tAA=A\tGT", 50 * site + 1).unwrap();
        // A derived-allele frequency per site in (0, 1/2], so most sites segregate.
        let freq = 1 + lcg(&mut s) % 512;
        for _ in 0..diploids {
            let a = u8::from(lcg(&mut s) % 1024 < freq);
            let b = u8::from(lcg(&mut s) % 1024 < freq);
            line.extend_from_slice(&[b'\t', b'0' + a, b'|', b'0' + b]);
        }
        line.push(b'\n');
        w.write_all(&line).unwrap();
    }
    w.finish().unwrap();
}

fn decompress_seconds(path: &Path) -> (f64, u64) {
    let t0 = Instant::now();
    let mut r = bgzf::io::Reader::new(std::fs::File::open(path).unwrap());
    let mut buf = vec![0u8; 1 << 16];
    let mut total = 0u64;
    loop {
        let k = r.read(&mut buf).unwrap();
        if k == 0 {
            break;
        }
        total += k as u64;
    }
    (t0.elapsed().as_secs_f64(), total)
}

fn observe_seconds(path: &Path, map: &Path) -> f64 {
    let t0 = Instant::now();
    let o = observed::observe_files(path, map, Missing::Refuse).unwrap();
    std::hint::black_box(&o);
    t0.elapsed().as_secs_f64()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Least-squares slope of ln y on ln x.
fn slope(points: &[(f64, f64)]) -> f64 {
    let n = points.len() as f64;
    let (lx, ly): (Vec<f64>, Vec<f64>) = points.iter().map(|(x, y)| (x.ln(), y.ln())).unzip();
    let (mx, my) = (lx.iter().sum::<f64>() / n, ly.iter().sum::<f64>() / n);
    let sxy: f64 = lx.iter().zip(&ly).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = lx.iter().map(|x| (x - mx).powi(2)).sum();
    sxy / sxx
}

fn main() {
    let full = std::env::args().any(|a| a == "--full");
    let sites = if full { 1_000_000 } else { 100_000 };
    let dir = std::env::temp_dir().join(format!("seedline-bench-observe-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    println!(
        "observe vs decompression, {sites} sites, phased diploids, bgzip (noodles), medians of 3 alternating runs"
    );
    println!(
        "{:>9} {:>10} {:>12} {:>12} {:>12} {:>8}",
        "diploids", "MB", "decompress s", "observe s", "ns/site", "speed"
    );
    let mut per_site = Vec::new();
    let mut parse = Vec::new();
    for diploids in [50usize, 100, 200, 400] {
        let vcf = dir.join(format!("d{diploids}.vcf.gz"));
        let map = dir.join(format!("d{diploids}.tsv"));
        write_vcf(&vcf, diploids, sites);
        let mut m = String::from("sample\tdeme\n");
        for i in 0..diploids {
            m.push_str(&format!("p{i}\tbog\n"));
        }
        std::fs::write(&map, m).unwrap();
        let (mut dec, mut obs) = (Vec::new(), Vec::new());
        let mut bytes = 0;
        for _ in 0..3 {
            let (t, b) = decompress_seconds(&vcf);
            dec.push(t);
            bytes = b;
            obs.push(observe_seconds(&vcf, &map));
        }
        let (d, o) = (median(dec), median(obs));
        per_site.push((diploids as f64, o / sites as f64));
        parse.push((diploids as f64, (o - d).max(1e-9) / sites as f64));
        println!(
            "{:>9} {:>10.1} {:>12.3} {:>12.3} {:>12.0} {:>7.0}%",
            diploids,
            bytes as f64 / 1e6,
            d,
            o,
            o / sites as f64 * 1e9,
            100.0 * d / o
        );
        std::fs::remove_file(&vcf).unwrap();
    }
    println!(
        "fitted exponent of the per-site cost in the number of samples: {:.2} (observe), {:.2} (observe minus decompression)",
        slope(&per_site),
        slope(&parse)
    );
    println!(
        "speed = decompression time / observe time: the share of the decompression speed that observe keeps (goal >= 50%)"
    );
    std::fs::remove_dir_all(&dir).unwrap();
}
