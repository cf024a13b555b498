//! The symbolic IR: every function a filter needs, as one hash-consed expression DAG.
//!
//! [`lower`] turns a checked [`Model`](crate::model::Model) into a [`Lowered`] model:
//! the discrete transition `x_next = f(x, u, w, dt)`, its Jacobians `F = df/dx` and
//! `G = df/dw`, the discretised process-noise covariance `Q`, and per sensor the
//! predicted reading `h(x, args)`, its Jacobian `H = dh/dx` and the (angle-aware)
//! residual. All of them are [`NodeId`]s into one [`Arena`], so a sub-expression
//! shared by `f`, `F`, `h` and `H` is computed once.
//!
//! # At a glance
//! ```text
//! let l = ir::lower(&model, &LowerOptions::default())?;     // Integrator::Auto
//! l.transition[i], l.f_jac.get(i, j), l.g_jac, l.q, l.q_white  // NodeIds / NodeMatrix
//! l.sensors[s].h, .h_jac, .residual, .noise_cov                // per sensor
//! l.analysis.f_sparsity.is_nonzero(i, j)                      // structural zeros
//! l.discretisation.{method, noise_method, reason, linear_system}
//! Evaluator::new(&l.arena, &roots).eval(&Bindings::new(x, u, dt))  // f32 or f64
//! ir::dump(&l)                                                 // text for `dump --ir`
//! ```
//!
//! # Contract for back ends
//! - A node's operands have smaller handles; evaluating nodes in increasing handle
//!   order, each once, is the evaluation order (see [`eval`] for the full contract,
//!   and [`eval::Evaluator`] for the reference implementation).
//! - Symbols are listed in [`Symbol`]: states and inputs in SI, discrete noise
//!   samples indexed by [`Lowered::noise_sources`], sensor arguments and readings
//!   (per sensor), the step length `dt`, and, for linear time-invariant motion
//!   without a finite series, entries of run-time matrices (see [`LinearSystem`]).
//! - A matrix entry that is a constant zero is structurally zero (see
//!   [`NodeMatrix::sparsity`]); back ends may skip it.
//! - Angles of `wrap` states and components are wrapped with the
//!   [`Unary::WrapAngle`] node, whose value is [`eval::wrap_angle`].

mod analysis;
mod arena;
mod derive;
mod discretise;
mod dump;
pub mod eval;
mod lower;
mod node;
mod unit_check;
pub mod verify;

#[cfg(test)]
pub(crate) mod test_models;
#[cfg(test)]
mod test_trees;

use std::fmt;

use crate::diag::{codes, Diagnostic, Span};

pub use analysis::{Analysis, FunctionOps, Linearity, OpCounts};
pub use arena::Arena;
pub use discretise::{DiscretisationInfo, LinearSystem, Method, NoiseMethod, RuntimeValues};
pub use dump::dump;
pub use lower::{
    lower, Integrator, LowerOptions, Lowered, LoweredSensor, NoiseSource, NoiseSourceKind,
};
pub use node::{Binary, Constant, Node, NodeId, RuntimeMatrix, Symbol, Unary};

/// A broken invariant found while lowering: boxed, because diagnostics are large
/// and travel through many `?`s.
pub(crate) type InternalResult<T> = Result<T, Box<Diagnostic>>;

/// An internal-error diagnostic (a bug in reckon, not in the spec).
pub(crate) fn internal_error(span: Span, message: impl Into<String>) -> Box<Diagnostic> {
    Box::new(Diagnostic::new(codes::INTERNAL, span, message))
}

/// A dense matrix of nodes, row-major.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NodeMatrix {
    rows: usize,
    cols: usize,
    entries: Vec<NodeId>,
}

impl NodeMatrix {
    /// A `rows x cols` matrix from row-major entries (`entries.len() == rows * cols`).
    pub(crate) fn new(rows: usize, cols: usize, entries: Vec<NodeId>) -> NodeMatrix {
        debug_assert_eq!(entries.len(), rows * cols);
        NodeMatrix {
            rows,
            cols,
            entries,
        }
    }

    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Number of columns.
    pub fn cols(&self) -> usize {
        self.cols
    }

    /// Entry `(row, col)`.
    pub fn get(&self, row: usize, col: usize) -> NodeId {
        self.entries[row * self.cols + col]
    }

    /// Every entry, row-major.
    pub fn entries(&self) -> &[NodeId] {
        &self.entries
    }

    /// Which entries are not identically zero.
    pub fn sparsity(&self, arena: &Arena) -> Sparsity {
        Sparsity {
            rows: self.rows,
            cols: self.cols,
            nonzero: self.entries.iter().map(|&e| !arena.is_zero(e)).collect(),
        }
    }
}

/// The structural pattern of a matrix: which entries may be nonzero.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Sparsity {
    /// Number of rows.
    pub rows: usize,
    /// Number of columns.
    pub cols: usize,
    /// Row-major: `true` where the entry is not identically zero.
    pub nonzero: Vec<bool>,
}

impl Sparsity {
    /// True when entry `(row, col)` may be nonzero.
    pub fn is_nonzero(&self, row: usize, col: usize) -> bool {
        self.nonzero[row * self.cols + col]
    }

    /// Number of entries that may be nonzero.
    pub fn count(&self) -> usize {
        self.nonzero.iter().filter(|&&n| n).count()
    }
}

impl fmt::Display for Sparsity {
    /// One line per row: `x` for a possibly nonzero entry, `.` for a structural zero.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for row in 0..self.rows {
            let cells: Vec<&str> = (0..self.cols)
                .map(|col| if self.is_nonzero(row, col) { "x" } else { "." })
                .collect();
            writeln!(f, "[{}]", cells.join(" "))?;
        }
        Ok(())
    }
}
