//! `reckon new NAME`: writes a starter spec with every section present and commented,
//! and prints what to add to a firmware crate to build it.

use std::path::Path;

use reckon::diag::render;
use reckon::scaffold::scaffold;

use super::{EXIT_OK, EXIT_USAGE};

#[derive(clap::Args)]
#[command(
    after_help = "Example:\n  reckon new hedge_trimmer     # writes specs/hedge_trimmer.reckon\n\nAn existing file is never overwritten."
)]
pub struct Args {
    /// Model name: letters, digits and underscores, not starting with a digit.
    #[arg(value_name = "NAME")]
    name: String,
}

pub fn run(args: &Args) -> i32 {
    let created = match scaffold(&args.name) {
        Ok(created) => created,
        Err(diagnostic) => {
            eprint!("{}", render::human("NAME", &args.name, &[diagnostic]));
            return EXIT_USAGE;
        }
    };
    let path = Path::new(&created.spec_path);
    if path.exists() {
        eprintln!(
            "error: `{}` already exists; not overwriting it",
            created.spec_path
        );
        return EXIT_USAGE;
    }
    let written = path
        .parent()
        .map_or(Ok(()), std::fs::create_dir_all)
        .and_then(|()| std::fs::write(path, &created.spec_text));
    if let Err(error) = written {
        eprintln!("error: cannot write `{}`: {error}", created.spec_path);
        return EXIT_USAGE;
    }
    println!("created {}\n", created.spec_path);
    println!(
        "Add to your firmware crate's Cargo.toml:\n\n{}\n",
        created.cargo_lines.trim_end()
    );
    println!("build.rs:\n\n{}\n", created.build_rs.trim_end());
    println!("In your source:\n\n{}\n", created.include_line.trim_end());
    println!(
        "Or list it in reckon.toml:\n\n{}\n",
        created.toml_entry.trim_end()
    );
    println!("next: reckon check {}", created.spec_path);
    EXIT_OK
}
