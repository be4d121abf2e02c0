//! The `seepd` binary: parse arguments, set up logging, hand over to the library.

use clap::Parser;

fn main() -> std::process::ExitCode {
    let cli = seepd::cli::Cli::parse();
    tracing_subscriber::fmt()
        .with_env_filter(
            tracing_subscriber::EnvFilter::try_from_env("SEEPD_LOG")
                .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("info,rumqttd=off")),
        )
        .with_writer(std::io::stderr)
        // Colour only on a terminal: journald and log files get plain key=value lines.
        .with_ansi(std::io::IsTerminal::is_terminal(&std::io::stderr()))
        .init();
    seepd::cli::main_with(cli)
}
