//! The catalogue of unit symbols a spec may use, the SI prefixes, and symbol lookup.
//!
//! One table row per unit, with exact factors, so reference documentation can be
//! generated from the same data the checker uses.
//!
//! How a symbol is read (these rules make every accepted symbol mean one thing; a test
//! enumerates all prefixed forms and proves they collide neither with each other nor
//! with a catalogue symbol):
//! 1. A symbol listed in the table is that unit: `min` is the minute (not milli-inch),
//!    `mi` the mile, `nmi` the nautical mile, `cd` the candela, `G` the gauss, `Pa` the
//!    pascal, `d` the day, `h` the hour, `t` the tonne, `ft` the foot.
//! 2. Otherwise one SI prefix followed by a *prefixable* table symbol: `ms`, `km`,
//!    `µs`/`μs`/`us`, `hPa`, `mbar`, `dam` (deca-metre), `kg` (kilo + gram, the only
//!    way to write the kilogram). Only one prefix: `mkm` is unknown.
//! 3. Only SI units (and the litre and the bar, whose prefixed forms are customary)
//!    take prefixes; minute, hour, degree, trade units and the gauss do not.
//! 4. Affine and logarithmic scales (degree Celsius, decibel) are not units of this
//!    algebra and are left out, as are units a vehicle engineer does not meet.

use std::fmt;
use std::sync::OnceLock;

use super::dimension::{Base, Dimension};
use super::rational::Rational;
use super::scale::Scale;
use super::unit::Unit;

/// Where a unit comes from, for documentation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum UnitKind {
    /// An SI base unit (the gram stands for the kilogram's row).
    Base,
    /// An SI coherent derived unit with a special name.
    Derived,
    /// A non-SI unit accepted for use with SI.
    Accepted,
    /// A unit of trade or engineering practice, defined exactly in SI.
    Trade,
}

/// One unit of the catalogue.
#[derive(Debug)]
pub struct CatalogueEntry {
    /// Accepted spellings; the first is canonical.
    pub symbols: &'static [&'static str],
    /// English name.
    pub name: &'static str,
    /// Definition as a reader would write it.
    pub definition: &'static str,
    /// Exact factor to coherent SI: a decimal or a quotient of two decimals.
    pub factor: &'static str,
    /// Power of pi multiplying `factor`.
    pub pi_power: i64,
    /// Dimension as `(axis, exponent)` pairs.
    pub dimension: &'static [(Base, i64)],
    /// Provenance class.
    pub kind: UnitKind,
    /// Whether SI prefixes may be attached.
    pub prefixable: bool,
}

/// An SI prefix.
#[derive(Debug)]
pub struct Prefix {
    /// Accepted spellings; the first is canonical.
    pub symbols: &'static [&'static str],
    /// English name.
    pub name: &'static str,
    /// The prefix multiplies by ten to this power.
    pub power_of_ten: i64,
}

use Base::{
    Amount as N, Angle as ANGLE, Current as I, Cycle as CYCLE, Length as L, Luminosity as J,
};
use Base::{Mass as M, Temperature as THETA, Time as T};

const fn entry(
    symbols: &'static [&'static str],
    name: &'static str,
    definition: &'static str,
    factor: &'static str,
    dimension: &'static [(Base, i64)],
    kind: UnitKind,
    prefixable: bool,
) -> CatalogueEntry {
    CatalogueEntry {
        symbols,
        name,
        definition,
        factor,
        pi_power: 0,
        dimension,
        kind,
        prefixable,
    }
}

const fn angular(
    symbols: &'static [&'static str],
    name: &'static str,
    definition: &'static str,
    factor: &'static str,
    dimension: &'static [(Base, i64)],
    kind: UnitKind,
) -> CatalogueEntry {
    CatalogueEntry {
        pi_power: 1,
        ..entry(symbols, name, definition, factor, dimension, kind, false)
    }
}

use UnitKind::{Accepted, Base as SiBase, Derived, Trade};

