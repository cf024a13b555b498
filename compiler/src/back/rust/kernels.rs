//! The covariance kernels of the generated module: `F P F^T + Q`, `P H^T` and
//! `H (P H^T) + R` as straight-line code over the structurally nonzero entries only.
//!
//! The runtime's default kernels multiply dense matrices; these skip every product
//! with a structural zero, multiply by a constant entry of `F` or `H` as a literal
//! (and by an entry equal to one not at all), and use the symmetry of `P`, `Q`, `R`
//! and `S` to compute each symmetric result's upper triangle once.

use proc_macro2::{Ident, Span, TokenStream};
use quote::quote;

use super::names::{number, Code, Prec};
use crate::ir::{Arena, NodeMatrix};
use crate::options::Scalar;

/// What is known at build time about one matrix entry.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Entry {
    /// Identically zero.
    Zero,
    /// A constant.
    Constant(f64),
    /// Computed at run time.
    Variable,
}

/// The build-time structure of a matrix, row-major.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Pattern {
    pub rows: usize,
    pub cols: usize,
    pub entries: Vec<Entry>,
}

impl Pattern {
    /// The structure of a node matrix.
    pub(crate) fn of(matrix: &NodeMatrix, arena: &Arena) -> Pattern {
        let entries = matrix
            .entries()
            .iter()
            .map(|&id| match arena.constant_value(id) {
                Some(0.0) => Entry::Zero,
                Some(value) => Entry::Constant(value),
                None => Entry::Variable,
            })
            .collect();
        Pattern {
            rows: matrix.rows(),
            cols: matrix.cols(),
            entries,
        }
    }

    /// A matrix whose entries are all run-time values except where `nonzero` is false.
    pub(crate) fn variable_where(
        rows: usize,
        cols: usize,
        nonzero: impl Fn(usize, usize) -> bool,
    ) -> Pattern {
        let entries = (0..rows * cols)
            .map(|k| {
                if nonzero(k / cols, k % cols) {
                    Entry::Variable
                } else {
                    Entry::Zero
                }
            })
            .collect();
        Pattern {
            rows,
            cols,
            entries,
        }
    }

    pub(crate) fn get(&self, row: usize, col: usize) -> Entry {
        self.entries[row * self.cols + col]
    }

    fn row_is_zero(&self, row: usize) -> bool {
        (0..self.cols).all(|col| self.get(row, col) == Entry::Zero)
    }

    fn has_variables(&self) -> bool {
        self.entries.contains(&Entry::Variable)
    }
}

/// `name_r_c`.
pub(crate) fn entry_ident(name: &str, row: usize, col: usize) -> Ident {
    Ident::new(&format!("{name}_{row}_{col}"), Span::call_site())
}

