//! Rust spellings of everything the generated module names: identifiers derived from
//! spec names (keywords escaped), type names, and exact numeric literals.

use proc_macro2::{Ident, Literal, Span, TokenStream};
use quote::quote;

use crate::options::Scalar;

/// An identifier for a spec name, escaped as a raw identifier when it is a keyword.
pub(crate) fn ident(name: &str) -> Ident {
    if syn::parse_str::<Ident>(name).is_ok() {
        return Ident::new(name, Span::call_site());
    }
    // `self`, `super`, `crate`, `Self` and `_` cannot be raw identifiers either.
    match name {
        "self" | "super" | "crate" | "Self" | "_" => {
            Ident::new(&format!("{name}_"), Span::call_site())
        }
        _ => Ident::new_raw(name, Span::call_site()),
    }
}

/// An identifier built from parts joined by `_` (e.g. `gnss_east_sigma`).
pub(crate) fn joined(parts: &[&str]) -> Ident {
    ident(&parts.join("_"))
}

/// `wheel_odometer` -> `WheelOdometer`, the spelling of type names.
pub(crate) fn camel(name: &str) -> String {
    name.split('_')
        .filter(|part| !part.is_empty())
        .map(|part| {
            let mut chars = part.chars();
            chars.next().map_or_else(String::new, |first| {
                first.to_ascii_uppercase().to_string() + chars.as_str()
            })
        })
        .collect()
}

/// A type identifier: `camel(name) + suffix`.
pub(crate) fn type_ident(name: &str, suffix: &str) -> Ident {
    Ident::new(&format!("{}{suffix}", camel(name)), Span::call_site())
}

/// How tightly an emitted expression binds, for parenthesising operands exactly where
/// Rust's precedence would otherwise regroup them.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) enum Prec {
    /// `a + b`, `a - b`
    Sum,
    /// `a * b`, `a / b`
    Product,
    /// `-a`
    Prefix,
    /// names, literals, calls
    Atom,
}

/// An emitted expression and its precedence.
#[derive(Debug, Clone)]
pub(crate) struct Code {
    pub tokens: TokenStream,
    pub prec: Prec,
}

impl Code {
    pub(crate) fn atom(tokens: TokenStream) -> Code {
        Code {
            tokens,
            prec: Prec::Atom,
        }
    }