const FORCE: &[(Base, i64)] = &[(L, 1), (M, 1), (T, -2)];
const PRESSURE: &[(Base, i64)] = &[(L, -1), (M, 1), (T, -2)];
const ENERGY: &[(Base, i64)] = &[(L, 2), (M, 1), (T, -2)];
const POWER: &[(Base, i64)] = &[(L, 2), (M, 1), (T, -3)];
const MAGNETIC_FLUX_DENSITY: &[(Base, i64)] = &[(M, 1), (T, -2), (I, -1)];
const RESISTANCE: &[(Base, i64)] = &[(L, 2), (M, 1), (T, -3), (I, -2)];
const SPEED: &[(Base, i64)] = &[(L, 1), (T, -1)];
const ABSORBED_DOSE: &[(Base, i64)] = &[(L, 2), (T, -2)];

// One row per line reads as the table it is.
#[rustfmt::skip]
static CATALOGUE: &[CatalogueEntry] = &[
    entry(&["m"], "metre", "SI base unit of length", "1", &[(L, 1)], SiBase, true),
    entry(&["g"], "gram", "kg/1000 (kg: SI base unit of mass)", "0.001", &[(M, 1)], SiBase, true),
    entry(&["s"], "second", "SI base unit of time", "1", &[(T, 1)], SiBase, true),
    entry(&["A"], "ampere", "SI base unit of electric current", "1", &[(I, 1)], SiBase, true),
    entry(&["K"], "kelvin", "SI base unit of temperature", "1", &[(THETA, 1)], SiBase, true),
    entry(&["mol"], "mole", "SI base unit of amount of substance", "1", &[(N, 1)], SiBase, true),
    entry(&["cd"], "candela", "SI base unit of luminous intensity", "1", &[(J, 1)], SiBase, true),
    entry(&["rad"], "radian", "m/m (plane angle)", "1", &[(ANGLE, 1)], Derived, true),
    entry(&["sr"], "steradian", "m^2/m^2 (solid angle)", "1", &[(ANGLE, 2)], Derived, true),
    entry(&["Hz"], "hertz", "cycle/s", "1", &[(CYCLE, 1), (T, -1)], Derived, true),
    entry(&["N"], "newton", "kg m s^-2", "1", FORCE, Derived, true),
    entry(&["Pa"], "pascal", "N/m^2", "1", PRESSURE, Derived, true),
    entry(&["J"], "joule", "N m", "1", ENERGY, Derived, true),
    entry(&["W"], "watt", "J/s", "1", POWER, Derived, true),
    entry(&["C"], "coulomb", "A s", "1", &[(T, 1), (I, 1)], Derived, true),
    entry(&["V"], "volt", "W/A", "1", &[(L, 2), (M, 1), (T, -3), (I, -1)], Derived, true),
    entry(&["F"], "farad", "C/V", "1", &[(L, -2), (M, -1), (T, 4), (I, 2)], Derived, true),
    entry(&["Ω", "ohm"], "ohm", "V/A", "1", RESISTANCE, Derived, true),
    entry(&["S"], "siemens", "A/V", "1", &[(L, -2), (M, -1), (T, 3), (I, 2)], Derived, true),
    entry(&["Wb"], "weber", "V s", "1", &[(L, 2), (M, 1), (T, -2), (I, -1)], Derived, true),
    entry(&["T"], "tesla", "Wb/m^2", "1", MAGNETIC_FLUX_DENSITY, Derived, true),
    entry(&["H"], "henry", "Wb/A", "1", &[(L, 2), (M, 1), (T, -2), (I, -2)], Derived, true),
    entry(&["lm"], "lumen", "cd sr", "1", &[(J, 1), (ANGLE, 2)], Derived, true),
    entry(&["lx"], "lux", "lm/m^2", "1", &[(J, 1), (ANGLE, 2), (L, -2)], Derived, true),
    entry(&["Bq"], "becquerel", "decays/s", "1", &[(T, -1)], Derived, true),
    entry(&["Gy"], "gray", "J/kg", "1", ABSORBED_DOSE, Derived, true),
    entry(&["Sv"], "sievert", "J/kg", "1", ABSORBED_DOSE, Derived, true),
    entry(&["kat"], "katal", "mol/s", "1", &[(N, 1), (T, -1)], Derived, true),
    entry(&["min"], "minute", "60 s", "60", &[(T, 1)], Accepted, false),
    entry(&["h"], "hour", "60 min", "3600", &[(T, 1)], Accepted, false),
    entry(&["d"], "day", "24 h", "86400", &[(T, 1)], Accepted, false),
    angular(&["deg", "°"], "degree", "pi/180 rad", "1/180", &[(ANGLE, 1)], Accepted),
    angular(&["arcmin"], "arcminute", "deg/60", "1/10800", &[(ANGLE, 1)], Accepted),
    angular(&["arcsec"], "arcsecond", "arcmin/60", "1/648000", &[(ANGLE, 1)], Accepted),
    entry(&["L", "l"], "litre", "dm^3", "0.001", &[(L, 3)], Accepted, true),
    entry(&["t"], "tonne", "1000 kg", "1000", &[(M, 1)], Accepted, false),
    entry(&["cycle"], "cycle", "one period of a periodic process", "1", &[(CYCLE, 1)], Trade, false),
    angular(&["rev"], "revolution", "2 pi rad", "2", &[(ANGLE, 1)], Trade),
    angular(&["rpm"], "revolution per minute", "rev/min", "2/60", &[(ANGLE, 1), (T, -1)], Trade),
    entry(&["in"], "inch", "0.0254 m", "0.0254", &[(L, 1)], Trade, false),
    entry(&["ft"], "foot", "12 in", "0.3048", &[(L, 1)], Trade, false),
    entry(&["yd"], "yard", "3 ft", "0.9144", &[(L, 1)], Trade, false),
    entry(&["mi"], "mile", "5280 ft", "1609.344", &[(L, 1)], Trade, false),
    entry(&["nmi"], "nautical mile", "1852 m", "1852", &[(L, 1)], Trade, false),
    entry(&["kn"], "knot", "nmi/h", "1852/3600", SPEED, Trade, false),
    entry(&["mph"], "mile per hour", "mi/h", "1609.344/3600", SPEED, Trade, false),
    entry(&["gn"], "standard gravity", "9.80665 m/s^2", "9.80665", &[(L, 1), (T, -2)], Trade, false),
    entry(&["lb"], "pound (avoirdupois)", "0.45359237 kg", "0.45359237", &[(M, 1)], Trade, false),
    entry(&["lbf"], "pound-force", "lb gn", "4.4482216152605", FORCE, Trade, false),
    entry(&["psi"], "pound-force per square inch", "lbf/in^2", "4.4482216152605/0.00064516", PRESSURE, Trade, false),
    entry(&["bar"], "bar", "100 kPa", "100000", PRESSURE, Trade, true),
    entry(&["G"], "gauss", "1e-4 T", "0.0001", MAGNETIC_FLUX_DENSITY, Trade, false),
];