/// `let [[m_0_0, m_1_0], [m_0_1, m_1_1]] = source.data.0;` binding the entries for
/// which `used` holds and ignoring the others (nalgebra stores columns outermost).
pub(crate) fn destructure(
    source: TokenStream,
    name: &str,
    rows: usize,
    cols: usize,
    used: impl Fn(usize, usize) -> bool,
) -> TokenStream {
    let columns = (0..cols).map(|col| {
        let cells = (0..rows).map(|row| {
            if used(row, col) {
                let ident = entry_ident(name, row, col);
                quote!(#ident)
            } else {
                quote!(_)
            }
        });
        quote!([#(#cells),*])
    });
    quote!(let [#(#columns),*] = #source.data.0;)
}

/// A fixed-size matrix built from its entries, without indexing.
pub(crate) fn construct(
    rows: usize,
    cols: usize,
    entry: impl Fn(usize, usize) -> TokenStream,
) -> TokenStream {
    let columns = (0..cols).map(|col| {
        let cells = (0..rows).map(|row| entry(row, col));
        quote!([#(#cells),*])
    });
    quote!(SMatrix::from_array_storage(ArrayStorage([#(#columns),*])))
}

/// A factor known at build time (`Constant`) or a run-time value.
enum Factor {
    Constant(f64),
    Value(Code),
}

/// `sum_k a_k * b_k` with constant factors folded in: `1 * b` is `b`, `-1 * b` is
/// `-b`. `None` when there are no terms (the entry is structurally zero).
fn sum_of_products(terms: Vec<(Factor, Code)>, scalar: Scalar) -> Option<Code> {
    terms
        .into_iter()
        .map(|(factor, value)| match factor {
            Factor::Constant(1.0) => value,
            Factor::Constant(-1.0) => value.neg(),
            Factor::Constant(c) => number(c, scalar).binary(quote!(*), &value, Prec::Product),
            Factor::Value(f) => f.binary(quote!(*), &value, Prec::Product),
        })
        .reduce(|sum, term| sum.binary(quote!(+), &term, Prec::Sum))
}

fn ident_code(ident: &Ident) -> Code {
    Code::atom(quote!(#ident))
}

/// Entry `(row, col)` of the symmetric `p`, read from its upper triangle.
fn symmetric(name: &str, row: usize, col: usize) -> Ident {
    entry_ident(name, row.min(col), row.max(col))
}

fn factor(pattern: &Pattern, name: &str, row: usize, col: usize) -> Option<Factor> {
    match pattern.get(row, col) {
        Entry::Zero => None,
        Entry::Constant(c) => Some(Factor::Constant(c)),
        Entry::Variable => Some(Factor::Value(ident_code(&entry_ident(name, row, col)))),
    }
}

/// Tracks which entries of an input matrix a kernel reads, so the destructuring binds
/// exactly those.
struct Reads {
    cols: usize,
    used: Vec<bool>,
}

impl Reads {
    fn new(rows: usize, cols: usize) -> Reads {
        Reads {
            cols,
            used: vec![false; rows * cols],
        }
    }

    fn mark(&mut self, row: usize, col: usize) {
        self.used[row * self.cols + col] = true;
    }

    fn get(&self, row: usize, col: usize) -> bool {
        self.used[row * self.cols + col]
    }
}

/// Body of `propagate_covariance(&self, p, x, u, dt, p_next)`: `F P F^T + Q`, with `Q`
/// written into `p_next` by `process_noise` first (pattern `q`), and `F` from
/// `transition_jacobian` when it has run-time entries (pattern `f`).
pub(crate) fn propagate_covariance(f: &Pattern, q: &Pattern, scalar: Scalar) -> TokenStream {
    let n = f.rows;
    let zero = number(0.0, scalar).tokens;
    // Which rows of F P are needed: row i of F P F^T (upper triangle, j >= i).
    let mut p_reads = Reads::new(n, n);
    let mut fp_lets = Vec::new();
    let mut fp: Vec<Option<Code>> = vec![None; n * n];
    for i in 0..n {
        if f.row_is_zero(i) {
            continue;
        }
        for k in 0..n {
            let needed = (i..n).any(|j| f.get(j, k) != Entry::Zero);
            if !needed {
                continue;
            }
            let terms: Vec<(Factor, Code)> = (0..n)
                .filter_map(|l| {
                    let factor = factor(f, "f", i, l)?;
                    p_reads.mark(l.min(k), l.max(k));
                    Some((factor, ident_code(&symmetric("p", l, k))))
                })
                .collect();
            let single_alias = matches!(terms.as_slice(), [(Factor::Constant(c), _)] if *c == 1.0);
            let value = sum_of_products(terms, scalar);
            fp[i * n + k] = match value {
                Some(code) if single_alias => Some(code),
                Some(code) => {
                    let name = entry_ident("fp", i, k);
                    let tokens = code.tokens;
                    fp_lets.push(quote!(let #name = #tokens;));
                    Some(ident_code(&name))
                }
                None => None,
            };
        }
    }
    let mut result_lets = Vec::new();
    let mut nonzero = vec![false; n * n];
    for i in 0..n {
        for j in i..n {
            let mut terms: Vec<(Factor, Code)> = (0..n)
                .filter_map(|k| {
                    let value = fp[i * n + k].clone()?;
                    Some((factor(f, "f", j, k)?, value))
                })
                .collect();
            // F P F^T is summed first, then Q added, as the runtime's dense kernel does.
            let mut value = sum_of_products(std::mem::take(&mut terms), scalar);
            if q.get(i, j) != Entry::Zero {
                let q_entry = ident_code(&entry_ident("q", i, j));
                value = Some(match value {
                    Some(sum) => sum.binary(quote!(+), &q_entry, Prec::Sum),
                    None => q_entry,
                });
            }
            if let Some(code) = value {
                let name = entry_ident("next", i, j);
                let tokens = code.tokens;
                result_lets.push(quote!(let #name = #tokens;));
                nonzero[i * n + j] = true;
            }
        }
    }
    let jacobian = if f.has_variables() {
        let read = destructure(quote!(jacobian), "f", n, n, |r, c| {
            f.get(r, c) == Entry::Variable
        });
        quote! {
            let mut jacobian = SMatrix::zeros();
            self.transition_jacobian(x, u, dt, &mut jacobian);
            #read
        }
    } else {
        quote!()
    };
    let q_read = destructure(quote!(p_next), "q", n, n, |r, c| {
        r <= c && q.get(r, c) != Entry::Zero
    });
    let p_read = destructure(quote!(p), "p", n, n, |r, c| p_reads.get(r, c));
    let result = construct(n, n, |r, c| {
        let (lo, hi) = (r.min(c), r.max(c));
        if nonzero[lo * n + hi] {
            let name = entry_ident("next", lo, hi);
            quote!(#name)
        } else {
            zero.clone()
        }
    });
    quote! {
        #jacobian
        self.process_noise(x, u, dt, p_next);
        #q_read
        #p_read
        #(#fp_lets)*
        #(#result_lets)*
        *p_next = #result;
    }
}

/// Body of `cross_covariance(&self, p, h, pht)`: `P H^T` over the nonzero entries of
/// `H` (pattern `h`, `M x N`).
pub(crate) fn cross_covariance(h: &Pattern, scalar: Scalar) -> TokenStream {
    let (m, n) = (h.rows, h.cols);
    let zero = number(0.0, scalar).tokens;
    let mut p_reads = Reads::new(n, n);
    let mut lets = Vec::new();
    let mut nonzero = vec![false; n * m];
    for i in 0..n {
        for j in 0..m {
            let terms: Vec<(Factor, Code)> = (0..n)
                .filter_map(|k| {
                    let factor = factor(h, "h", j, k)?;
                    p_reads.mark(i.min(k), i.max(k));
                    Some((factor, ident_code(&symmetric("p", i, k))))
                })
                .collect();
            if let Some(code) = sum_of_products(terms, scalar) {
                let name = entry_ident("pht", i, j);
                let tokens = code.tokens;
                lets.push(quote!(let #name = #tokens;));
                nonzero[i * m + j] = true;
            }
        }
    }
    let h_read = destructure(quote!(h), "h", m, n, |r, c| h.get(r, c) == Entry::Variable);
    let p_read = destructure(quote!(p), "p", n, n, |r, c| p_reads.get(r, c));
    let result = construct(n, m, |r, c| {
        if nonzero[r * m + c] {
            let name = entry_ident("pht", r, c);
            quote!(#name)
        } else {
            zero.clone()
        }
    });
    let h_read = if h.has_variables() { h_read } else { quote!() };
    quote! {
        #h_read
        #p_read
        #(#lets)*
        *pht = #result;
    }
}

/// Body of `innovation_covariance(&self, h, pht, r, s)`: `H (P H^T) + R`, upper
/// triangle once, with `R`'s structure `r`.
pub(crate) fn innovation_covariance(h: &Pattern, r: &Pattern, scalar: Scalar) -> TokenStream {
    let (m, n) = (h.rows, h.cols);
    let zero = number(0.0, scalar).tokens;
    let mut pht_reads = Reads::new(n, m);
    let mut lets = Vec::new();
    let mut nonzero = vec![false; m * m];
    for i in 0..m {
        for j in i..m {
            // Column j of P H^T is zero when row j of H is.
            let terms: Vec<(Factor, Code)> = if h.row_is_zero(j) {
                Vec::new()
            } else {
                (0..n)
                    .filter_map(|k| {
                        let factor = factor(h, "h", i, k)?;
                        pht_reads.mark(k, j);
                        Some((factor, ident_code(&entry_ident("pht", k, j))))
                    })
                    .collect()
            };
            let mut value = sum_of_products(terms, scalar);
            if r.get(i, j) != Entry::Zero {
                let r_entry = ident_code(&entry_ident("r", i, j));
                value = Some(match value {
                    Some(sum) => sum.binary(quote!(+), &r_entry, Prec::Sum),
                    None => r_entry,
                });
            }
            if let Some(code) = value {
                let name = entry_ident("s", i, j);
                let tokens = code.tokens;
                lets.push(quote!(let #name = #tokens;));
                nonzero[i * m + j] = true;
            }
        }
    }
    let h_read = if h.has_variables() {
        destructure(quote!(h), "h", m, n, |row, col| {
            h.get(row, col) == Entry::Variable
        })
    } else {
        quote!()
    };
    let pht_read = destructure(quote!(pht), "pht", n, m, |row, col| pht_reads.get(row, col));
    let r_read = destructure(quote!(r), "r", m, m, |row, col| {
        row <= col && r.get(row, col) != Entry::Zero
    });
    let result = construct(m, m, |row, col| {
        let (lo, hi) = (row.min(col), row.max(col));
        if nonzero[lo * m + hi] {
            let name = entry_ident("s", lo, hi);
            quote!(#name)
        } else {
            zero.clone()
        }
    });
    quote! {
        #h_read
        #pht_read
        #r_read
        #(#lets)*
        *s = #result;
    }
}
