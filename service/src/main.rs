//! calcium-cds binary: wiring only (see `calcium_cds::cli`).

fn main() -> std::process::ExitCode {
    match calcium_cds::config::parse_cli(std::env::args_os().collect()) {
        Ok((cli, sources)) => calcium_cds::cli::run(cli, &sources),
        Err(calcium_cds::config::CliError::Usage(e)) => e.exit(),
        Err(calcium_cds::config::CliError::File(e)) => {
            eprintln!("calcium-cds: {e}");
            std::process::ExitCode::from(calcium_cds::cli::EXIT_CONFIG_ERROR)
        }
    }
}
