//! Any file into the log reader and the analysis: never a panic, never more
//! records than the bytes could hold.
#![no_main]

use gleaner::analysis::Analyzer;
use gleaner::log::LogReader;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let mut reader = LogReader::new(data);
    let mut analyzer = Analyzer::new();
    let mut records = 0usize;
    for record in reader.by_ref() {
        analyzer.add_record(&record);
        records += 1;
    }
    assert!(records <= data.len() / 17 + 1);
    let _ = analyzer.finish();
});
