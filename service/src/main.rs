//! calcium-cds binary: wiring only (see `calcium_cds::cli`).

use std::io::Write as _;

fn main() -> std::process::ExitCode {
    match calcium_cds::config::parse_cli(std::env::args_os().collect()) {
        Ok((cli, sources)) => calcium_cds::cli::run(cli, &sources),
        Err(calcium_cds::config::CliError::Usage(e)) => e.exit(),
        Err(calcium_cds::config::CliError::File(e)) => {
            // Not eprintln!: a closed or broken stderr must not turn this into a panic.
            let _ = writeln!(std::io::stderr().lock(), "calcium-cds: {e}");
            std::process::ExitCode::from(calcium_cds::cli::EXIT_CONFIG_ERROR)
        }
    }
}
