//! `gleaner completions` and `gleaner man-page`: the shell's own help,
//! generated from the same command definitions as `--help`.

use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::{Args, CommandFactory};

/// Print the shell completion script for bash, zsh, fish, elvish or
/// PowerShell (install lines in the README).
#[derive(Debug, Args)]
pub struct Completions {
    /// The shell.
    pub shell: clap_complete::Shell,
}

impl Completions {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let mut script = Vec::new();
        clap_complete::generate(
            self.shell,
            &mut super::Cli::command(),
            "gleaner",
            &mut script,
        );
        use std::io::Write as _;
        std::io::stdout().write_all(&script)?;
        Ok(())
    }
}

/// Print the manual page (roff) of gleaner, or write one page per command
/// into a folder (`gleaner.1`, `gleaner-record.1`, ...).
#[derive(Debug, Args)]
pub struct ManPage {
    /// Write every command's page into this folder instead of printing the main page.
    #[arg(long)]
    pub dir: Option<PathBuf>,
}

impl ManPage {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let command = super::Cli::command();
        let Some(dir) = &self.dir else {
            let mut page = Vec::new();
            clap_mangen::Man::new(command).render(&mut page)?;
            use std::io::Write as _;
            std::io::stdout().write_all(&page)?;
            return Ok(());
        };
        std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
        clap_mangen::generate_to(command, dir)
            .with_context(|| format!("cannot write the pages into {}", dir.display()))?;
        eprintln!("wrote the manual pages into {}", dir.display());
        Ok(())
    }
}
