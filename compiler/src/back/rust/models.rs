//! The model functions of the generated module: the private `Dynamics` type and one
//! private sensor type per sensor, implementing the runtime's `MotionModel` and
//! `ReadingModel` with straight-line code from the IR, plus the covariance kernels.

use std::collections::BTreeSet;

use proc_macro2::{Ident, Literal, Span, TokenStream};
use quote::quote;

use super::kernels::{self, construct, destructure, entry_ident, Entry, Pattern};
use super::names::{self, number, Code, Prec};
use super::noise::WhiteNoise;
use super::straight::{self, Block, MathTraits};
use super::Context;
use crate::ir::{Lowered, NodeId, NoiseSourceKind, RuntimeMatrix, Symbol};
use crate::model::SensorNoise;
use crate::options::{Method, UpdateForm};

/// Spelling of a symbol in the generated functions.
fn symbol(s: Symbol) -> TokenStream {
    let name = match s {
        Symbol::State(i) => format!("x{i}"),
        Symbol::Input(i) => format!("u{i}"),
        Symbol::Arg(i) => format!("a{i}"),
        Symbol::Noise(i) => format!("w{i}"),
        Symbol::Reading(i) => format!("z{i}"),
        Symbol::Dt => "dt".to_string(),
        Symbol::Runtime(matrix, row, col) => {
            let ident = entry_ident(runtime_field(matrix), row as usize, col as usize);
            return quote!(#ident);
        }
    };
    let ident = Ident::new(&name, Span::call_site());
    quote!(#ident)
}

/// The `Dynamics` field holding a run-time matrix.
pub(crate) fn runtime_field(matrix: RuntimeMatrix) -> &'static str {
    match matrix {
        RuntimeMatrix::Transition => "phi",
        RuntimeMatrix::InputGain => "gamma",
        RuntimeMatrix::ProcessNoise => "qd",
    }
}

pub(crate) fn usize_literal(value: usize) -> Literal {
    Literal::usize_unsuffixed(value)
}

/// A parameter name, prefixed with `_` when the body does not read it.
pub(super) fn param(name: &str, used: bool) -> Ident {
    let name = if used {
        name.to_string()
    } else {
        format!("_{name}")
    };
    Ident::new(&name, Span::call_site())
}

/// What a function body reads, deciding its parameter names and bindings.
#[derive(Default)]
pub(super) struct Reads {
    pub states: BTreeSet<u32>,
    pub inputs: BTreeSet<u32>,
    pub args: BTreeSet<u32>,
    pub dt: bool,
    runtime: BTreeSet<(RuntimeMatrix, u32, u32)>,
}

impl Reads {
    pub(super) fn of(symbols: &BTreeSet<Symbol>) -> Reads {
        let mut reads = Reads::default();
        for &s in symbols {
            match s {
                Symbol::State(i) => {
                    reads.states.insert(i);
                }
                Symbol::Input(i) => {
                    reads.inputs.insert(i);
                }
                Symbol::Arg(i) => {
                    reads.args.insert(i);
                }
                Symbol::Dt => reads.dt = true,
                Symbol::Runtime(m, r, c) => {
                    reads.runtime.insert((m, r, c));
                }
                Symbol::Noise(_) | Symbol::Reading(_) => {}
            }
        }
        reads
    }

    /// `let` statements binding every symbol read, from the function's parameters.
    pub(super) fn prelude(&self, ctx: &Context) -> TokenStream {
        let vector = |source: TokenStream, prefix: &str, len: usize, used: &BTreeSet<u32>| {
            if used.is_empty() {
                return quote!();
            }
            let cells = (0..len).map(|i| {
                if used.contains(&(i as u32)) {
                    let ident = Ident::new(&format!("{prefix}{i}"), Span::call_site());
                    quote!(#ident)
                } else {
                    quote!(_)
                }
            });
            quote!(let [[#(#cells),*]] = #source.data.0;)
        };
        let states = vector(quote!(x), "x", ctx.lowered.state_count, &self.states);
        let inputs = vector(quote!(u), "u", ctx.lowered.input_count, &self.inputs);
        let args = if self.args.is_empty() {
            quote!()
        } else {
            let count = self.args.iter().max().map_or(0, |&m| m as usize + 1);
            let cells = (0..count).map(|i| {
                if self.args.contains(&(i as u32)) {
                    let ident = Ident::new(&format!("a{i}"), Span::call_site());
                    quote!(#ident)
                } else {
                    quote!(_)
                }
            });
            quote!(let [#(#cells,)* ..] = *args;)
        };
        let n = ctx.lowered.state_count;
        let runtime = [
            RuntimeMatrix::Transition,
            RuntimeMatrix::InputGain,
            RuntimeMatrix::ProcessNoise,
        ]
        .into_iter()
        .filter(|m| self.runtime.iter().any(|(used, _, _)| used == m))
        .map(|m| {
            let field = Ident::new(runtime_field(m), Span::call_site());
            destructure(quote!(self.#field), runtime_field(m), n, n, |r, c| {
                self.runtime.contains(&(m, r as u32, c as u32))
            })
        });
        quote!(#states #inputs #args #(#runtime)*)
    }
}

/// Everything the model functions emit, and which math traits they call.
pub(crate) struct Models {
    pub items: TokenStream,
    pub traits: MathTraits,
    /// Which run-time matrices `Dynamics` holds.
    pub runtime: BTreeSet<RuntimeMatrix>,
    /// Whether `Dynamics` reads the tuning.
    pub dynamics_reads_tuning: bool,
}

/// Emits `Dynamics` and the sensor types with their trait impls.
pub(crate) fn emit(ctx: &Context) -> Models {
    let mut traits = MathTraits::default();
    let t = ctx.scalar_type();
    let n = usize_literal(ctx.lowered.state_count);
    let u = usize_literal(ctx.lowered.input_count);
    let lowered = ctx.lowered;

    let transition = ctx.block(&lowered.transition);
    let f_block = ctx.block(lowered.f_jac.entries());
    let noise = process_noise(ctx);
    traits = traits
        .union(transition.traits)
        .union(f_block.traits)
        .union(noise.block.traits);
    let runtime: BTreeSet<RuntimeMatrix> = [&transition, &f_block, &noise.block]
        .iter()
        .flat_map(|b| b.symbols.iter())
        .filter_map(|s| match s {
            Symbol::Runtime(m, _, _) => Some(*m),
            _ => None,
        })
        .collect();
    let transition_fn = function(ctx, &transition, |roots| {
        let roots = roots.iter().map(|r| &r.tokens);
        quote!(*x_next = SVector::from([#(#roots),*]);)
    });
    let (x_param, u_param, dt_param, prelude, lets, roots) = transition_fn;
    let motion_transition = quote! {
        fn transition(&self, #x_param: &SVector<#t, #n>, #u_param: &SVector<#t, #u>, #dt_param: #t, x_next: &mut SVector<#t, #n>) {
            #prelude
            #(#lets)*
            #roots
        }
    };
    let motion_jacobian = if ctx.options.method == Method::Ukf {
        let doc = names_doc(" The unscented filter never evaluates Jacobians, so the buffer is left untouched (the runtime's contract allows it).");
        quote! {
            #doc
            fn transition_jacobian(&self, _x: &SVector<#t, #n>, _u: &SVector<#t, #u>, _dt: #t, _jacobian: &mut SMatrix<#t, #n, #n>) {}
        }
    } else {
        let size = lowered.state_count;
        let (x_param, u_param, dt_param, prelude, lets, assign) =
            function(ctx, &f_block, |roots| {
                let matrix = construct(size, size, |r, c| roots[r * size + c].tokens.clone());
                quote!(*jacobian = #matrix;)
            });
        quote! {
            fn transition_jacobian(&self, #x_param: &SVector<#t, #n>, #u_param: &SVector<#t, #u>, #dt_param: #t, jacobian: &mut SMatrix<#t, #n, #n>) {
                #prelude
                #(#lets)*
                #assign
            }
        }
    };
    let (x_param, u_param, dt_param, prelude, lets, _) = function(ctx, &noise.block, |_| quote!());
    let noise_body = &noise.body;
    let motion_noise = quote! {
        fn process_noise(&self, #x_param: &SVector<#t, #n>, #u_param: &SVector<#t, #u>, #dt_param: #t, noise: &mut SMatrix<#t, #n, #n>) {
            #prelude
            #(#lets)*
            #noise_body
        }
    };
    let propagate = if ctx.options.method == Method::Ukf {
        quote!()
    } else {
        let f = Pattern::of(&lowered.f_jac, &lowered.arena);
        let body = kernels::propagate_covariance(&f, &noise.pattern, ctx.scalar);
        quote! {
            fn propagate_covariance(&self, p: &SMatrix<#t, #n, #n>, x: &SVector<#t, #n>, u: &SVector<#t, #u>, dt: #t, p_next: &mut SMatrix<#t, #n, #n>) {
                #body
            }
        }
    };

    let dynamics_reads_tuning = noise.reads_tuning;
    let lifetime = if dynamics_reads_tuning {
        quote!(<'_>)
    } else {
        quote!()
    };
    let motion_impl = quote! {
        impl reckon_runtime::MotionModel<#t, Const<#n>, Const<#u>> for Dynamics #lifetime {
            fn input_dim(&self) -> Const<#u> {
                Const
            }
            #motion_transition
            #motion_jacobian
            #motion_noise
            #propagate
        }
    };

    let mut sensors = Vec::new();
    for index in 0..lowered.sensors.len() {
        let (tokens, sensor_traits) = sensor_impl(ctx, index);
        traits = traits.union(sensor_traits);
        sensors.push(tokens);
    }
    Models {
        items: quote! {
            #motion_impl
            #(#sensors)*
        },
        traits,
        runtime,
        dynamics_reads_tuning,
    }
}

fn names_doc(text: &str) -> TokenStream {
    quote!(#[doc = #text])
}

/// Parameter names, prelude, lets and the final statement of a motion function.
type MotionFunction = (
    Ident,
    Ident,
    Ident,
    TokenStream,
    Vec<TokenStream>,
    TokenStream,
);

fn function(
    ctx: &Context,
    block: &Block,
    finish: impl Fn(&[Code]) -> TokenStream,
) -> MotionFunction {
    let reads = Reads::of(&block.symbols);
    (
        param("x", !reads.states.is_empty()),
        param("u", !reads.inputs.is_empty()),
        param("dt", reads.dt),
        reads.prelude(ctx),
        block.lets.clone(),
        finish(&block.roots),
    )
}

/// The process-noise function's block, its final statement and `Q`'s structure.
struct ProcessNoiseCode {
    block: Block,
    body: TokenStream,
    pattern: Pattern,
    reads_tuning: bool,
}

/// One term of an entry of `Q`: indices into the block's roots.
enum Term {
    /// `density * root`.
    White { density: Ident, root: usize },
    /// `root` (a run-time Van Loan entry).
    Plain { root: usize },
    /// `variance * left * right`.
    Discrete {
        variance: Ident,
        left: usize,
        right: usize,
    },
}

fn process_noise(ctx: &Context) -> ProcessNoiseCode {
    let lowered = ctx.lowered;
    let n = lowered.state_count;
    let arena = &lowered.arena;
    let mut roots: Vec<NodeId> = Vec::new();
    let mut push = |id: NodeId| {
        roots.push(id);
        roots.len() - 1
    };
    let mut terms: Vec<Vec<Term>> = (0..n * n).map(|_| Vec::new()).collect();
    let mut tuning_lets = Vec::new();
    match ctx.white {
        WhiteNoise::None => {}
        WhiteNoise::RuntimeVanLoan => {
            for i in 0..n {
                for j in i..n {
                    let entry = lowered.q_white.get(i, j);
                    if !arena.is_zero(entry) {
                        terms[i * n + j].push(Term::Plain { root: push(entry) });
                    }
                }
            }
        }
        WhiteNoise::PerSource(sources) => {
            for source in sources {
                let state = &ctx.model.states[source.state].name;
                let density = names::joined(&["density", state]);
                let field = ctx.tuning_white(source.state);
                tuning_lets.push(quote!(let #density = self.tuning.#field * self.tuning.#field;));
                for i in 0..n {
                    for j in i..n {
                        let entry = source.unit_covariance.get(i, j);
                        if !arena.is_zero(entry) {
                            terms[i * n + j].push(Term::White {
                                density: density.clone(),
                                root: push(entry),
                            });
                        }
                    }
                }
            }
        }
    }
    for (k, source) in lowered.noise_sources.iter().enumerate() {
        let variance = Ident::new(&format!("variance{k}"), Span::call_site());
        let field = match source.kind {
            NoiseSourceKind::PerStep { state } => ctx.tuning_step(state),
            NoiseSourceKind::Input { input } => ctx.tuning_input(input),
        };
        tuning_lets.push(quote!(let #variance = self.tuning.#field * self.tuning.#field;));
        for i in 0..n {
            for j in i..n {
                let (left, right) = (lowered.g_jac.get(i, k), lowered.g_jac.get(j, k));
                if !arena.is_zero(left) && !arena.is_zero(right) {
                    terms[i * n + j].push(Term::Discrete {
                        variance: variance.clone(),
                        left: push(left),
                        right: push(right),
                    });
                }
            }
        }
    }
    let reads_tuning = !tuning_lets.is_empty();
    let block = ctx.block(&roots);
    let one = |root: usize| arena.constant_value(roots[root]) == Some(1.0);
    let mut entry_lets = Vec::new();
    let mut nonzero = vec![false; n * n];
    for i in 0..n {
        for j in i..n {
            let sum = terms[i * n + j]
                .iter()
                .map(|term| match term {
                    Term::Plain { root } => block.roots[*root].clone(),
                    Term::White { density, root } => {
                        scaled(Code::atom(quote!(#density)), &[(*root, one(*root))], &block)
                    }
                    Term::Discrete {
                        variance,
                        left,
                        right,
                    } => scaled(
                        Code::atom(quote!(#variance)),
                        &[(*left, one(*left)), (*right, one(*right))],
                        &block,
                    ),
                })
                .reduce(|sum, term| sum.binary(quote!(+), &term, Prec::Sum));
            if let Some(code) = sum {
                let name = entry_ident("q", i, j);
                let tokens = code.tokens;
                entry_lets.push(quote!(let #name = #tokens;));
                nonzero[i * n + j] = true;
            }
        }
    }
    let zero = number(0.0, ctx.scalar).tokens;
    let matrix = construct(n, n, |r, c| {
        let (lo, hi) = (r.min(c), r.max(c));
        if nonzero[lo * n + hi] {
            let name = entry_ident("q", lo, hi);
            quote!(#name)
        } else {
            zero.clone()
        }
    });
    let pattern = Pattern::variable_where(n, n, |r, c| nonzero[r.min(c) * n + r.max(c)]);
    ProcessNoiseCode {
        body: quote! {
            #(#tuning_lets)*
            #(#entry_lets)*
            *noise = #matrix;
        },
        block,
        pattern,
        reads_tuning,
    }
}

/// `factor * root_1 * root_2 ...`, leaving out roots equal to one.
fn scaled(factor: Code, roots: &[(usize, bool)], block: &Block) -> Code {
    roots
        .iter()
        .filter(|(_, is_one)| !is_one)
        .fold(factor, |product, (root, _)| {
            product.binary(quote!(*), &block.roots[*root], Prec::Product)
        })
}

/// The private type and `ReadingModel` impl of sensor `index`.
fn sensor_impl(ctx: &Context, index: usize) -> (TokenStream, MathTraits) {
    let lowered: &Lowered = ctx.lowered;
    let sensor = &lowered.sensors[index];
    let spec = &ctx.model.sensors[index];
    let t = ctx.scalar_type();
    let n_size = lowered.state_count;
    let m_size = sensor.h.len();
    let n = usize_literal(n_size);
    let m = usize_literal(m_size);
    let k = usize_literal(spec.args.len());
    let ty = names::type_ident(&spec.name, "Sensor");

    let h_block = ctx.block(&sensor.h);
    let (predict, predict_reads) = reading_function(ctx, &h_block, |roots| {
        let roots = roots.iter().map(|r| &r.tokens);
        quote!(*z_hat = SVector::from([#(#roots),*]);)
    });
    let (x_param, args_param) = predict_reads;
    let predict_reading = quote! {
        fn predict_reading(&self, #x_param: &SVector<#t, #n>, #args_param: &[#t; #k], z_hat: &mut SVector<#t, #m>) {
            #predict
        }
    };
    let mut traits = h_block.traits;
    let ekf = ctx.options.method != Method::Ukf;
    let reading_jacobian = if ekf {
        let j_block = ctx.block(sensor.h_jac.entries());
        traits = traits.union(j_block.traits);
        let (body, (x_param, args_param)) = reading_function(ctx, &j_block, |roots| {
            let matrix = construct(m_size, n_size, |r, c| roots[r * n_size + c].tokens.clone());
            quote!(*jacobian = #matrix;)
        });
        quote! {
            fn reading_jacobian(&self, #x_param: &SVector<#t, #n>, #args_param: &[#t; #k], jacobian: &mut SMatrix<#t, #m, #n>) {
                #body
            }
        }
    } else {
        let doc = names_doc(" The unscented filter never evaluates Jacobians, so the buffer is left untouched (the runtime's contract allows it).");
        quote! {
            #doc
            fn reading_jacobian(&self, _x: &SVector<#t, #n>, _args: &[#t; #k], _jacobian: &mut SMatrix<#t, #m, #n>) {}
        }
    };

    let (noise_body, r_pattern) = match &spec.noise {
        SensorNoise::PerComponent(_) => {
            let fields: Vec<Ident> = (0..m_size)
                .map(|c| ctx.tuning_component(index, c))
                .collect();
            let zero = number(0.0, ctx.scalar).tokens;
            let matrix = construct(m_size, m_size, |r, c| {
                if r == c {
                    let field = &fields[r];
                    quote!(self.tuning.#field * self.tuning.#field)
                } else {
                    zero.clone()
                }
            });
            (
                quote!(*noise = #matrix;),
                Pattern::variable_where(m_size, m_size, |r, c| r == c),
            )
        }
        SensorNoise::Covariance(_) => {
            let field = ctx.tuning_covariance(index);
            (
                // The tuning holds rows; nalgebra's storage holds columns.
                quote!(*noise = SMatrix::from_array_storage(ArrayStorage(self.tuning.#field)).transpose();),
                Pattern::variable_where(m_size, m_size, |_, _| true),
            )
        }
    };
    let reading_noise = quote! {
        fn reading_noise(&self, _x: &SVector<#t, #n>, _args: &[#t; #k], noise: &mut SMatrix<#t, #m, #m>) {
            #noise_body
        }
    };
    let wrapped: Vec<Literal> = sensor
        .wrap
        .iter()
        .enumerate()
        .filter(|(_, &w)| w)
        .map(|(c, _)| usize_literal(c))
        .collect();
    let is_angle = if wrapped.is_empty() {
        quote!()
    } else {
        quote! {
            fn is_angle(&self, component: usize) -> bool {
                matches!(component, #(#wrapped)|*)
            }
        }
    };
    let diagonal = matches!(spec.noise, SensorNoise::PerComponent(_));
    let update_form = if ekf && ctx.options.update == UpdateForm::Sequential && diagonal {
        quote! {
            fn update_form(&self) -> reckon_runtime::UpdateForm {
                reckon_runtime::UpdateForm::SequentialScalar
            }
        }
    } else {
        quote!()
    };
    let kernels = if ekf {
        let h = Pattern::of(&sensor.h_jac, &lowered.arena);
        let h_param = param("h", h.entries.contains(&Entry::Variable));
        let cross = kernels::cross_covariance(&h, ctx.scalar);
        let innovation = kernels::innovation_covariance(&h, &r_pattern, ctx.scalar);
        quote! {
            fn cross_covariance(&self, p: &SMatrix<#t, #n, #n>, #h_param: &SMatrix<#t, #m, #n>, pht: &mut SMatrix<#t, #n, #m>) {
                #cross
            }
            fn innovation_covariance(&self, #h_param: &SMatrix<#t, #m, #n>, pht: &SMatrix<#t, #n, #m>, r: &SMatrix<#t, #m, #m>, s: &mut SMatrix<#t, #m, #m>) {
                #innovation
            }
        }
    } else {
        quote!()
    };
    let doc = format!(
        " The functions of sensor `{}` for the runtime's filters.",
        spec.name
    );
    let tokens = quote! {
        #[doc = #doc]
        struct #ty<'a> {
            tuning: &'a Tuning,
        }
        impl reckon_runtime::ReadingModel<#t, Const<#n>, Const<#m>> for #ty<'_> {
            type Args = [#t; #k];
            fn reading_dim(&self) -> Const<#m> {
                Const
            }
            #predict_reading
            #reading_jacobian
            #reading_noise
            #is_angle
            #update_form
            #kernels
        }
    };
    (tokens, traits)
}

/// The body of a reading function and its `x` and `args` parameter names.
fn reading_function(
    ctx: &Context,
    block: &Block,
    finish: impl Fn(&[Code]) -> TokenStream,
) -> (TokenStream, (Ident, Ident)) {
    let reads = Reads::of(&block.symbols);
    let prelude = reads.prelude(ctx);
    let lets = &block.lets;
    let last = finish(&block.roots);
    (
        quote! {
            #prelude
            #(#lets)*
            #last
        },
        (
            param("x", !reads.states.is_empty()),
            param("args", !reads.args.is_empty()),
        ),
    )
}

impl Context<'_> {
    /// The straight-line block of `roots` in this module's scalar.
    pub(crate) fn block(&self, roots: &[NodeId]) -> Block {
        straight::block(&self.lowered.arena, roots, self.scalar, &symbol)
    }
}