#[rustfmt::skip]
static PREFIXES: &[Prefix] = &[
    Prefix { symbols: &["q"], name: "quecto", power_of_ten: -30 },
    Prefix { symbols: &["r"], name: "ronto", power_of_ten: -27 },
    Prefix { symbols: &["y"], name: "yocto", power_of_ten: -24 },
    Prefix { symbols: &["z"], name: "zepto", power_of_ten: -21 },
    Prefix { symbols: &["a"], name: "atto", power_of_ten: -18 },
    Prefix { symbols: &["f"], name: "femto", power_of_ten: -15 },
    Prefix { symbols: &["p"], name: "pico", power_of_ten: -12 },
    Prefix { symbols: &["n"], name: "nano", power_of_ten: -9 },
    // U+00B5 MICRO SIGN, U+03BC GREEK SMALL LETTER MU, and ASCII `u`.
    Prefix { symbols: &["µ", "μ", "u"], name: "micro", power_of_ten: -6 },
    Prefix { symbols: &["m"], name: "milli", power_of_ten: -3 },
    Prefix { symbols: &["c"], name: "centi", power_of_ten: -2 },
    Prefix { symbols: &["d"], name: "deci", power_of_ten: -1 },
    Prefix { symbols: &["da"], name: "deca", power_of_ten: 1 },
    Prefix { symbols: &["h"], name: "hecto", power_of_ten: 2 },
    Prefix { symbols: &["k"], name: "kilo", power_of_ten: 3 },
    Prefix { symbols: &["M"], name: "mega", power_of_ten: 6 },
    Prefix { symbols: &["G"], name: "giga", power_of_ten: 9 },
    Prefix { symbols: &["T"], name: "tera", power_of_ten: 12 },
    Prefix { symbols: &["P"], name: "peta", power_of_ten: 15 },
    Prefix { symbols: &["E"], name: "exa", power_of_ten: 18 },
    Prefix { symbols: &["Z"], name: "zetta", power_of_ten: 21 },
    Prefix { symbols: &["Y"], name: "yotta", power_of_ten: 24 },
    Prefix { symbols: &["R"], name: "ronna", power_of_ten: 27 },
    Prefix { symbols: &["Q"], name: "quetta", power_of_ten: 30 },
];

