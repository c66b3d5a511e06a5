//! `gleaner export`: recorded runs as CSV or Parquet.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use crate::export::{export_csv, write_csv};
use crate::failure::{FailedAs, Failure};
use crate::files::is_stdio;

/// Export a recorded run as CSV (default) or Parquet: one row per report
/// (units in the column names) and the state transitions in a second file;
/// or many runs (logs or folders of them) into one partitioned Parquet
/// dataset for DuckDB or Spark (`--dataset DIR`).
#[derive(Debug, Args)]
pub struct Cmd {
    /// The log (`-`: standard input), or several read in the order given as
    /// one run (a rotated recording, gzipped or not); with --dataset, any
    /// number of logs and folders of logs.
    #[arg(required = true, value_name = "LOG")]
    pub logs: Vec<PathBuf>,
    /// Add the logs to the Parquet dataset in this folder (created if
    /// needed; layout in docs/dataset.md): one process per core, each log's
    /// files replaced if it was exported before, other files left alone.
    #[arg(long, conflicts_with_all = ["prefix", "parquet", "events"])]
    pub dataset: Option<PathBuf>,
    /// Prefix of the files written (default: the log's path without
    /// extension; `-`: the reports table as CSV on standard output).
    #[arg(long, alias = "out")]
    pub prefix: Option<PathBuf>,
    /// With `--prefix -`: the events table instead of the reports table.
    #[arg(long)]
    pub events: bool,
    /// Write Parquet instead of CSV (the dataset's columns, one file per
    /// table; docs/dataset.md), for DuckDB, Spark, pandas or Polars.
    #[arg(long)]
    pub parquet: bool,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        if let Some(dir) = &self.dataset {
            return export_dataset(&self.logs, dir);
        }
        let logs = self.logs.as_slice();
        let Some(log) = logs.first() else {
            return Err(anyhow::anyhow!("name a log").failed_as(Failure::Usage));
        };
        let prefix = match (&self.prefix, is_stdio(log)) {
            (Some(prefix), _) => prefix.clone(),
            (None, false) => default_prefix(log),
            (None, true) => {
                return Err(anyhow::anyhow!(
                "a log read from standard input needs --prefix (a path, or - for standard output)"
            )
                .failed_as(Failure::Usage))
            }
        };
        if is_stdio(&prefix) {
            return self.to_stdout(logs);
        }
        if self.events {
            return Err(anyhow::anyhow!(
                "--events chooses the table written to standard output (--prefix -); files get both"
            )
            .failed_as(Failure::Usage));
        }
        let total = crate::progress::total_size(logs.iter().map(PathBuf::as_path));
        let progress = crate::progress::bytes(total, &format!("exporting {}", log.display()));
        if self.parquet {
            let done = crate::export::export_parquet(logs, &prefix, &progress)?;
            progress.finish_and_clear();
            for table in crate::dataset::Table::ALL {
                let rows = done.rows.get(table.name()).copied().unwrap_or(0);
                if let Some(file) = done.files.iter().find(|f| {
                    f.to_string_lossy()
                        .ends_with(&format!("-{}.parquet", table.name()))
                }) {
                    say!("{rows} {} to {}", table.name(), file.display())?;
                }
            }
            return Ok(());
        }
        let done = export_csv(logs, &prefix, &progress)?;
        progress.finish_and_clear();
        say!(
            "{} reports to {}",
            done.reports,
            done.reports_path.display()
        )?;
        say!("{} events to {}", done.events, done.events_path.display())?;
        Ok(())
    }

    /// Writes one table as CSV to standard output.
    fn to_stdout(&self, logs: &[PathBuf]) -> Result<()> {
        if self.parquet {
            return Err(anyhow::anyhow!(
                "Parquet goes to files only: give --prefix a path (standard output takes CSV)"
            )
            .failed_as(Failure::Usage));
        }
        let input = crate::export::open_logs(logs)?;
        let stdout = std::io::stdout();
        let mut out = std::io::BufWriter::new(stdout.lock());
        let mut sink = std::io::sink();
        if self.events {
            write_csv(input, &mut sink, &mut out, &crate::progress::none())?;
        } else {
            write_csv(input, &mut out, &mut sink, &crate::progress::none())?;
        }
        use std::io::Write as _;
        out.flush()?;
        Ok(())
    }
}

/// The logs named: files as given, folders as the `*.gleanlog` files in them.
pub fn logs_in(paths: &[PathBuf]) -> Result<Vec<PathBuf>> {
    let mut logs = Vec::new();
    for path in paths {
        if path.is_dir() {
            let mut found: Vec<PathBuf> = std::fs::read_dir(path)
                .map_err(|e| anyhow::anyhow!("cannot read folder {}: {e}", path.display()))?
                .flatten()
                .map(|e| e.path())
                .filter(|p| p.extension().is_some_and(|x| x == "gleanlog"))
                .collect();
            if found.is_empty() {
                return Err(
                    anyhow::anyhow!("{} holds no .gleanlog files", path.display())
                        .failed_as(Failure::BadInput),
                );
            }
            found.sort();
            logs.extend(found);
        } else {
            logs.push(path.clone());
        }
    }
    Ok(logs)
}

/// Adds `paths` (logs and folders) to the dataset at `dir`, one log per
/// core; the logs that export are kept even when others fail.
fn export_dataset(paths: &[PathBuf], dir: &std::path::Path) -> Result<()> {
    let logs = logs_in(paths)?;
    if let Some(stdin) = logs.iter().find(|l| is_stdio(l)) {
        return Err(anyhow::anyhow!(
            "the dataset is written from log files ({} is standard input): save it to a file first",
            stdin.display()
        )
        .failed_as(Failure::Usage));
    }
    let total = crate::progress::total_size(logs.iter().map(PathBuf::as_path));
    let progress = crate::progress::bytes(total, &format!("exporting {} logs", logs.len()));
    let done = crate::parallel::map_in_order(logs.len(), crate::parallel::workers(), |i| {
        crate::dataset::export_log(&logs[i], dir, &progress)
    });
    progress.finish_and_clear();
    let mut failed = 0;
    for (log, result) in logs.iter().zip(done) {
        match result {
            Ok(e) => {
                let rows: Vec<String> = e.rows.iter().map(|(t, n)| format!("{n} {t}")).collect();
                say!(
                    "{}: node {}, {} into {} files",
                    log.display(),
                    e.node_id,
                    rows.join(", "),
                    e.files.len()
                )?;
            }
            Err(err) => {
                failed += 1;
                eprintln!("error: {err:#}");
            }
        }
    }
    if failed > 0 {
        return Err(anyhow::anyhow!(
            "{failed} of {} logs could not be exported (the others are in {})",
            logs.len(),
            dir.display()
        )
        .failed_as(Failure::BadInput));
    }
    Ok(())
}

/// The prefix of a log's exported files: its path without `.gleanlog` (and
/// `.gz` for a gzipped one).
fn default_prefix(log: &std::path::Path) -> PathBuf {
    let gz = log
        .extension()
        .is_some_and(|e| format!(".{}", e.to_string_lossy()) == crate::upkeep::COMPRESSED_SUFFIX);
    let log = if gz {
        log.with_extension("")
    } else {
        log.to_path_buf()
    };
    log.with_extension("")
}
