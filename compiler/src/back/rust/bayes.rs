//! The grid and particle estimators: the same public structs as the Kalman modules
//! (`State`, `Input`, readings, `Tuning`), an `Estimator` over the runtime's `Grid1`,
//! `Grid2` or `ParticleFilter`, and straight-line model functions from the plan in
//! [`crate::back::bayes`]: the grid's noise-free transition, per-axis kernels and exact
//! translation; the particle filter's sampled transition; every sensor's log likelihood.

use proc_macro2::{Ident, Span, TokenStream};
use quote::quote;

use super::models::{param, Reads};
use super::module::{
    doc, input_struct, reading_struct, sensor_arguments, state_struct, tuning_struct,
    SensorArguments,
};
use super::names;
use super::straight::{Block, MathTraits};
use super::Context;
use crate::back::bayes::{BayesPlan, GridPlan, Shape, Source, SourceKind, Spread};
use crate::ir::{NodeId, Symbol};

/// Emits the whole module for the grid or particle method.
pub(crate) fn emit(ctx: &Context, plan: &BayesPlan) -> TokenStream {
    let mut traits = MathTraits::default();
    let dynamics = match &plan.grid {
        Some(grid) => grid_dynamics(ctx, plan, grid, &mut traits),
        None => particle_dynamics(ctx, plan, &mut traits),
    };
    let sensors: Vec<TokenStream> = (0..ctx.model.sensors.len())
        .map(|index| sensor(ctx, plan, index, &mut traits))
        .collect();
    let estimator = match &plan.grid {
        Some(grid) => grid_estimator(ctx, plan, grid),
        None => particle_estimator(ctx, plan),
    };
    let imports = imports(ctx, plan, traits);
    let state = state_struct(ctx);
    let input = input_struct(ctx);
    let readings = (0..ctx.model.sensors.len()).map(|s| reading_struct(ctx, s));
    let tuning = tuning_struct(ctx);
    quote! {
        #imports
        #state
        #input
        #(#readings)*
        #tuning
        #estimator
        #dynamics
        #(#sensors)*
    }
}