    /// The tokens, parenthesised when they bind less tightly than `needed`.
    pub(crate) fn at(&self, needed: Prec) -> TokenStream {
        let tokens = &self.tokens;
        if self.prec < needed {
            quote!((#tokens))
        } else {
            tokens.clone()
        }
    }

    /// `self op rhs` for a left-associative operator of precedence `prec`: the left
    /// operand may share the precedence, the right one must bind tighter (floating-point
    /// sums are not associative, so the grouping is kept exactly).
    pub(crate) fn binary(&self, op: TokenStream, rhs: &Code, prec: Prec) -> Code {
        let left = self.at(prec);
        let right = if rhs.prec > prec {
            rhs.tokens.clone()
        } else {
            let tokens = &rhs.tokens;
            quote!((#tokens))
        };
        Code {
            tokens: quote!(#left #op #right),
            prec,
        }
    }

    /// `-self`; a negation of a negation is parenthesised (`-(-x)`).
    pub(crate) fn neg(&self) -> Code {
        let inner = if self.prec == Prec::Atom {
            self.tokens.clone()
        } else {
            let tokens = &self.tokens;
            quote!((#tokens))
        };
        Code {
            tokens: quote!(-#inner),
            prec: Prec::Prefix,
        }
    }
}

/// The scalar type's tokens (`f32` or `f64`).
pub(crate) fn scalar_type(scalar: Scalar) -> TokenStream {
    match scalar {
        Scalar::F32 => quote!(f32),
        Scalar::F64 => quote!(f64),
    }
}

/// Named constants emitted by name: a literal equal to one of them would trip the
/// "approximate constant" lint of the including crate, and the name reads better.
const NAMED_CONSTANTS: [(&str, f64); 11] = [
    ("PI", std::f64::consts::PI),
    ("TAU", std::f64::consts::TAU),
    ("FRAC_PI_2", std::f64::consts::FRAC_PI_2),
    ("FRAC_PI_3", std::f64::consts::FRAC_PI_3),
    ("FRAC_PI_4", std::f64::consts::FRAC_PI_4),
    ("FRAC_PI_6", std::f64::consts::FRAC_PI_6),
    ("FRAC_PI_8", std::f64::consts::FRAC_PI_8),
    ("FRAC_1_PI", std::f64::consts::FRAC_1_PI),
    ("E", std::f64::consts::E),
    ("SQRT_2", std::f64::consts::SQRT_2),
    ("LN_2", std::f64::consts::LN_2),
];

/// The exact literal of an SI value in the scalar type: the shortest decimal that
/// reads back as the same `f64`, or for `f32` as the nearest `f32` of the value.
pub(crate) fn number(value: f64, scalar: Scalar) -> Code {
    let ty = scalar_type(scalar);
    if !value.is_finite() {
        let name = if value.is_nan() {
            "NAN"
        } else if value > 0.0 {
            "INFINITY"
        } else {
            "NEG_INFINITY"
        };
        let name = Ident::new(name, Span::call_site());
        return Code::atom(quote!(#ty::#name));
    }
    let magnitude = value.abs();
    let named = NAMED_CONSTANTS.iter().find(|(_, c)| match scalar {
        Scalar::F64 => *c == magnitude,
        Scalar::F32 => (*c as f32) == (magnitude as f32),
    });
    let positive = match named {
        Some((name, _)) => {
            let name = Ident::new(name, Span::call_site());
            Code::atom(quote!(core::#ty::consts::#name))
        }
        None => {
            let text = match scalar {
                Scalar::F64 => format!("{magnitude:?}_f64"),
                Scalar::F32 => format!("{:?}_f32", magnitude as f32),
            };
            let literal: Literal = text
                .parse()
                .unwrap_or_else(|_| Literal::f64_suffixed(magnitude));
            Code::atom(quote!(#literal))
        }
    };
    if value.is_sign_negative() {
        positive.neg()
    } else {
        positive
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn text(code: &Code) -> String {
        code.tokens.to_string().replace(' ', "")
    }

    #[test]
    fn literals_round_trip_exactly() {
        for value in [0.1, 1.0, 1e-300, 123456.789, 0.017453292519943295, 2.5e21] {
            let code = number(value, Scalar::F64);
            let written = text(&code);
            let digits = written.trim_end_matches("_f64");
            assert_eq!(digits.parse::<f64>().ok(), Some(value), "{written}");
        }
        let f32_text = text(&number(0.1, Scalar::F32));
        assert_eq!(f32_text, "0.1_f32");
    }

    #[test]
    fn named_constants_and_signs() {
        assert_eq!(
            text(&number(-std::f64::consts::PI, Scalar::F64)),
            "-core::f64::consts::PI"
        );
        assert_eq!(text(&number(-0.5, Scalar::F64)), "-0.5_f64");
        assert_eq!(text(&number(f64::NAN, Scalar::F32)), "f32::NAN");
    }

    #[test]
    fn keywords_are_escaped() {
        assert_eq!(ident("type").to_string(), "r#type");
        assert_eq!(ident("self").to_string(), "self_");
        assert_eq!(ident("east").to_string(), "east");
        assert_eq!(camel("wheel_odometer"), "WheelOdometer");
    }

    #[test]
    fn grouping_is_kept_exactly() {
        let a = Code::atom(quote!(a));
        let b = Code::atom(quote!(b));
        let c = Code::atom(quote!(c));
        let sum = a.binary(quote!(+), &b, Prec::Sum);
        assert_eq!(text(&sum.binary(quote!(+), &c, Prec::Sum)), "a+b+c");
        assert_eq!(text(&c.binary(quote!(+), &sum, Prec::Sum)), "c+(a+b)");
        assert_eq!(text(&sum.binary(quote!(*), &c, Prec::Product)), "(a+b)*c");
        assert_eq!(text(&sum.neg().neg()), "-(-(a+b))");
    }
}