/// Every unit of the catalogue, in table order.
pub fn catalogue() -> impl Iterator<Item = &'static CatalogueEntry> {
    CATALOGUE.iter()
}

/// Every SI prefix, smallest first.
pub fn prefixes() -> impl Iterator<Item = &'static Prefix> {
    PREFIXES.iter()
}

impl CatalogueEntry {
    /// The unit this row defines; `None` only if the row's factor text is malformed,
    /// which the catalogue tests rule out for every row.
    pub fn unit(&self) -> Option<Unit> {
        let dimension =
            self.dimension
                .iter()
                .try_fold(Dimension::NONE, |acc, (base, exponent)| {
                    acc.mul(&Dimension::base(*base).pow(Rational::integer(*exponent))?)
                })?;
        let scale = Scale::from_exact_text(self.factor)?
            .mul(&Scale::pi_power(Rational::integer(self.pi_power)))?;
        Some(Unit::new(dimension, scale))
    }
}

impl Prefix {
    /// The prefix's exact factor.
    pub fn scale(&self) -> Option<Scale> {
        Scale::power_of_ten(self.power_of_ten)
    }
}

/// A symbol that names no unit, with up to three close spellings that do.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct UnknownUnit {
    /// The symbol as written.
    pub symbol: String,
    /// Close valid symbols, closest first (at most [`MAX_SUGGESTIONS`]).
    pub suggestions: Vec<String>,
}

/// How many "did you mean" spellings [`UnknownUnit`] carries at most.
pub const MAX_SUGGESTIONS: usize = 3;

impl fmt::Display for UnknownUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "unknown unit `{}`", self.symbol)?;
        if !self.suggestions.is_empty() {
            let quoted: Vec<String> = self.suggestions.iter().map(|s| format!("`{s}`")).collect();
            write!(f, "; did you mean {}?", quoted.join(" or "))?;
        }
        Ok(())
    }
}

impl std::error::Error for UnknownUnit {}

/// The unit named by one symbol (no operators): a catalogue symbol, or one SI prefix
/// and a prefixable catalogue symbol. See the module header for the reading rules.
pub fn lookup(symbol: &str) -> Result<Unit, UnknownUnit> {
    reading(symbol).map(|r| r.unit).ok_or_else(|| UnknownUnit {
        symbol: symbol.to_string(),
        suggestions: suggestions(symbol),
    })
}

/// How a symbol was read: which prefix (if any) and which catalogue row, so that a
/// diagnostic or a generated document can say "`ms` is read as milli + second".
#[derive(Debug, Clone, Copy)]
pub struct Reading {
    /// The prefix, when the symbol carries one.
    pub prefix: Option<&'static Prefix>,
    /// The catalogue row.
    pub entry: &'static CatalogueEntry,
    /// The resulting unit (prefix factor included).
    pub unit: Unit,
}

/// The reading of one symbol, or `None` when it names no unit.
pub fn reading(symbol: &str) -> Option<Reading> {
    if let Some((entry, unit)) = find_row(symbol) {
        return Some(Reading {
            prefix: None,
            entry,
            unit,
        });
    }
    PREFIXES.iter().find_map(|prefix| {
        prefix.symbols.iter().find_map(|spelling| {
            let (entry, unit) = find_row(symbol.strip_prefix(spelling)?)?;
            if !entry.prefixable {
                return None;
            }
            let scale = unit.scale.mul(&prefix.scale()?)?;
            Some(Reading {
                prefix: Some(prefix),
                entry,
                unit: Unit::new(unit.dimension, scale),
            })
        })
    })
}

/// One unit per catalogue row, in table order, built once.
fn row_units() -> &'static [Option<Unit>] {
    static UNITS: OnceLock<Vec<Option<Unit>>> = OnceLock::new();
    UNITS.get_or_init(|| CATALOGUE.iter().map(CatalogueEntry::unit).collect())
}