fn imports(ctx: &Context, plan: &BayesPlan, traits: MathTraits) -> TokenStream {
    // Every module names the covariance and spells square roots through the trait.
    let mut nalgebra = vec![quote!(ComplexField)];
    if traits.real {
        nalgebra.push(quote!(RealField));
    }
    nalgebra.extend([quote!(SMatrix), quote!(SVector)]);
    let has_sensors = !ctx.model.sensors.is_empty();
    let runtime = match &plan.grid {
        Some(grid) => {
            let grid_type = if grid.axes.len() == 1 {
                quote!(Grid1)
            } else {
                quote!(Grid2)
            };
            let mut names = vec![quote!(Axis)];
            if has_sensors {
                names.extend([quote!(CorrectError), quote!(GridCorrection)]);
            }
            names.extend([
                quote!(GridError),
                quote!(GridOptions),
                quote!(GridPrediction),
                grid_type,
            ]);
            if has_sensors {
                names.push(quote!(Likelihood));
            }
            names.extend([
                quote!(Mode),
                quote!(Motion),
                quote!(Noise),
                quote!(PredictError),
            ]);
            quote!(use reckon_runtime::grid::{#(#names),*};)
        }
        None => {
            let mut grid = Vec::new();
            if has_sensors {
                grid.extend([quote!(CorrectError), quote!(Likelihood)]);
            }
            grid.extend([quote!(Noise), quote!(PredictError)]);
            let mut particle = Vec::new();
            if has_sensors {
                particle.push(quote!(ParticleCorrection));
            }
            particle.extend([
                quote!(ParticleError),
                quote!(ParticleFilter),
                quote!(ParticleOptions),
                quote!(Pcg32),
                quote!(SampledMotion),
            ]);
            quote! {
                use reckon_runtime::grid::{#(#grid),*};
                use reckon_runtime::particle::{#(#particle),*};
            }
        }
    };
    quote! {
        use reckon_runtime::nalgebra::{#(#nalgebra),*};
        #runtime
    }
}

fn ident(name: &str) -> Ident {
    Ident::new(name, Span::call_site())
}

/// `Noise::Shape { width_name: width }`.
fn noise_value(shape: Shape, width: TokenStream) -> TokenStream {
    let variant = ident(shape.name());
    let field = ident(shape.width_name());
    quote!(Noise::#variant { #field: #width })
}

/// The run-time width of source `source`: its tuning value, times `sqrt(dt)` for
/// white noise.
fn source_width(ctx: &Context, source: &Source) -> TokenStream {
    match source.kind {
        SourceKind::Process { state } => {
            let field = ctx.tuning_step(state);
            quote!(self.tuning.#field)
        }
        SourceKind::Input { input } => {
            let field = ctx.tuning_input(input);
            quote!(self.tuning.#field)
        }
        SourceKind::White { state } => {
            let field = ctx.tuning_white(state);
            quote!(self.tuning.#field * ComplexField::sqrt(dt))
        }
    }
}

/// `let [[z0, _, z2]] = source.data.0;` binding the used entries of a vector.
fn bind_vector(
    source: TokenStream,
    prefix: &str,
    len: usize,
    used: &dyn Fn(u32) -> bool,
) -> TokenStream {
    if !(0..len as u32).any(used) {
        return quote!();
    }
    let cells = (0..len).map(|i| {
        if used(i as u32) {
            let name = ident(&format!("{prefix}{i}"));
            quote!(#name)
        } else {
            quote!(_)
        }
    });
    quote!(let [[#(#cells),*]] = #source.data.0;)
}

/// The statements of a block: the prelude binding its states, inputs and arguments,
/// then its `let`s.
fn block_statements(ctx: &Context, block: &Block) -> (Reads, TokenStream) {
    let reads = Reads::of(&block.symbols);
    let prelude = reads.prelude(ctx);
    let lets = &block.lets;
    (reads, quote!(#prelude #(#lets)*))
}

fn grid_dynamics(
    ctx: &Context,
    plan: &BayesPlan,
    grid: &GridPlan,
    traits: &mut MathTraits,
) -> TokenStream {
    let t = ctx.scalar_type();
    let d = names_usize(ctx.model.states.len());
    let u = names_usize(ctx.model.inputs.len());
    let lowered = &plan.lowered;

    let transition = ctx.block(&lowered.transition);
    *traits = traits.union(transition.traits);
    let (reads, body) = block_statements(ctx, &transition);
    let roots = transition.roots.iter().map(|r| &r.tokens);
    let (x, u_param, dt) = (
        param("x", !reads.states.is_empty()),
        param("u", !reads.inputs.is_empty()),
        param("dt", reads.dt),
    );
    let transition_fn = quote! {
        fn transition(&self, #x: &SVector<#t, #d>, #u_param: &SVector<#t, #u>, #dt: #t) -> SVector<#t, #d> {
            #body
            SVector::from([#(#roots),*])
        }
    };

    // The kernels: every gain in one block, then one width expression per axis.
    let gains: Vec<NodeId> = grid
        .noise
        .iter()
        .flat_map(|axis| axis.terms.iter().map(|&(_, gain)| gain))
        .collect();
    let gain_block = ctx.block(&gains);
    *traits = traits.union(gain_block.traits);
    let mut gain_code = gain_block.roots.iter();
    let mut reads_white_dt = false;
    let mut combines = false;
    let kernels: Vec<TokenStream> = grid
        .noise
        .iter()
        .map(|axis| {
            let widths: Vec<TokenStream> = axis
                .terms
                .iter()
                .map(|&(source_index, gain)| {
                    let source = &plan.sources[source_index];
                    reads_white_dt |= source.is_white();
                    let width = source_width(ctx, source);
                    let gain_tokens = gain_code.next().map(|c| c.tokens.clone());
                    if lowered.arena.constant_value(gain) == Some(1.0) {
                        width
                    } else {
                        quote!(ComplexField::abs(#gain_tokens) * #width)
                    }
                })
                .collect();
            let width = match widths.as_slice() {
                [single] => single.clone(),
                several => {
                    combines = true;
                    quote!(combined_std_dev([#(#several),*]))
                }
            };
            noise_value(axis.shape, width)
        })
        .collect();
    let (gain_reads, gain_body) = block_statements(ctx, &gain_block);
    let noise_u = param("u", !gain_reads.inputs.is_empty());
    let noise_dt = param("dt", gain_reads.dt || reads_white_dt);
    let noise_fn = quote! {
        fn noise(&self, #noise_u: &SVector<#t, #u>, #noise_dt: #t) -> [Noise<#t>; #d] {
            #gain_body
            [#(#kernels),*]
        }
    };

    let translation_fn = grid.translation.as_ref().map(|shift| {
        let block = ctx.block(shift);
        *traits = traits.union(block.traits);
        let (reads, body) = block_statements(ctx, &block);
        let roots = block.roots.iter().map(|r| &r.tokens);
        let (u_param, dt) = (param("u", !reads.inputs.is_empty()), param("dt", reads.dt));
        quote! {
            /// The motion moves every state by an amount that does not depend on the
            /// state, so the belief shifts exactly, by fractions of a cell too.
            fn translation(&self, #u_param: &SVector<#t, #u>, #dt: #t) -> Option<SVector<#t, #d>> {
                #body
                Some(SVector::from([#(#roots),*]))
            }
        }
    });
    let combined = combines.then(|| {
        quote! {
            /// The standard deviation of a sum of independent normal noises. A width that
            /// is not positive and finite is passed on as it is, so the filter refuses it.
            fn combined_std_dev<const K: usize>(std_devs: [#t; K]) -> #t {
                let mut variance = 0.0;
                for std_dev in std_devs {
                    if !(std_dev > 0.0 && std_dev.is_finite()) {
                        return std_dev;
                    }
                    variance += std_dev * std_dev;
                }
                ComplexField::sqrt(variance)
            }
        }
    });
    quote! {
        /// The motion model over one step, for the runtime's grid filter.
        struct Dynamics<'a> {
            tuning: &'a Tuning,
        }
        impl Motion<#t, #d, #u> for Dynamics<'_> {
            #transition_fn
            #noise_fn
            #translation_fn
        }
        #combined
    }
}

fn names_usize(value: usize) -> proc_macro2::Literal {
    proc_macro2::Literal::usize_unsuffixed(value)
}

fn particle_dynamics(ctx: &Context, plan: &BayesPlan, traits: &mut MathTraits) -> TokenStream {
    let t = ctx.scalar_type();
    let d = names_usize(ctx.model.states.len());
    let u = names_usize(ctx.model.inputs.len());
    let w = names_usize(plan.sources.len());
    let transition = ctx.block(&plan.sampled_transition);
    *traits = traits.union(transition.traits);
    let (reads, body) = block_statements(ctx, &transition);
    let samples = bind_vector(quote!(samples), "w", plan.sources.len(), &|i| {
        transition.symbols.contains(&Symbol::Noise(i))
    });
    let roots = transition.roots.iter().map(|r| &r.tokens);
    let (x, u_param) = (
        param("x", !reads.states.is_empty()),
        param("u", !reads.inputs.is_empty()),
    );
    let widths: Vec<TokenStream> = plan
        .sources
        .iter()
        .map(|source| noise_value(source.spread.shape, source_width(ctx, source)))
        .collect();
    let uses_tuning = !plan.sources.is_empty();
    let sources_dt = param("dt", plan.sources.iter().any(Source::is_white));
    let (fields, lifetime, impl_lifetime) = if uses_tuning {
        (quote!({ tuning: &'a Tuning, }), quote!(<'a>), quote!(<'_>))
    } else {
        (quote!(;), quote!(), quote!())
    };
    let draws = if plan.sources.is_empty() {
        quote!()
    } else {
        quote!(let samples = SVector::<#t, #w>::from(self.sources(dt).map(|noise| rng.sample(&noise)));)
    };
    let sources_fn = uses_tuning.then(|| {
        quote! {
            impl Dynamics<'_> {
                /// The distribution of every noise source over a step of `dt`.
                fn sources(&self, #sources_dt: #t) -> [Noise<#t>; #w] {
                    [#(#widths),*]
                }
            }
        }
    });
    let check = if uses_tuning {
        quote! {
            for (component, noise) in self.sources(dt).iter().enumerate() {
                noise
                    .validate()
                    .map_err(|reason| PredictError::InvalidNoise { component, reason })?;
            }
            Ok(())
        }
    } else {
        quote!(Ok(()))
    };
    // Both functions call `sources(dt)` whenever there are sources.
    let check_dt = param("dt", uses_tuning);
    let rng = param("rng", uses_tuning);
    let sample_dt = param("dt", reads.dt || uses_tuning);
    quote! {
        /// The motion model over one step, for the runtime's particle filter: every noise
        /// source is sampled and pushed through the motion where it enters.
        struct Dynamics #lifetime #fields
        #sources_fn
        impl SampledMotion<#t, #d, #u> for Dynamics #impl_lifetime {
            fn check_noise(&self, _u: &SVector<#t, #u>, #check_dt: #t) -> Result<(), PredictError> {
                #check
            }
            fn sample_transition(&self, #x: &SVector<#t, #d>, #u_param: &SVector<#t, #u>, #sample_dt: #t, #rng: &mut Pcg32) -> SVector<#t, #d> {
                #draws
                #samples
                #body
                SVector::from([#(#roots),*])
            }
        }
    }
}

/// The sensor's private type and its `Likelihood` impl.
fn sensor(ctx: &Context, plan: &BayesPlan, index: usize, traits: &mut MathTraits) -> TokenStream {
    let t = ctx.scalar_type();
    let d = names_usize(ctx.model.states.len());
    let model_sensor = &ctx.model.sensors[index];
    let lowered_sensor = &plan.lowered.sensors[index];
    let m = names_usize(model_sensor.components.len());
    let k = names_usize(model_sensor.args.len());
    let ty = names::type_ident(&model_sensor.name, "Sensor");
    let block = ctx.block(&lowered_sensor.residual);
    *traits = traits.union(block.traits);
    let (reads, body) = block_statements(ctx, &block);
    let readings = bind_vector(quote!(z), "z", model_sensor.components.len(), &|i| {
        block.symbols.contains(&Symbol::Reading(i))
    });
    let terms = block
        .roots
        .iter()
        .zip(&plan.reading_noise[index])
        .enumerate()
        .map(|(component, (residual, spread))| {
            let field = ctx.tuning_component(index, component);
            let noise = noise_value(spread.shape, quote!(self.tuning.#field));
            let residual = &residual.tokens;
            quote!(#noise.ln_pdf(#residual))
        });
    let (args_field, args_binding) = if model_sensor.args.is_empty() {
        (quote!(), quote!())
    } else if reads.args.is_empty() {
        (quote!(args: [#t; #k],), quote!())
    } else {
        (quote!(args: [#t; #k],), quote!(let args = &self.args;))
    };
    // Particles outside a state's range are impossible (see `BayesPlan::support`).
    let guards: Vec<TokenStream> = plan
        .support
        .iter()
        .enumerate()
        .filter_map(|(state, range)| {
            let (lo, hi) = range.as_ref()?;
            let (lo, hi) = (ctx.number(*lo), ctx.number(*hi));
            let index = names_usize(state);
            Some(quote! {
                if !(#lo <= x[#index] && x[#index] <= #hi) {
                    return #t::NEG_INFINITY;
                }
            })
        })
        .collect();
    let x = param("x", !reads.states.is_empty() || !guards.is_empty());
    let z = param(
        "z",
        block
            .symbols
            .iter()
            .any(|s| matches!(s, Symbol::Reading(_))),
    );
    let doc = doc(format!(
        "The likelihood of a reading of sensor `{}`, for the runtime's filters.",
        model_sensor.name
    ));
    let unread_args = (!model_sensor.args.is_empty() && reads.args.is_empty())
        .then(|| quote!(#[allow(dead_code)]));
    quote! {
        #doc
        #unread_args
        struct #ty<'a> {
            tuning: &'a Tuning,
            #args_field
        }
        impl Likelihood<#t, #d, #m> for #ty<'_> {
            fn ln_likelihood(&self, #x: &SVector<#t, #d>, #z: &SVector<#t, #m>) -> #t {
                #(#guards)*
                #args_binding
                #readings
                #body
                #(#terms)+*
            }
        }
    }
}

/// The `correct_<sensor>` methods: reading (and arguments) in declared units, the
/// filter's correction in SI.
fn corrections(ctx: &Context, target: TokenStream, outcome: TokenStream) -> Vec<TokenStream> {
    let t = ctx.scalar_type();
    ctx.model
        .sensors
        .iter()
        .map(|sensor| {
            let name = names::joined(&["correct", &sensor.name]);
            let reading_ty = names::type_ident(&sensor.name, "Reading");
            let sensor_ty = names::type_ident(&sensor.name, "Sensor");
            let SensorArguments {
                names: arg_names,
                si: arg_si,
                sentence: args_sentence,
            } = sensor_arguments(ctx, sensor);
            let args_field = if arg_si.is_empty() {
                quote!()
            } else {
                quote!(args: [#(#arg_si),*],)
            };
            let doc = doc(format!(
                "Corrects the belief with a reading of `{}` (in the units the spec declares).{args_sentence} A rejected reading leaves the belief untouched.",
                sensor.name
            ));
            let allow = (sensor.args.len() + 2 > 7)
                .then(|| quote!(#[allow(clippy::too_many_arguments)]));
            quote! {
                #doc
                #allow
                pub fn #name(&mut self, reading: &#reading_ty #(, #arg_names: #t)*) -> Result<#outcome, CorrectError> {
                    let sensor = #sensor_ty { tuning: &self.tuning, #args_field };
                    #target.correct(&sensor, &reading.si_vector())
                }
            }
        })
        .collect()
}

/// The accessors every estimator has.
fn tuning_accessors() -> TokenStream {
    quote! {
        /// The noise values in use.
        pub fn tuning(&self) -> &Tuning {
            &self.tuning
        }
        /// Replaces the noise values; takes effect from the next step.
        pub fn set_tuning(&mut self, tuning: Tuning) {
            self.tuning = tuning;
        }
    }
}

fn model_docs(ctx: &Context, sentence: String) -> TokenStream {
    let own = ctx.model.doc.iter().flat_map(|d| d.lines()).map(doc);
    let line = doc(sentence);
    quote!(#(#own)* #line)
}

fn grid_estimator(ctx: &Context, plan: &BayesPlan, grid: &GridPlan) -> TokenStream {
    let t = ctx.scalar_type();
    let d = names_usize(grid.axes.len());
    let states = &ctx.model.states;
    let constants: Vec<Ident> = states
        .iter()
        .map(|s| ident(&format!("{}_CELLS", s.name.to_ascii_uppercase())))
        .collect();
    let constant_items =
        grid.axes
            .iter()
            .zip(states)
            .zip(&constants)
            .map(|((axis, state), name)| {
                let count = names_usize(axis.count);
                let doc = doc(format!(
                    "Cells along `{}`: {} of {} {} from {} {} (SI).",
                    state.name,
                    axis.count,
                    axis.width,
                    state.unit.dimension,
                    axis.lo,
                    state.unit.dimension
                ));
                quote! {
                    #doc
                    pub const #name: usize = #count;
                }
            });
    let axes: Vec<TokenStream> = grid
        .axes
        .iter()
        .map(|axis| {
            let (lo, width) = (ctx.number(axis.lo), ctx.number(axis.width));
            quote!(Axis::new(#lo, #width)?)
        })
        .collect();
    let initial: Vec<(f64, Spread)> = plan.initial.iter().flatten().copied().collect();
    let means: Vec<TokenStream> = initial.iter().map(|(mean, _)| ctx.number(*mean)).collect();
    let shapes: Vec<TokenStream> = initial
        .iter()
        .map(|(_, spread)| noise_value(spread.shape, ctx.number(spread.width)))
        .collect();
    let (belief_type, construct, mean, covariance, probability) = if grid.axes.len() == 1 {
        let cells = &constants[0];
        let (axis, mean, shape) = (&axes[0], &means[0], &shapes[0]);
        (
            quote!(Grid1<#t, #cells>),
            quote!(Grid1::from_density(#axis, #mean, #shape, GridOptions::default())?),
            quote!(SVector::from([self.belief.mean()])),
            quote!(SMatrix::from_element(self.belief.histogram_variance())),
            quote!(self.belief.probability_between(lo[0], hi[0])),
        )
    } else {
        let (cx, cy) = (&constants[0], &constants[1]);
        let (ax, ay) = (&axes[0], &axes[1]);
        (
            quote!(Grid2<#t, #cx, #cy>),
            quote!(Grid2::from_density(#ax, #ay, SVector::from([#(#means),*]), [#(#shapes),*], GridOptions::default())?),
            quote!(self.belief.mean()),
            quote!(self.belief.histogram_covariance()),
            quote!(self.belief.probability_in((lo[0], hi[0]), (lo[1], hi[1]))),
        )
    };
    let statistics = quote! {
        /// The belief's mean (SI).
        pub fn state(&self) -> State {
            State::from_vector(&#mean)
        }
        /// The belief's standard deviation per state (SI).
        pub fn std_dev(&self) -> State {
            State::from_vector(&self.covariance().diagonal().map(<#t as ComplexField>::sqrt))
        }
        /// The belief's covariance, in SI units squared, ordered as the fields of `State`,
        /// with each cell's mass spread over its cell (a belief held in one cell still
        /// leaves the state anywhere in it).
        pub fn covariance(&self) -> SMatrix<#t, #d, #d> {
            #covariance
        }
        /// The probability that the state lies in the box from `lo` to `hi` (SI).
        pub fn probability_in(&self, lo: &State, hi: &State) -> #t {
            let (lo, hi) = (lo.vector(), hi.vector());
            #probability
        }
    };
    let corrections = corrections(ctx, quote!(self.belief), quote!(GridCorrection<#t>));
    let accessors = tuning_accessors();
    let docs = model_docs(
        ctx,
        format!(
            "Grid filter for `{}` over {} cells. Holds SI values; readings arrive in declared units.",
            ctx.model.name,
            grid.cells()
        ),
    );
    quote! {
        #(#constant_items)*
        #docs
        #[derive(Clone, Debug)]
        pub struct Estimator {
            belief: #belief_type,
            tuning: Tuning,
        }
        impl Estimator {
            /// An estimator starting from the spec's `initial` block (uniform over the range where it gives none), with the spec's tuning.
            pub fn new() -> Result<Estimator, GridError> {
                Estimator::with_tuning(Tuning::default())
            }
            /// An estimator starting from the spec's initial belief, with `tuning`.
            pub fn with_tuning(tuning: Tuning) -> Result<Estimator, GridError> {
                let belief = #construct;
                Ok(Estimator { belief, tuning })
            }
            /// Moves the belief over a step of `dt` seconds under `input`; a rejected step leaves the belief untouched.
            pub fn predict(&mut self, input: &Input, dt: #t) -> Result<GridPrediction<#t>, PredictError> {
                let dynamics = Dynamics { tuning: &self.tuning };
                self.belief.predict(&dynamics, &input.si_vector(), dt)
            }
            #(#corrections)*
            #statistics
            /// Writes the belief's local maxima holding at least `min_fraction_of_peak` of the highest cell's mass into `out`; returns how many there are (possibly more than fit).
            pub fn modes(&self, min_fraction_of_peak: #t, out: &mut [Mode<#t, #d>]) -> usize {
                self.belief.modes(min_fraction_of_peak, out)
            }
            /// The belief itself: cell masses, axes and support.
            pub fn belief(&self) -> &#belief_type {
                &self.belief
            }
            #accessors
        }
    }
}

fn particle_estimator(ctx: &Context, plan: &BayesPlan) -> TokenStream {
    let t = ctx.scalar_type();
    let n = names_usize(ctx.model.states.len());
    let count = names_usize(plan.particles);
    let threshold = ctx.number(plan.resample_below);
    let dynamics = if plan.sources.is_empty() {
        quote!(Dynamics)
    } else {
        quote!(Dynamics {
            tuning: &self.tuning
        })
    };
    let new = (plan.initial.iter().all(Option::is_some)).then(|| {
        let initial: Vec<(f64, Spread)> = plan.initial.iter().flatten().copied().collect();
        let means = initial.iter().map(|(mean, _)| ctx.number(*mean));
        let spreads = initial
            .iter()
            .map(|(_, spread)| noise_value(spread.shape, ctx.number(spread.width)));
        quote! {
            /// An estimator whose particles are drawn from the spec's `initial` block (uniform over the range where it gives none) with generator seed `seed`, with the spec's tuning.
            pub fn new(seed: u64) -> Result<Estimator, ParticleError> {
                Estimator::from_spread(SVector::from([#(#means),*]), [#(#spreads),*], Tuning::default(), seed)
            }
        }
    });
    let corrections = corrections(ctx, quote!(self.filter), quote!(ParticleCorrection<#t>));
    let accessors = tuning_accessors();
    let docs = model_docs(
        ctx,
        format!(
            "Particle filter for `{}` with {} particles. Holds SI values; readings arrive in declared units.",
            ctx.model.name, plan.particles
        ),
    );
    quote! {
        /// The number of particles.
        pub const PARTICLES: usize = #count;
        /// Resample when the effective sample size falls below this fraction of `PARTICLES`.
        pub const RESAMPLE_BELOW: #t = #threshold;
        #docs
        #[derive(Clone, Debug)]
        pub struct Estimator {
            filter: ParticleFilter<#t, #n, PARTICLES>,
            tuning: Tuning,
        }
        impl Estimator {
            #new
            /// An estimator whose particles are drawn normally about `mean` with independent standard deviations `std_dev` (both SI), with `tuning` and generator seed `seed`.
            pub fn with_initial(mean: State, std_dev: State, tuning: Tuning, seed: u64) -> Result<Estimator, ParticleError> {
                let spread = std_dev.to_array().map(|std_dev| Noise::Normal { std_dev });
                Estimator::from_spread(mean.vector(), spread, tuning, seed)
            }
            fn from_spread(mean: SVector<#t, #n>, spread: [Noise<#t>; #n], tuning: Tuning, seed: u64) -> Result<Estimator, ParticleError> {
                let options = ParticleOptions { resample_below: RESAMPLE_BELOW };
                let filter = ParticleFilter::from_noise(mean, spread, Pcg32::new(seed, 0), options)?;
                Ok(Estimator { filter, tuning })
            }
            /// Moves every particle over a step of `dt` seconds under `input`, sampling the motion noise; a rejected step leaves particles and generator untouched.
            pub fn predict(&mut self, input: &Input, dt: #t) -> Result<(), PredictError> {
                let dynamics = #dynamics;
                self.filter.predict(&dynamics, &input.si_vector(), dt)
            }
            #(#corrections)*
            /// The weighted mean of the particles (SI).
            pub fn state(&self) -> State {
                State::from_vector(&self.filter.mean())
            }
            /// The weighted standard deviation per state (SI).
            pub fn std_dev(&self) -> State {
                State::from_vector(&self.filter.covariance().diagonal().map(<#t as ComplexField>::sqrt))
            }
            /// The weighted covariance, in SI units squared, ordered as the fields of `State`.
            pub fn covariance(&self) -> SMatrix<#t, #n, #n> {
                self.filter.covariance()
            }
            /// The effective sample size, between 1 and `PARTICLES`.
            pub fn effective_size(&self) -> #t {
                self.filter.effective_size()
            }
            /// The weight of the particles in the box from `lo` to `hi` (SI).
            pub fn probability_in(&self, lo: &State, hi: &State) -> #t {
                self.filter.probability_in(&lo.vector(), &hi.vector())
            }
            /// The particles, weights and generator.
            pub fn filter(&self) -> &ParticleFilter<#t, #n, PARTICLES> {
                &self.filter
            }
            #accessors
        }
    }
}
