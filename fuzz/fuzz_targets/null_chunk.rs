//! Null chunks and merged null tables: header, field counts and every cell.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let columns: Vec<String> = ["replicate", "tmrca", "roots", "total_length", "jumps", "pi", "xi_1", "xi_2"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    if let Ok(rows) = seedline::null::parse_table(text, "chunk_000000.tsv", &columns) {
        for (_, r) in &rows {
            assert_eq!(r.len(), columns.len());
        }
    }
});