fn find_row(symbol: &str) -> Option<(&'static CatalogueEntry, Unit)> {
    CATALOGUE
        .iter()
        .zip(row_units())
        .find(|(entry, _)| entry.symbols.contains(&symbol))
        .and_then(|(entry, unit)| Some((entry, (*unit)?)))
}

/// Every accepted spelling: catalogue symbols, then prefixed forms.
fn all_spellings() -> impl Iterator<Item = (String, bool)> {
    let plain = CATALOGUE
        .iter()
        .flat_map(|entry| entry.symbols.iter().map(|s| (s.to_string(), false)));
    let prefixed = PREFIXES.iter().flat_map(|prefix| {
        prefix.symbols.iter().flat_map(|p| {
            CATALOGUE
                .iter()
                .filter(|entry| entry.prefixable)
                .flat_map(move |entry| entry.symbols.iter().map(move |s| (format!("{p}{s}"), true)))
        })
    });
    plain.chain(prefixed)
}

/// Longest symbol worth comparing against the catalogue; anything longer is noise.
const MAX_SUGGESTIBLE_CHARS: usize = 24;

fn suggestions(symbol: &str) -> Vec<String> {
    let length = symbol.chars().count();
    if length == 0 || length > MAX_SUGGESTIBLE_CHARS {
        return Vec::new();
    }
    // A one-letter slip is worth suggesting in short symbols, two in longer ones.
    let tolerance = if length <= 3 { 1 } else { 2 };
    let mut ranked: Vec<(usize, bool, String)> = all_spellings()
        .filter_map(|(candidate, prefixed)| {
            // Case slips (`KM`, `hz`) rank ahead of any spelling slip.
            let rank = if candidate.to_lowercase() == symbol.to_lowercase() {
                0
            } else {
                let distance = edit_distance(symbol, &candidate);
                if distance > tolerance {
                    return None;
                }
                distance
            };
            Some((rank, prefixed, candidate))
        })
        .collect();
    ranked.sort();
    ranked.dedup_by(|a, b| a.2 == b.2);
    ranked
        .into_iter()
        .take(MAX_SUGGESTIONS)
        .map(|(_, _, s)| s)
        .collect()
}

