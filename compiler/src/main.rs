//! The `reckon` command-line tool: argument parsing and file I/O around the pure
//! library. Each subcommand lives in its own module under `cli/`.

mod cli;

fn main() {
    std::process::exit(cli::run());
}
