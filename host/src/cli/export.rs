//! `gleaner export`: recorded runs as CSV or Parquet.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use crate::export::{export_csv, write_csv};
use crate::failure::{FailedAs, Failure};
use crate::files::{is_stdio, open_input};

/// Export a recorded run as CSV (default) or Parquet: one row per report
/// (units in the column names) and the state transitions in a second file.
#[derive(Debug, Args)]
pub struct Cmd {
    /// The log (`-`: standard input).
    pub log: PathBuf,
    /// Prefix of the files written (default: the log's path without
    /// extension; `-`: the reports table as CSV on standard output).
    #[arg(long, alias = "out")]
    pub prefix: Option<PathBuf>,
    /// With `--prefix -`: the events table instead of the reports table.
    #[arg(long)]
    pub events: bool,
    /// Write Parquet instead of CSV (schema in docs/parquet-schema.md), for
    /// DuckDB, Spark or pandas when one laptop is not enough.
    #[arg(long)]
    pub parquet: bool,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let prefix = match (&self.prefix, is_stdio(&self.log)) {
            (Some(prefix), _) => prefix.clone(),
            (None, false) => self.log.with_extension(""),
            (None, true) => {
                return Err(anyhow::anyhow!(
                "a log read from standard input needs --prefix (a path, or - for standard output)"
            )
                .failed_as(Failure::Usage))
            }
        };
        if is_stdio(&prefix) {
            return self.to_stdout();
        }
        if self.events {
            return Err(anyhow::anyhow!(
                "--events chooses the table written to standard output (--prefix -); files get both"
            )
            .failed_as(Failure::Usage));
        }
        let total = crate::progress::total_size([self.log.as_path()]);
        let progress = crate::progress::bytes(total, &format!("exporting {}", self.log.display()));
        if self.parquet {
            let done = crate::export::export_parquet(&self.log, &prefix, &progress)?;
            progress.finish_and_clear();
            say!(
                "{} reports to {}",
                done.reports,
                done.reports_path.display()
            )?;
            say!("{} events to {}", done.events, done.events_path.display())?;
            return Ok(());
        }
        let done = export_csv(&self.log, &prefix, &progress)?;
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
    fn to_stdout(&self) -> Result<()> {
        if self.parquet {
            return Err(anyhow::anyhow!(
                "Parquet goes to files only: give --prefix a path (standard output takes CSV)"
            )
            .failed_as(Failure::Usage));
        }
        let input = open_input(&self.log, "log")?;
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
