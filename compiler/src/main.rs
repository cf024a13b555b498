//! The `reckon` command-line tool: argument parsing and file I/O around the pure
//! library. Each subcommand lives in its own module under `cli/`.

mod cli;

fn main() {
    // Last resort: a panic is a bug in reckon, never the user's fault. Say so, ask
    // for a report, and exit with a status scripts can tell apart from "errors found".
    std::panic::set_hook(Box::new(|info| {
        eprintln!(
            "error: internal error in reckon {}",
            env!("CARGO_PKG_VERSION")
        );
        eprintln!("  {info}");
        eprintln!(
            "  This is a bug in reckon, not in your spec. Please report it with the spec \
             and the command line that triggered it."
        );
    }));
    let code = std::panic::catch_unwind(cli::run).unwrap_or(cli::EXIT_INTERNAL);
    std::process::exit(code);
}
