//! `gleaner`: watch, record and analyse energy-harvesting sensor nodes, or run
//! a virtual one.

use clap::Parser;

fn main() -> std::process::ExitCode {
    let cli = gleaner::cli::Cli::parse();
    match cli.run() {
        Ok(()) => std::process::ExitCode::SUCCESS,
        Err(err) if gleaner::cli::is_closed_pipe(&err) => std::process::ExitCode::SUCCESS,
        Err(err) => {
            eprintln!("error: {err:#}");
            std::process::ExitCode::from(gleaner::failure::Failure::exit_code(&err))
        }
    }
}
