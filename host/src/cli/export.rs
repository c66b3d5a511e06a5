//! `gleaner export`: recorded runs as CSV.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use crate::export::export_csv;

/// Export a recorded run as CSV (default) or Parquet: one row per report
/// (units in the column names) and the state transitions in a second file.
#[derive(Debug, Args)]
pub struct Cmd {
    /// The log.
    pub log: PathBuf,
    /// Prefix of the files written (default: the log's path without extension).
    #[arg(long, alias = "out")]
    pub prefix: Option<PathBuf>,
    /// Write Parquet instead of CSV (schema in docs/parquet-schema.md), for
    /// DuckDB, Spark or pandas when one laptop is not enough.
    #[arg(long)]
    pub parquet: bool,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let prefix = self
            .prefix
            .clone()
            .unwrap_or_else(|| self.log.with_extension(""));
        if self.parquet {
            let done = crate::export::export_parquet(&self.log, &prefix)?;
            say!(
                "{} reports to {}",
                done.reports,
                done.reports_path.display()
            )?;
            say!("{} events to {}", done.events, done.events_path.display())?;
            return Ok(());
        }
        let done = export_csv(&self.log, &prefix)?;
        say!(
            "{} reports to {}",
            done.reports,
            done.reports_path.display()
        )?;
        say!("{} events to {}", done.events, done.events_path.display())?;
        Ok(())
    }
}
