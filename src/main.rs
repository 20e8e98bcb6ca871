//! Entry point: parse arguments, run the command, map the outcome to an exit code.

use clap::Parser;

/// Large freed blocks are kept for reuse (see `sworn::memory`).
#[global_allocator]
static ALLOCATOR: sworn::memory::Recycler =
    sworn::memory::Recycler::new(sworn::memory::CACHE_BYTES);

/// Exit code when stdout is closed under us (as a process stopped by SIGPIPE reports it).
const CLOSED_PIPE: i32 = 141;

/// A closed stdout (`sworn demo | head`) ends the process quietly instead of as a panic.
fn quiet_on_closed_pipe() {
    let previous = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        let message = info
            .payload()
            .downcast_ref::<String>()
            .map(String::as_str)
            .or_else(|| info.payload().downcast_ref::<&str>().copied())
            .unwrap_or("");
        if message.starts_with("failed printing to stdout") {
            std::process::exit(CLOSED_PIPE);
        }
        previous(info);
    }));
}

fn main() {
    quiet_on_closed_pipe();
    let cli = sworn::cli::Cli::parse();
    let json = cli.command.json_output();
    let code = match sworn::app::dispatch(cli.command) {
        Ok(outcome) => outcome.code(),
        Err(err) => {
            if let Some(command) = json {
                sworn::app::emit_error_json(command, &err.to_string());
            }
            eprintln!(
                "{} {}",
                sworn::terminal::error_prefix(),
                sworn::escape::terminal(&err.to_string())
            );
            err.exit_code()
        }
    };
    std::process::exit(code);
}
