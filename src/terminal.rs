//! Colour on a terminal: on only when the stream is a terminal and `NO_COLOR` is unset or empty
//! (the convention of no-color.org).

use std::io::IsTerminal;

fn colour_allowed() -> bool {
    std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty())
}

/// Whether standard output may carry colour.
pub fn colour_on_stdout() -> bool {
    colour_allowed() && std::io::stdout().is_terminal()
}

/// Whether standard error may carry colour.
pub fn colour_on_stderr() -> bool {
    colour_allowed() && std::io::stderr().is_terminal()
}

/// The prefix of an error line on standard error: bold red on a terminal.
pub fn error_prefix() -> &'static str {
    if colour_on_stderr() {
        "\x1b[1;31merror:\x1b[0m"
    } else {
        "error:"
    }
}
