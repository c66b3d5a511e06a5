//! `gleaner report`: what happened in recorded runs.

use std::io::Write;
use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::Args;

use crate::analysis::{analyze_as_one_run, analyze_file_with, html, text, Reading, RunReport};
use crate::failure::{FailedAs, Failure};

/// Report on one or more recorded runs: duration and coverage, time in each
/// state, every outage with its cause, energy and efficiency (overall and by
/// input voltage), daily budgets, storage and duty-cycle advice, link quality.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Log files (one per node for a fleet; `-`: standard input).
    #[arg(required = true)]
    pub logs: Vec<PathBuf>,
    /// Print JSON (schema `gleaner.report.v2`, see docs/report-json.md).
    #[arg(long)]
    pub json: bool,
    /// Also write an HTML page with plots here (one log only; refused with several).
    #[arg(long)]
    pub html: Option<PathBuf>,
    /// Read the logs, in the order given, as one run: a recording rotated
    /// into several files (`record --rotate`, SIGHUP).
    #[arg(long)]
    pub one_run: bool,
    /// Read every record, passing over the checkpoints a recording leaves in
    /// its log (the report is the same; only slower on a long log).
    #[arg(long)]
    pub read_all: bool,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        if self.one_run {
            let progress = crate::progress::bytes(
                crate::progress::total_size(self.logs.iter().map(PathBuf::as_path)),
                &format!("reading {} logs as one run", self.logs.len()),
            );
            let reading = Reading {
                checkpoints: !self.read_all,
                ..Reading::default()
            };
            let report = analyze_as_one_run(&self.logs, &reading, &progress);
            progress.finish_and_clear();
            let name = self.logs.first().cloned().unwrap_or_default();
            return self.write(&[(name, report?)]);
        }
        if self.html.is_some() && self.logs.len() > 1 {
            return Err(anyhow::anyhow!(
                "--html draws one log's page, and {} logs were given: run `gleaner report --html PAGE LOG` once per log",
                self.logs.len()
            )
            .failed_as(Failure::Usage));
        }
        let mut reports: Vec<(PathBuf, RunReport)> = Vec::new();
        let mut failed = Vec::new();
        let total = crate::progress::total_size(self.logs.iter().map(PathBuf::as_path));
        let what = match self.logs.as_slice() {
            [one] => format!("reading {}", one.display()),
            many => format!("reading {} logs", many.len()),
        };
        let progress = crate::progress::bytes(total, &what);
        // Every core: one log per worker, or one log read in parts by all;
        // the results in the order given.
        let workers = crate::parallel::workers();
        let reading = Reading {
            workers: workers.div_ceil(self.logs.len()).max(1),
            checkpoints: !self.read_all,
        };
        let analysed = crate::parallel::map_in_order(self.logs.len(), workers, |i| {
            analyze_file_with(&self.logs[i], &reading, &progress)
        });
        for (log, result) in self.logs.iter().zip(analysed) {
            match result {
                Ok(report) => reports.push((log.clone(), report)),
                Err(err) => failed.push(format!("{err:#}")),
            }
        }
        progress.finish_and_clear();
        if reports.is_empty() {
            return Err(anyhow::anyhow!("{}", failed.join("; ")).failed_as(Failure::BadInput));
        }
        self.write(&reports)?;
        if failed.is_empty() {
            return Ok(());
        }
        for why in &failed {
            eprintln!("error: {why}");
        }
        Err(anyhow::anyhow!(
            "{} of {} logs could not be reported (the others are above)",
            failed.len(),
            self.logs.len()
        )
        .failed_as(Failure::BadInput))
    }

    /// Writes the reports of the logs that could be read.
    fn write(&self, reports: &[(PathBuf, RunReport)]) -> Result<()> {
        if let Some(path) = &self.html {
            let (_, first) = reports.first().context("no log given")?;
            let page =
                html::render(first).map_err(|e| anyhow::anyhow!("cannot draw the plots: {e}"))?;
            crate::files::write_atomic(path, page.as_bytes())?;
            eprintln!("wrote {}", path.display());
        }
        // Written with errors returned, so a reader that closes the pipe
        // early (`| head`) ends the command quietly (see `cli::is_closed_pipe`).
        let mut out = std::io::stdout().lock();
        if self.json {
            if reports.len() == 1 {
                writeln!(out, "{}", serde_json::to_string_pretty(&reports[0].1)?)?;
            } else {
                let all: Vec<&RunReport> = reports.iter().map(|(_, r)| r).collect();
                writeln!(out, "{}", serde_json::to_string_pretty(&all)?)?;
            }
            return Ok(());
        }
        if reports.len() == 1 {
            write!(out, "{}", text::render(&reports[0].1))?;
            return Ok(());
        }
        write_fleet_table(&mut out, reports)
    }
}

/// One line per log and a fleet total.
fn write_fleet_table(out: &mut impl Write, reports: &[(PathBuf, RunReport)]) -> Result<()> {
    writeln!(
        out,
        "{:<40} {:>12} {:>12} {:>12} {:>9} {:>8} {:>6}",
        "log", "duration", "drawn", "delivered", "eff.", "outages", "lost"
    )?;
    let (mut drawn, mut delivered, mut stored, mut outages, mut lost) =
        (0.0, 0.0, 0.0, 0usize, 0u64);
    for (path, r) in reports {
        writeln!(
            out,
            "{:<40} {:>12} {:>12} {:>12} {:>9} {:>8} {:>6}",
            path.file_name()
                .map_or("?".into(), |n| n.to_string_lossy().into_owned()),
            text::duration(r.duration_s),
            text::energy(r.energy.drawn_j),
            text::energy(r.energy.delivered_j),
            r.energy
                .efficiency
                .map_or("-".into(), |e| format!("{:.1} %", e * 100.0)),
            r.outages.len(),
            r.link.lost_frames
        )?;
        drawn += r.energy.drawn_j;
        delivered += r.energy.delivered_j;
        stored += r.energy.stored_j;
        outages += r.outages.len();
        lost += r.link.lost_frames;
    }
    // The fleet's efficiency by the node's own rule (and its energy floor).
    let nj = |joules: f64| (joules * 1e9).round();
    let eff = gleaner_firmware::meter::efficiency_ppm(
        nj(drawn) as u64,
        nj(delivered) as u64,
        nj(stored) as i64,
    )
    .map_or("-".into(), |ppm| format!("{:.1} %", f64::from(ppm) / 1e4));
    writeln!(
        out,
        "{:<40} {:>12} {:>12} {:>12} {:>9} {:>8} {:>6}",
        "FLEET",
        "",
        text::energy(drawn),
        text::energy(delivered),
        eff,
        outages,
        lost
    )?;
    Ok(())
}
