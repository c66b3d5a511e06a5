//! `gleaner import`: a raw byte capture (a terminal program's file, an
//! emulator's serial file) into a log, so every other command can read it.

use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::Args;

use crate::recorder::Recorder;

/// Turn a raw capture of the node's serial bytes into a Gleaner log. Host
/// times are the capture file's modification time (no better is known).
#[derive(Debug, Args)]
pub struct Cmd {
    /// The raw capture (`-`: standard input, stamped with the time read).
    pub raw: PathBuf,
    /// The log to create.
    #[arg(long)]
    pub out: PathBuf,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let mut input = crate::files::open_input(&self.raw, "capture")?;
        let mut bytes = Vec::new();
        std::io::Read::read_to_end(&mut input.reader, &mut bytes)
            .with_context(|| format!("cannot read {}", input.name))?;
        let when = if crate::files::is_stdio(&self.raw) {
            crate::log::now_us()
        } else {
            std::fs::metadata(&self.raw)
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
                .map_or(0, |d| u64::try_from(d.as_micros()).unwrap_or(0))
        };
        let mut recorder = Recorder::create(&self.out, &format!("import of {}", input.name))?;
        recorder.on_bytes(when, &bytes, |_| {})?;
        recorder.finish()?;
        let s = recorder.stats();
        say!(
            "{} frames ({} damaged) from {} bytes into {}",
            s.frames,
            s.damaged(),
            bytes.len(),
            self.out.display()
        )?;
        Ok(())
    }
}
