//! The `tunnelcast` binary: parses arguments, runs one command, maps errors to exit codes
//! (0 success, 1 the computation failed, 2 bad usage or bad input).

use clap::Parser;

fn main() {
    let cli = match tunnelcast::cli::Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => e.exit(),
    };
    if let Err(e) = tunnelcast::cli::run(cli) {
        eprintln!("error: {e}");
        std::process::exit(e.exit_code());
    }
}
