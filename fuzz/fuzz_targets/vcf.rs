//! VCF files against a fixed sample map, with each way of handling missing genotypes.
#![no_main]
use libfuzzer_sys::fuzz_target;
use seedline::observed::{Missing, observe};

const MAP: &str = "sample\tdeme\tploidy\ns0\tpond\t2\ns1\tpond\t2\ns2\tlake\t1\ns3\tlake\t1\n";

fuzz_target!(|data: &[u8]| {
    for missing in [Missing::Refuse, Missing::Drop, Missing::Project(3)] {
        let _ = observe(data, "fuzz.vcf", MAP.as_bytes(), "map.tsv", missing);
    }
});
