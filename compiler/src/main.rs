//! The `reckon` command-line tool.

fn main() {
    std::process::exit(2);
}