/// Levenshtein distance over characters.
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut previous: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut current = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            let substitution = previous[j] + usize::from(ca != *cb);
            current[j + 1] = substitution.min(previous[j + 1] + 1).min(current[j] + 1);
        }
        previous = current;
    }
    previous[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn unit(symbol: &str) -> Unit {
        lookup(symbol).unwrap_or_else(|e| panic!("{e}"))
    }

    fn exact(text: &str) -> Scale {
        Scale::from_exact_text(text).unwrap_or_else(|| panic!("bad factor {text}"))
    }

    /// The reference value of `text` (a decimal or a quotient of decimals) as the
    /// nearest-f64 arithmetic any reader would do, independent of [`Scale`].
    fn reference_f64(text: &str) -> f64 {
        let parse = |t: &str| {
            t.parse::<f64>()
                .unwrap_or_else(|_| panic!("bad reference {t}"))
        };
        match text.split_once('/') {
            Some((num, den)) => parse(num) / parse(den),
            None => parse(text),
        }
    }

    /// Checks the exact factor against `text` (times pi when `pi`), the `f64` value
    /// against plain floating-point arithmetic, and the SI dimension.
    fn assert_unit(symbol: &str, text: &str, pi: bool, dimension: &str) {
        let pi_power = Scale::pi_power(Rational::integer(i64::from(pi)));
        let factor = exact(text).mul(&pi_power).expect("factor");
        let mut expected = reference_f64(text);
        if pi {
            expected *= std::f64::consts::PI;
        }
        assert_scale(symbol, factor, expected, dimension);
    }

    fn assert_scale(symbol: &str, factor: Scale, expected: f64, dimension: &str) {
        let found = unit(symbol);
        assert_eq!(found.scale, factor, "{symbol}: {} != {factor}", found.scale);
        assert_eq!(found.dimension.to_string(), dimension, "{symbol}");
        // Within about one ulp: both sides may round once or twice.
        assert!(
            (found.to_si() - expected).abs() <= expected * f64::EPSILON,
            "{symbol}: {} vs {expected}",
            found.to_si()
        );
    }

    #[test]
    fn decimal_factors_convert_to_the_nearest_f64() {
        // A decimal factor is one correctly rounded integer division, so it must equal
        // the compiler's own reading of the decimal literal bit for bit.
        let literals = [
            ("ft", 0.3048),
            ("in", 0.0254),
            ("yd", 0.9144),
            ("mi", 1609.344),
            ("mph", 0.44704),
            ("lb", 0.45359237),
            ("lbf", 4.4482216152605),
            ("gn", 9.80665),
            ("G", 1e-4),
            ("mbar", 100.0),
            ("µm", 1e-6),
            ("ng", 1e-12),
        ];
        for (symbol, literal) in literals {
            assert_eq!(unit(symbol).to_si(), literal, "{symbol}");
        }
        assert_eq!(unit("deg").to_si(), std::f64::consts::PI / 180.0);
    }

    #[test]
    fn every_row_builds_and_every_symbol_resolves_to_its_row() {
        for entry in catalogue() {
            let row = entry.unit().unwrap_or_else(|| panic!("row {}", entry.name));
            for symbol in entry.symbols {
                assert_eq!(unit(symbol), row, "{symbol}");
            }
        }
    }

    #[test]
    fn trade_and_accepted_factors_match_nist_sp811() {
        // NIST SP 811 (2008) Appendix B.8, exact entries (printed bold there); yd = 3 ft,
        // gauss and bar from the same table (from memory), G = 1e-4 T per the design notes.
        assert_unit("ft", "0.3048", false, "m");
        assert_unit("in", "0.0254", false, "m");
        assert_unit("yd", "0.9144", false, "m");
        assert_unit("mi", "1609.344", false, "m");
        assert_unit("nmi", "1852", false, "m");
        assert_unit("mph", "0.44704", false, "m s^-1");
        assert_unit("lbf", "4.4482216152605", false, "m kg s^-2");
        assert_unit("lb", "0.45359237", false, "kg");
        assert_unit("gn", "9.80665", false, "m s^-2");
        assert_unit("G", "0.0001", false, "kg s^-2 A^-1");
        assert_unit("bar", "100000", false, "m^-1 kg s^-2");
        // NIST SP 811 B.8: millibar = 1.0 E+02 Pa (from memory); hPa by the SI prefix rule.
        assert_unit("mbar", "100", false, "m^-1 kg s^-2");
        assert_unit("hPa", "100", false, "m^-1 kg s^-2");
        // NIST SP 811 B.8 prints the knot as 5.144444 E-01 (rounded); exact is 1852/3600
        // (nmi/h, both exact in the same table).
        assert_unit("kn", "1852/3600", false, "m s^-1");
        // NIST SP 811 B.8 prints psi as 6.894757 E+03 Pa (rounded, from memory); exact is
        // lbf/in^2 from the exact lbf and in entries.
        assert_unit("psi", "4.4482216152605/0.00064516", false, "m^-1 kg s^-2");
        assert!((unit("psi").to_si() / 6.894757e3 - 1.0).abs() < 1e-7);
        // NIST SP 811 B.8: revolution per minute = 1.047198 E-01 rad/s (rounded, from memory).
        assert_unit("rpm", "2/60", true, "s^-1 rad");
        assert!((unit("rpm").to_si() / 1.047198e-1 - 1.0).abs() < 1e-6);
        // Revolution = 2 pi rad: common practice, no source.
        assert_unit("rev", "2", true, "rad");
    }

    #[test]
    fn non_si_accepted_units_match_si_brochure_table_8() {
        // BIPM SI Brochure 9th ed., Table 8.
        assert_unit("min", "60", false, "s");
        assert_unit("h", "3600", false, "s");
        assert_unit("d", "86400", false, "s");
        assert_unit("deg", "1/180", true, "rad");
        assert_unit("°", "1/180", true, "rad");
        assert_unit("arcmin", "1/10800", true, "rad");
        assert_unit("arcsec", "1/648000", true, "rad");
        assert_unit("L", "0.001", false, "m^3");
        assert_unit("t", "1000", false, "kg");
    }

    #[test]
    fn derived_units_match_si_brochure_table_4() {
        // BIPM SI Brochure 9th ed., Table 4, "expressed in terms of SI base units".
        // Hz keeps the project's cycle axis (see dimension.rs); rad and sr the angle axis.
        let coherent = [
            ("rad", "rad"),
            ("sr", "rad^2"),
            ("Hz", "s^-1 cycle"),
            ("N", "m kg s^-2"),
            ("Pa", "m^-1 kg s^-2"),
            ("J", "m^2 kg s^-2"),
            ("W", "m^2 kg s^-3"),
            ("C", "s A"),
            ("V", "m^2 kg s^-3 A^-1"),
            ("F", "m^-2 kg^-1 s^4 A^2"),
            ("Ω", "m^2 kg s^-3 A^-2"),
            ("ohm", "m^2 kg s^-3 A^-2"),
            ("S", "m^-2 kg^-1 s^3 A^2"),
            ("Wb", "m^2 kg s^-2 A^-1"),
            ("T", "kg s^-2 A^-1"),
            ("H", "m^2 kg s^-2 A^-2"),
            ("lm", "cd rad^2"),
            ("lx", "m^-2 cd rad^2"),
            ("Bq", "s^-1"),
            ("Gy", "m^2 s^-2"),
            ("Sv", "m^2 s^-2"),
            ("kat", "s^-1 mol"),
            ("kg", "kg"),
        ];
        for (symbol, dimension) in coherent {
            assert_unit(symbol, "1", false, dimension);
        }
    }

    #[test]
    fn every_prefix_matches_si_brochure_table_7() {
        // BIPM SI Brochure 9th ed., Table 7 (2022 CGPM added ronna, quetta, ronto, quecto).
        let table_7 = [
            ("q", -30),
            ("r", -27),
            ("y", -24),
            ("z", -21),
            ("a", -18),
            ("f", -15),
            ("p", -12),
            ("n", -9),
            ("µ", -6),
            ("m", -3),
            ("c", -2),
            ("d", -1),
            ("da", 1),
            ("h", 2),
            ("k", 3),
            ("M", 6),
            ("G", 9),
            ("T", 12),
            ("P", 15),
            ("E", 18),
            ("Z", 21),
            ("Y", 24),
            ("R", 27),
            ("Q", 30),
        ];
        assert_eq!(prefixes().count(), table_7.len());
        for (prefix, power) in table_7 {
            let expected = exact("10").pow(Rational::integer(power)).expect("10^k");
            let literal = format!("1e{power}").parse::<f64>().expect("literal");
            assert_scale(&format!("{prefix}m"), expected, literal, "m");
        }
        // Both code points of micro and the ASCII stand-in.
        assert_eq!(unit("\u{00B5}s"), unit("\u{03BC}s"));
        assert_eq!(unit("us"), unit("µs"));
    }

    #[test]
    fn ambiguous_looking_symbols_read_as_documented() {
        assert_eq!(unit("min"), Unit::new(unit("s").dimension, exact("60")));
        assert_eq!(unit("ms").scale, exact("0.001"));
        assert_eq!(unit("ms").dimension, unit("s").dimension);
        assert_eq!(unit("dam").scale, exact("10"));
        assert_eq!(unit("kg").scale, Scale::ONE);
        assert_eq!(unit("cd").dimension, Dimension::base(Base::Luminosity));
        assert_eq!(unit("Gs").scale, exact("1000000000"));
        assert_eq!(unit("G").scale, exact("0.0001"));
        // Not prefixable, or a double prefix.
        for symbol in ["kmin", "mdeg", "kft", "mkm", "kkg", "Mh", "mG", "mrpm", ""] {
            assert!(lookup(symbol).is_err(), "{symbol}");
        }
    }

    #[test]
    fn readings_name_prefix_and_row() {
        let millisecond = reading("ms").expect("ms");
        assert_eq!(millisecond.prefix.map(|p| p.name), Some("milli"));
        assert_eq!(millisecond.entry.name, "second");
        let minute = reading("min").expect("min");
        assert!(minute.prefix.is_none());
        assert_eq!(minute.entry.name, "minute");
        assert_eq!(reading("kohm").map(|r| r.unit), Some(unit("kΩ")));
        assert!(reading("mkm").is_none());
    }

    #[test]
    fn no_spelling_has_two_readings() {
        let mut seen = std::collections::HashMap::new();
        for (spelling, prefixed) in all_spellings() {
            if let Some(earlier) = seen.insert(spelling.clone(), prefixed) {
                panic!("`{spelling}` read two ways (prefixed: {earlier} and {prefixed})");
            }
        }
    }

    #[test]
    fn exactness_survives_the_algebra() {
        let deg = unit("deg");
        let squared = deg.pow(Rational::integer(2)).expect("deg^2");
        assert_eq!(squared.div(&deg), Some(deg));
        let hour = unit("h");
        let root = hour.sqrt().expect("sqrt(h)");
        assert_eq!(root.scale, exact("60"));
        assert_eq!(root.mul(&root), Some(hour));
        assert_eq!(unit("kn").mul(&hour), Some(unit("nmi")));
        assert_eq!(unit("mi").div(&hour), Some(unit("mph")));
        assert_eq!(unit("rev").div(&unit("min")), Some(unit("rpm")));
        assert_eq!(unit("lb").mul(&unit("gn")), Some(unit("lbf")));
        let square_inch = unit("in").pow(Rational::integer(2)).expect("in^2");
        assert_eq!(unit("lbf").div(&square_inch), Some(unit("psi")));
        let minute_root = unit("min").sqrt().expect("sqrt(min)");
        assert_eq!(minute_root.to_si(), 60f64.sqrt());
        assert_eq!(minute_root.scale.to_string(), "2·15^(1/2)");
    }

    #[test]
    fn hertz_counts_cycles_and_rpm_counts_angle() {
        let hz = unit("Hz").dimension;
        let rpm = unit("rpm").dimension;
        assert!(hz.compatible(&rpm));
        assert!(hz.angle_cycle_conflict(&rpm));
        assert_eq!(unit("cycle").div(&unit("s")), Some(unit("Hz")));
    }

    #[test]
    fn unknown_symbols_come_with_close_suggestions() {
        let error = lookup("hz").expect_err("case matters");
        assert_eq!(error.suggestions.first().map(String::as_str), Some("Hz"));
        let error = lookup("degg").expect_err("typo");
        assert_eq!(error.suggestions.first().map(String::as_str), Some("deg"));
        assert!(error.suggestions.len() <= MAX_SUGGESTIONS);
        assert_eq!(
            error.to_string(),
            format!(
                "unknown unit `degg`; did you mean `{}`?",
                error.suggestions.join("` or `")
            )
        );
        let error = lookup("KM").expect_err("case matters");
        assert_eq!(error.suggestions.first().map(String::as_str), Some("km"));
        let error = lookup("furlong").expect_err("not catalogued");
        assert!(error.suggestions.is_empty());
        assert_eq!(error.to_string(), "unknown unit `furlong`");
    }

    #[test]
    fn every_prefix_spelling_scales_its_unit_or_is_refused() {
        for prefix in prefixes() {
            for entry in catalogue() {
                for (prefix_symbol, symbol) in prefix
                    .symbols
                    .iter()
                    .flat_map(|p| entry.symbols.iter().map(move |s| (p, s)))
                {
                    let spelling = format!("{prefix_symbol}{symbol}");
                    let base = entry.unit().expect("row builds");
                    let found = lookup(&spelling);
                    if entry.prefixable {
                        let found = found.unwrap_or_else(|e| panic!("{e}"));
                        assert_eq!(found.dimension, base.dimension, "{spelling}");
                        let scaled = prefix.scale().and_then(|p| base.scale.mul(&p));
                        assert_eq!(Some(found.scale), scaled, "{spelling}");
                    } else if let Ok(found) = found {
                        // Only a catalogue symbol of its own (rule 1: `min`, `nmi`, `ft`).
                        let own_row = catalogue().find(|e| e.symbols.contains(&spelling.as_str()));
                        assert_eq!(
                            own_row.and_then(CatalogueEntry::unit),
                            Some(found),
                            "{spelling}"
                        );
                    }
                }
            }
        }
    }

    proptest! {
        #[test]
        fn garbage_never_panics(text in "\\PC{0,40}") {
            match lookup(&text) {
                Ok(found) => prop_assert!(found.to_si() > 0.0),
                Err(error) => prop_assert!(error.suggestions.len() <= MAX_SUGGESTIONS),
            }
        }

    }
}
