//! Entry point: parse arguments, run the command, map the outcome to an exit code.

use clap::Parser;

fn main() {
    let cli = sworn::cli::Cli::parse();
    let code = match sworn::app::dispatch(cli.command) {
        Ok(outcome) => outcome.code(),
        Err(err) => {
            eprintln!("error: {}", sworn::escape::terminal(&err.to_string()));
            err.exit_code()
        }
    };
    std::process::exit(code);
}
