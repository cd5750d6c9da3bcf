//! Sample maps (TSV: sample, deme, optional generations_ago, ploidy).
#![no_main]
use libfuzzer_sys::fuzz_target;
use seedline::observed::map::SampleMap;

fuzz_target!(|data: &[u8]| {
    let _ = SampleMap::read(std::io::BufReader::new(data));
});
