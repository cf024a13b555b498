//! Reference pages generated from the compiler's own tables: the unit catalogue
//! (`docs/units.md`) and the diagnostic codes (`docs/codes.md`).
//!
//! The pages are rendered here and committed; a test fails when a committed page
//! differs from what the tables say now (run the tests with `RECKON_BLESS=1` to
//! rewrite it), so the documentation cannot drift from the checker.

#[cfg(test)]
mod editor_grammar;

use std::fmt::Write as _;

use crate::diag::{codes, Severity};
use crate::units::{catalogue, prefixes, CatalogueEntry, UnitKind};

/// The unit catalogue as a markdown page: every unit with its spellings, definition,
/// exact size in SI and whether it takes prefixes, then the SI prefixes.
pub fn units_markdown() -> String {
    let mut out = String::from(
        "# Units\n\n\
         <!-- Generated from the unit catalogue (`reckon::units::catalogue()`); do not edit.\n     \
         Regenerate with `RECKON_BLESS=1 cargo test -p reckon --lib reference`. -->\n\n\
         Every number in a spec carries one of these units, or a product, quotient or power of\n\
         them (`m/s^2`, `deg/h/sqrt(h)`, `Hz^(1/2)`). Symbols are case-sensitive. Sizes are\n\
         exact: the checker combines units as exact fractions times powers of pi and rounds\n\
         to floating point once, at the end.\n\n\
         How a symbol is read: a symbol in the table is that unit (`min` is the minute, `mi`\n\
         the mile, `G` the gauss); otherwise it is one SI prefix followed by a unit marked\n\
         *prefixes: yes* (`km`, `ms`, `µs` or `us`, `hPa`, `mbar`, `kg`). Only one prefix.\n\n\
         | Symbol | Name | Definition | Size in SI | Prefixes | Kind |\n\
         |---|---|---|---|---|---|\n",
    );
    for entry in catalogue() {
        let _ = writeln!(
            out,
            "| {} | {} | {} | {} | {} | {} |",
            entry
                .symbols
                .iter()
                .map(|s| format!("`{s}`"))
                .collect::<Vec<_>>()
                .join(", "),
            entry.name,
            entry.definition,
            size_in_si(entry),
            if entry.prefixable { "yes" } else { "no" },
            kind_name(entry.kind),
        );
    }
    out.push_str(
        "\nAngles and cycles are dimensionless in SI; the checker still tracks them so that\n\
         `rad/s` meeting `Hz` (a missing factor of 2 pi) is reported. In the *Size in SI*\n\
         column, `rad` and `cycle` mark those soft axes.\n\n\
         ## SI prefixes\n\n\
         | Symbol | Name | Factor |\n\
         |---|---|---|\n",
    );
    for prefix in prefixes() {
        let _ = writeln!(
            out,
            "| {} | {} | 10^{} |",
            prefix
                .symbols
                .iter()
                .map(|s| format!("`{s}`"))
                .collect::<Vec<_>>()
                .join(", "),
            prefix.name,
            prefix.power_of_ten,
        );
    }
    out
}

fn size_in_si(entry: &CatalogueEntry) -> String {
    // Rows whose exact factor does not parse are ruled out by the catalogue tests.
    entry
        .unit()
        .map_or_else(|| entry.factor.to_string(), |unit| format!("`{unit}`"))
}

fn kind_name(kind: UnitKind) -> &'static str {
    match kind {
        UnitKind::Base => "SI base",
        UnitKind::Derived => "SI derived",
        UnitKind::Accepted => "accepted with SI",
        UnitKind::Trade => "trade",
    }
}

/// Every diagnostic code with its title, severity and the explanation that
/// `reckon explain CODE` prints.
pub fn codes_markdown() -> String {
    let mut out = String::from(
        "# Diagnostic codes\n\n\
         <!-- Generated from the code catalogue (`reckon::diag::codes::ALL`); do not edit.\n     \
         Regenerate with `RECKON_BLESS=1 cargo test -p reckon --lib reference`. -->\n\n\
         Every diagnostic reckon reports carries one of these stable codes. `reckon explain\n\
         CODE` prints the same explanation in a terminal. Ranges: `E01xx` syntax, `E02xx`\n\
         names and structure, `E03xx` units and dimensions, `E04xx` noise and distributions,\n\
         `E05xx` sensors and gates, `E06xx` methods and back ends, `E07xx` project files,\n\
         `W08xx` warnings.\n\n\
         | Code | Severity | Title |\n\
         |---|---|---|\n",
    );
    for code in codes::ALL {
        let anchor = code.id.to_ascii_lowercase();
        let _ = writeln!(
            out,
            "| [{}](#{anchor}) | {} | {} |",
            code.id,
            severity_name(code.severity),
            code.title.replace('|', "\\|"),
        );
    }
    for code in codes::ALL {
        let _ = write!(
            out,
            "\n## {}\n\n**{}** ({})\n\n```text\n{}\n```\n",
            code.id,
            code.title,
            severity_name(code.severity),
            code.explanation.trim_end(),
        );
    }
    out
}

