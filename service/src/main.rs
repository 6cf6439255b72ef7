//! calcium-cds binary: wiring only (see `calcium_cds::cli`).

use clap::Parser;

fn main() -> std::process::ExitCode {
    calcium_cds::cli::run(calcium_cds::config::Cli::parse())
}
