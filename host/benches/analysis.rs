//! Records per second through each stage of a report, so the next slowdown
//! shows: reading the log, reading it with frames opened (one stream and
//! every core), the whole analysis, and each accumulator alone on reports
//! already decoded. Input: one invented day at one report per second.

use std::io::Write;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use gleaner::analysis::{
    days::DailyBudgets, efficiency::EfficiencyBins, energy::EnergySums, load_power::LoadPower,
    outages::ConverterOutages, states::StateTimes,
};
use gleaner::link::LinkTracker;
use gleaner::log::{split, LogReader, RecordBody};
use gleaner::sim::scenarios::synthetic::SyntheticLog;
use gleaner_protocol::{Report, UplinkBody};

/// One invented day at 1 Hz, written to a file.
fn day_log() -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("day.gleanlog");
    let mut bytes = Vec::new();
    std::io::copy(&mut SyntheticLog::new(86_400, 1), &mut bytes).unwrap();
    std::fs::File::create(&path)
        .unwrap()
        .write_all(&bytes)
        .unwrap();
    (dir, path)
}

/// The log's reports, decoded, with their end in run time.
fn reports(path: &std::path::Path) -> Vec<(f64, Report)> {
    let mut tracker = LinkTracker::new();
    let mut out = Vec::new();
    for record in LogReader::new(std::fs::File::open(path).unwrap()) {
        if let RecordBody::Frame(bytes) = record.body {
            if let Ok(Some(t)) = tracker.accept_encoded(&bytes) {
                if let UplinkBody::Report(r) = t.message.body {
                    out.push((t.message.uptime_ms as f64 / 1e3, r));
                }
            }
        }
    }
    out
}

fn reading(c: &mut Criterion) {
    let (_dir, path) = day_log();
    let records = LogReader::new(std::fs::File::open(&path).unwrap()).count() as u64;
    let mut group = c.benchmark_group("log");
    group.throughput(Throughput::Elements(records));
    group.sample_size(10);
    group.bench_function("read records", |b| {
        b.iter(|| {
            let mut reader = LogReader::new(std::fs::File::open(&path).unwrap());
            let mut n = 0u64;
            while reader.next_ref().is_some() {
                n += 1;
            }
            assert_eq!(n, records);
        })
    });
    for workers in [1, gleaner::parallel::workers().max(2)] {
        group.bench_with_input(
            BenchmarkId::new("read and open frames, workers", workers),
            &workers,
            |b, &w| {
                b.iter(|| {
                    let mut n = 0u64;
                    split::read_log(&path, w, &mut |_| {}, |_| n += 1).unwrap();
                    assert_eq!(n, records);
                })
            },
        );
    }
    group.bench_function("whole analysis", |b| {
        b.iter(|| gleaner::analysis::analyze_file(&path).unwrap())
    });
    group.finish();
}

fn accumulators(c: &mut Criterion) {
    let (_dir, path) = day_log();
    let reports = reports(&path);
    let mut group = c.benchmark_group("accumulator");
    group.throughput(Throughput::Elements(reports.len() as u64));
    group.bench_function("energy", |b| {
        b.iter(|| {
            let mut a = EnergySums::default();
            reports.iter().for_each(|(_, r)| a.push(r));
            a.finish()
        })
    });
    group.bench_function("states", |b| {
        b.iter(|| {
            let mut a = StateTimes::default();
            reports.iter().for_each(|(_, r)| a.push(r));
            a.finish(86_400.0)
        })
    });
    group.bench_function("efficiency by input", |b| {
        b.iter(|| {
            let mut a = EfficiencyBins::default();
            reports.iter().for_each(|(_, r)| a.push(r));
            a.finish()
        })
    });
    group.bench_function("daily budget", |b| {
        b.iter(|| {
            let mut a = DailyBudgets::default();
            reports.iter().for_each(|(t, r)| a.push(t - 1.0, 0.0, r));
            a.finish()
        })
    });
    group.bench_function("load power", |b| {
        b.iter(|| {
            let mut a = LoadPower::default();
            reports.iter().for_each(|(_, r)| a.push(r));
            a.load_w()
        })
    });
    group.bench_function("converter outages", |b| {
        b.iter(|| {
            let mut a = ConverterOutages::default();
            reports
                .iter()
                .for_each(|(t, r)| a.push_report(*t, 1.0, r.state, (0.5, 3.0)));
            a.finish(86_400.0)
        })
    });
    group.finish();
}

criterion_group!(benches, reading, accumulators);
criterion_main!(benches);