fn severity_name(severity: Severity) -> &'static str {
    match severity {
        Severity::Error => "error",
        Severity::Warning => "warning",
        Severity::Note => "note",
    }
}

/// Test support: compares a committed file with what the code renders now.
#[cfg(test)]
pub(crate) mod drift {
    use std::path::PathBuf;

    /// The repository root (the workspace folder above `compiler/`).
    pub fn repository_root() -> PathBuf {
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
    }

    /// Fails when `relative_path` (from the repository root) differs from
    /// `expected`; with `RECKON_BLESS=1` in the environment, rewrites it instead.
    pub fn assert_file_is(relative_path: &str, expected: &str) {
        let path = repository_root().join(relative_path);
        if std::env::var_os("RECKON_BLESS").is_some_and(|v| v == "1") {
            if let Some(parent) = path.parent() {
                std::fs::create_dir_all(parent).expect("create the docs folder");
            }
            std::fs::write(&path, expected).expect("write the blessed file");
            return;
        }
        let committed = std::fs::read_to_string(&path).unwrap_or_default();
        assert!(
            committed == expected,
            "{relative_path} is out of date with the code; rerun with RECKON_BLESS=1 to regenerate it"
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_page_matches_the_catalogue() {
        drift::assert_file_is("docs/units.md", &units_markdown());
    }

    #[test]
    fn codes_page_matches_the_code_catalogue() {
        drift::assert_file_is("docs/codes.md", &codes_markdown());
    }

    #[test]
    fn units_page_lists_every_spelling_and_prefix() {
        let page = units_markdown();
        for entry in catalogue() {
            for symbol in entry.symbols {
                assert!(page.contains(&format!("`{symbol}`")), "{symbol} missing");
            }
        }
        assert_eq!(
            page.lines().filter(|l| l.starts_with("| `")).count(),
            catalogue().count() + prefixes().count()
        );
    }

    /// Sizes as the SI Brochure (9th edition, table 8) and NIST SP 811 (appendix B)
    /// give them; the page must show the exact factors, not rounded ones.
    #[test]
    fn units_page_shows_exact_sizes() {
        let page = units_markdown();
        let row = |symbol: &str| {
            page.lines()
                .find(|l| l.starts_with(&format!("| `{symbol}`")))
                .unwrap_or_else(|| panic!("no row for {symbol}"))
                .to_string()
        };
        assert!(row("h").contains("`3600 s`"), "{}", row("h"));
        assert!(
            row("ft").contains("0.3048") || row("ft").contains("381/1250"),
            "{}",
            row("ft")
        );
        assert!(row("deg").contains("pi"), "{}", row("deg"));
    }

    #[test]
    fn codes_page_has_every_code_and_explanation() {
        let page = codes_markdown();
        for code in codes::ALL {
            assert!(page.contains(&format!("\n## {}\n", code.id)));
            assert!(page.contains(code.explanation.trim_end()));
        }
    }
}

/// The tutorial's spec snippets do what the tutorial says they do.
#[cfg(test)]
mod tutorial {
    use super::drift::repository_root;

    /// The ```reckon block right after the marker comment `<!-- tutorial:NAME -->`.
    fn snippet(tutorial: &str, name: &str) -> String {
        let marker = format!("<!-- tutorial:{name} -->");
        let after = tutorial
            .split_once(&marker)
            .map(|(_, rest)| rest)
            .unwrap_or_default();
        let body = after
            .split_once("```reckon\n")
            .map(|(_, rest)| rest)
            .unwrap_or_default();
        body.split_once("```")
            .map(|(code, _)| code.to_string())
            .unwrap_or_default()
    }

    fn read_tutorial() -> String {
        std::fs::read_to_string(repository_root().join("docs/tutorial.md"))
            .expect("docs/tutorial.md")
    }

    fn starter_with(snippet: &str) -> String {
        let starter = crate::scaffold::scaffold("verge_mower")
            .expect("valid name")
            .spec_text;
        format!(
            "{}\n{snippet}",
            starter.replace("const track = 0.32 m", "const track = 0.48 m")
        )
    }

    #[test]
    fn the_unit_error_is_reported_as_the_tutorial_shows() {
        let tutorial = read_tutorial();
        let output = crate::check::check_source(&starter_with(&snippet(&tutorial, "broken")));
        let errors: Vec<_> = output.diagnostics.iter().filter(|d| d.is_error()).collect();
        assert_eq!(errors.len(), 1, "{errors:?}");
        let shown = format!("error[{}]: {}", errors[0].code.id, errors[0].message);
        assert!(
            tutorial.contains(&shown),
            "the tutorial should show `{shown}`"
        );
    }

    #[test]
    fn the_fixed_spec_checks_clean_and_is_formatted() {
        let tutorial = read_tutorial();
        let fixed = snippet(&tutorial, "fixed");
        let spec = starter_with(&fixed);
        let output = crate::check::check_source(&spec);
        assert!(output.diagnostics.is_empty(), "{:?}", output.diagnostics);
        assert_eq!(output.model.map(|m| m.sensors.len()), Some(3));
        assert_eq!(crate::format::format_source(&spec).ok(), Some(spec));
    }
}
