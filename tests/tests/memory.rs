//! Memory stays flat however long the log: 30 days at one report per second
//! (about 2.6 million reports) is summarised with the same peak allocation as
//! one day. Measured by counting allocations, not by timing.

use gleaner::analysis::Analyzer;
use gleaner::log::LogReader;
use gleaner::sim::scenarios::synthetic::SyntheticLog;
use peak_alloc::PeakAlloc;

#[global_allocator]
static ALLOCATOR: PeakAlloc = PeakAlloc;

/// Peak bytes allocated while summarising `days` of 1 Hz reports.
fn peak_for_days(days: u64) -> (usize, usize, f64) {
    ALLOCATOR.reset_peak_usage();
    let before = ALLOCATOR.current_usage();
    // The analysis alone: the generator's own checkpoints would count too.
    let mut reader = LogReader::new(SyntheticLog::new(days * 86_400, 1).without_checkpoints());
    let mut analyzer = Analyzer::new();
    let mut records = 0usize;
    for record in reader.by_ref() {
        analyzer.add_record(&record);
        records += 1;
    }
    let report = analyzer.finish();
    let peak = ALLOCATOR.peak_usage().saturating_sub(before);
    (peak, records, report.energy.drawn_j)
}

#[test]
fn thirty_days_at_one_hertz_take_no_more_memory_than_one() {
    let (one_day, one_day_records, _) = peak_for_days(1);
    let (thirty_days, records, drawn) = peak_for_days(30);
    println!("peak: 1 day {one_day} B ({one_day_records} records), 30 days {thirty_days} B ({records} records)");
    assert!(records > 2_590_000, "{records} records");
    assert!(drawn > 0.0);
    assert!(
        thirty_days < one_day + 256 * 1024,
        "memory grew: {one_day} B for a day, {thirty_days} B for 30"
    );
    assert!(thirty_days < 4 * 1024 * 1024, "{thirty_days} B");
}
