//! The public face of a generated module: imports, constants, the `State`, `Input`,
//! reading and `Tuning` structs, the `Estimator` and the private `Dynamics` type.
//!
//! Every public item and field carries a doc comment with its unit. The estimator holds
//! SI values; readings and sensor arguments arrive in the units the spec declares and
//! are multiplied by the declared unit's exact factor to SI.

use proc_macro2::{Ident, TokenStream};
use quote::quote;

use super::kernels::{construct, destructure, entry_ident};
use super::models::{self, runtime_field, usize_literal};
use super::names::{self, number};
use super::noise::white_states;
use super::Context;
use crate::ir::RuntimeMatrix;
use crate::back::bayes::{Shape, Spread};
use crate::model::{DeclaredUnit, Distribution, ProcessNoiseKind, SensorNoise};
use crate::options::Method;
use crate::stats;
use crate::units::{Base, Dimension, Rational};

impl Context<'_> {
    pub(crate) fn tuning_white(&self, state: usize) -> Ident {
        names::joined(&[&self.model.states[state].name, "white"])
    }

    pub(crate) fn tuning_step(&self, state: usize) -> Ident {
        let shape = self
            .model
            .process_noise
            .iter()
            .find_map(|p| match &p.kind {
                ProcessNoiseKind::PerStep(d) if p.state == state => Some(Spread::of(d).shape),
                _ => None,
            })
            .unwrap_or(Shape::Normal);
        let suffix = format!("step_{}", width_suffix(shape));
        names::joined(&[&self.model.states[state].name, &suffix])
    }

    pub(crate) fn tuning_input(&self, input: usize) -> Ident {
        let input = &self.model.inputs[input];
        let shape = input.noise.map_or(Shape::Normal, |d| Spread::of(&d).shape);
        names::joined(&[&input.name, width_suffix(shape)])
    }

    pub(crate) fn tuning_component(&self, sensor: usize, component: usize) -> Ident {
        let sensor = &self.model.sensors[sensor];
        let shape = match &sensor.noise {
            SensorNoise::PerComponent(list) => {
                list.get(component).map_or(Shape::Normal, |d| Spread::of(d).shape)
            }
            SensorNoise::Covariance(_) => Shape::Normal,
        };
        names::joined(&[
            &sensor.name,
            &sensor.components[component].name,
            width_suffix(shape),
        ])
    }

    pub(crate) fn tuning_covariance(&self, sensor: usize) -> Ident {
        names::joined(&[&self.model.sensors[sensor].name, "covariance"])
    }

    fn tuning_gate(&self, sensor: usize) -> Ident {
        names::joined(&[&self.model.sensors[sensor].name, "gate"])
    }

    fn gate_constant(&self, sensor: usize) -> Ident {
        let name = format!(
            "{}_GATE",
            self.model.sensors[sensor].name.to_ascii_uppercase()
        );
        Ident::new(&name, proc_macro2::Span::call_site())
    }

    pub(super) fn number(&self, value: f64) -> TokenStream {
        number(value, self.scalar).tokens
    }
}

/// The tuning-field suffix of a noise width: standard deviation or half-width.
fn width_suffix(shape: Shape) -> &'static str {
    match shape {
        Shape::Normal => "sigma",
        Shape::Triangle | Shape::Uniform => "half_width",
    }
}

/// "Standard deviation of", "Half-width of the triangle" or "Half-width of the uniform".
fn width_words(shape: Shape) -> &'static str {
    match shape {
        Shape::Normal => "Standard deviation of",
        Shape::Triangle => "Half-width of the triangle distribution of",
        Shape::Uniform => "Half-width of the uniform distribution of",
    }
}

pub(super) fn doc(text: impl AsRef<str>) -> TokenStream {
    let text = format!(" {}", text.as_ref());
    quote!(#[doc = #text])
}

/// Doc lines for a spec item's own doc comment, then `extra`.
pub(super) fn docs(own: &Option<String>, extra: String) -> TokenStream {
    let own = own.iter().flat_map(|d| d.lines()).map(doc);
    let extra = doc(extra);
    quote!(#(#own)* #extra)
}

/// "Unit: m" or "Unit: m (SI; the spec declares ft)".
pub(super) fn si_unit(unit: &DeclaredUnit) -> String {
    let si = unit.dimension.to_string();
    if unit.to_si == 1.0 {
        format!("Unit: {} (SI).", unit.text)
    } else {
        format!("Unit: {si} (SI; the spec declares `{}`).", unit.text)
    }
}

pub(super) fn amplitude_dimension(state: &Dimension) -> String {
    Dimension::base(Base::Time)
        .pow(Rational::HALF)
        .and_then(|root| state.div(&root))
        .map_or_else(|| format!("{state} s^-1/2"), |d| d.to_string())
}

/// `value * factor`, or `value` alone when the factor is one.
pub(super) fn to_si(ctx: &Context, value: TokenStream, unit: &DeclaredUnit) -> TokenStream {
    if unit.to_si == 1.0 {
        value
    } else {
        let factor = ctx.number(unit.to_si);
        quote!(#value * #factor)
    }
}

/// Emits every item of the module.
pub(crate) fn emit(ctx: &Context) -> TokenStream {
    let models = models::emit(ctx);
    let has_sensors = !ctx.model.sensors.is_empty();
    let mut nalgebra = vec![quote!(ArrayStorage), quote!(ComplexField), quote!(Const)];
    if models.traits.real {
        nalgebra.push(quote!(RealField));
    }
    nalgebra.extend([quote!(SMatrix), quote!(SVector)]);
    let mut runtime = Vec::new();
    if has_sensors {
        runtime.push(quote!(CorrectError));
    }
    runtime.extend([quote!(Health), quote!(InitError)]);
    if has_sensors {
        runtime.push(quote!(Innovation));
    }
    runtime.extend([quote!(KalmanFilter), quote!(PredictError)]);
    if ctx.options.method == Method::Ukf {
        runtime.push(quote!(UnscentedWeights));
    }
    let imports = quote! {
        use reckon_runtime::nalgebra::{#(#nalgebra),*};
        use reckon_runtime::{#(#runtime),*};
    };
    let constants = constants(ctx);
    let state = state_struct(ctx);
    let input = input_struct(ctx);
    let readings = (0..ctx.model.sensors.len()).map(|s| reading_struct(ctx, s));
    let tuning = tuning_struct(ctx);
    let estimator = estimator(ctx, &models);
    let dynamics = dynamics(ctx, &models);
    let model_items = models.items;
    quote! {
        #imports
        #constants
        #state
        #input
        #(#readings)*
        #tuning
        #estimator
        #dynamics
        #model_items
    }
}

fn constants(ctx: &Context) -> TokenStream {
    let t = ctx.scalar_type();
    let gates = ctx
        .model
        .sensors
        .iter()
        .enumerate()
        .filter_map(|(index, sensor)| {
            let gate = sensor.gate?;
            let dof = sensor.components.len();
            // Checked before emission: the probability is in (0, 1), so a quantile exists.
            let threshold = stats::chi2_quantile(gate.probability, dof as u32).unwrap_or(f64::NAN);
            let name = ctx.gate_constant(index);
            let value = ctx.number(threshold);
            let doc = doc(format!(
                "Default innovation gate of sensor `{}`: the {} % quantile of the chi-square distribution with {dof} degrees of freedom (computed at build time), compared with the normalised innovation squared.",
                sensor.name,
                percent(gate.probability)
            ));
            Some(quote! {
                #doc
                pub const #name: #t = #value;
            })
        });
    let weights = if ctx.options.method == Method::Ukf {
        let params = ctx.options.unscented;
        let n = ctx.model.states.len();
        // Checked before emission: the parameters give valid weights.
        let weights = reckon_runtime::UnscentedWeights::new(
            &reckon_runtime::UnscentedParams {
                alpha: params.alpha,
                beta: params.beta,
                kappa: params.kappa,
            },
            n,
        )
        .ok();
        weights.map(|w| {
            let doc = doc(format!(
                "Sigma-point weights for alpha = {}, beta = {}, kappa = {} (computed at build time).",
                params.alpha, params.beta, params.kappa
            ));
            let dimension = usize_literal(n);
            let (mean_center, covariance_center, outer, spread) = (
                ctx.number(w.mean_center),
                ctx.number(w.covariance_center),
                ctx.number(w.outer),
                ctx.number(w.spread),
            );
            quote! {
                #doc
                const WEIGHTS: UnscentedWeights<#t> = UnscentedWeights {
                    dimension: #dimension,
                    mean_center: #mean_center,
                    covariance_center: #covariance_center,
                    outer: #outer,
                    spread: #spread,
                };
            }
        })
    } else {
        None
    };
    quote! {
        #(#gates)*
        #weights
    }
}

/// A probability as a percentage without the round-off of the division by 100
/// (`0.9990000000000001` reads `99.9`).
fn percent(probability: f64) -> String {
    let text = format!("{:.9}", probability * 100.0);
    text.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// `to_array` and `from_array`: the fields in declaration order, for logging and for
/// code that handles every estimator alike.
fn array_conversions(t: &TokenStream, ty: &Ident, fields: &[Ident]) -> TokenStream {
    let n = usize_literal(fields.len());
    quote! {
        /// The fields in declaration order.
        pub fn to_array(self) -> [#t; #n] {
            [#(self.#fields),*]
        }
        /// The value whose fields, in declaration order, are `values`.
        pub fn from_array(values: [#t; #n]) -> #ty {
            let [#(#fields),*] = values;
            #ty { #(#fields),* }
        }
    }
}

/// The `from_vector` and `vector` conversions of a struct with one field per entry.
fn vector_conversions(t: &TokenStream, ty: &Ident, fields: &[Ident]) -> TokenStream {
    let n = usize_literal(fields.len());
    let arrays = array_conversions(t, ty, fields);
    quote! {
        #arrays
        fn vector(&self) -> SVector<#t, #n> {
            SVector::from(self.to_array())
        }
        fn from_vector(vector: &SVector<#t, #n>) -> #ty {
            let [[#(#fields),*]] = vector.data.0;
            #ty { #(#fields),* }
        }
    }
}

pub(super) fn state_struct(ctx: &Context) -> TokenStream {
    let t = ctx.scalar_type();
    let states = &ctx.model.states;
    let fields: Vec<Ident> = states.iter().map(|s| names::ident(&s.name)).collect();
    let declarations = states.iter().zip(&fields).map(|(state, field)| {
        let wrap = if state.wrap {
            " Wrapped to (-pi, pi]."
        } else {
            ""
        };
        let docs = docs(&state.doc, format!("{}{wrap}", si_unit(&state.unit)));
        quote! {
            #docs
            pub #field: #t,
        }
    });
    let accessors = states
        .iter()
        .zip(&fields)
        .filter(|(state, _)| state.unit.to_si != 1.0)
        .map(|(state, field)| {
            let name = names::joined(&[&state.name, "in_declared_unit"]);
            let factor = ctx.number(state.unit.to_si);
            let doc = doc(format!(
                "`{}` in `{}`, the unit the spec declares.",
                state.name, state.unit.text
            ));
            quote! {
                #doc
                pub fn #name(&self) -> #t {
                    self.#field / #factor
                }
            }
        });
    let ty = Ident::new("State", proc_macro2::Span::call_site());
    let conversions = vector_conversions(&t, &ty, &fields);
    let doc = doc(format!(
        "A state of `{}`: the estimate's mean, or per-component standard deviations, in SI units.",
        ctx.model.name
    ));
    quote! {
        #doc
        #[derive(Clone, Copy, Debug, Default, PartialEq)]
        pub struct State {
            #(#declarations)*
        }
        impl State {
            #conversions
            #(#accessors)*
        }
    }
}

/// A struct of values in declared units with its conversion to an SI vector.
fn declared_struct<'a>(
    ctx: &Context,
    ty: &Ident,
    doc_text: String,
    members: impl Iterator<Item = (&'a str, &'a Option<String>, &'a DeclaredUnit, bool)>,
) -> TokenStream {
    let t = ctx.scalar_type();
    let mut declarations = Vec::new();
    let mut conversions = Vec::new();
    let mut fields = Vec::new();
    for (name, own_doc, unit, wrap) in members {
        let field = names::ident(name);
        fields.push(field.clone());
        let wrap = if wrap { " An angle." } else { "" };
        let docs = docs(
            own_doc,
            format!("Unit: {} (as the spec declares).{wrap}", unit.text),
        );
        declarations.push(quote! {
            #docs
            pub #field: #t,
        });
        conversions.push(to_si(ctx, quote!(self.#field), unit));
    }
    let len = usize_literal(conversions.len());
    let arrays = array_conversions(&t, ty, &fields);
    let doc = doc(doc_text);
    quote! {
        #doc
        #[derive(Clone, Copy, Debug, Default, PartialEq)]
        pub struct #ty {
            #(#declarations)*
        }
        impl #ty {
            #arrays
            fn si_vector(&self) -> SVector<#t, #len> {
                SVector::from([#(#conversions),*])
            }
        }
    }
}

pub(super) fn input_struct(ctx: &Context) -> TokenStream {
    let ty = Ident::new("Input", proc_macro2::Span::call_site());
    let members = ctx
        .model
        .inputs
        .iter()
        .map(|u| (u.name.as_str(), &u.doc, &u.unit, false));
    declared_struct(
        ctx,
        &ty,
        format!(
            "The inputs of `{}` over a step, in the units the spec declares.",
            ctx.model.name
        ),
        members,
    )
}

pub(super) fn reading_struct(ctx: &Context, index: usize) -> TokenStream {
    let sensor = &ctx.model.sensors[index];
    let ty = names::type_ident(&sensor.name, "Reading");
    let members = sensor
        .components
        .iter()
        .map(|c| (c.name.as_str(), &c.doc, &c.unit, c.wrap));
    let own = sensor
        .doc
        .as_deref()
        .map_or(String::new(), |d| format!("{d} "));
    declared_struct(
        ctx,
        &ty,
        format!(
            "{own}A reading of sensor `{}`, in the units the spec declares.",
            sensor.name
        ),
        members,
    )
}

struct TuningField {
    name: Ident,
    ty: TokenStream,
    default: TokenStream,
    doc: String,
}

fn tuning_fields(ctx: &Context) -> Vec<TuningField> {
    let t = ctx.scalar_type();
    let model = ctx.model;
    let mut fields = Vec::new();
    let scalar = |name: Ident, value: f64, doc: String| TuningField {
        name,
        ty: t.clone(),
        default: ctx.number(value),
        doc,
    };
    for noise in &model.process_noise {
        let state = &model.states[noise.state];
        match &noise.kind {
            ProcessNoiseKind::White { amplitude } => fields.push(scalar(
                ctx.tuning_white(noise.state),
                *amplitude,
                format!(
                    "Amplitude (square root of the power spectral density) of the white noise on the rate of `{}`. Unit: {} (SI).",
                    state.name,
                    amplitude_dimension(&state.unit.dimension)
                ),
            )),
            ProcessNoiseKind::PerStep(distribution) => {
                let spread = Spread::of(distribution);
                fields.push(scalar(
                    ctx.tuning_step(noise.state),
                    spread.width,
                    format!(
                        "{} the noise added to `{}` each step. Unit: {} (SI).",
                        width_words(spread.shape),
                        state.name,
                        state.unit.dimension
                    ),
                ))
            }
        }
    }
    for (index, input) in model.inputs.iter().enumerate() {
        if let Some(distribution) = &input.noise {
            let spread = Spread::of(distribution);
            fields.push(scalar(
                ctx.tuning_input(index),
                spread.width,
                format!(
                    "{} the noise on input `{}`. Unit: {} (SI).",
                    width_words(spread.shape),
                    input.name,
                    input.unit.dimension
                ),
            ));
        }
    }
    for (index, sensor) in model.sensors.iter().enumerate() {
        match &sensor.noise {
            SensorNoise::PerComponent(list) => {
                for (component_index, (component, distribution)) in
                    sensor.components.iter().zip(list).enumerate()
                {
                    let spread = Spread::of(distribution);
                    fields.push(scalar(
                        ctx.tuning_component(index, component_index),
                        spread.width,
                        format!(
                            "{} the reading noise of `{}.{}`. Unit: {} (SI).",
                            width_words(spread.shape),
                            sensor.name,
                            component.name,
                            component.unit.dimension
                        ),
                    ));
                }
            }
            SensorNoise::Covariance(rows) => {
                let m = usize_literal(sensor.components.len());
                let rows = rows.iter().map(|row| {
                    let cells = row.iter().map(|&v| ctx.number(v));
                    quote!([#(#cells),*])
                });
                let units: Vec<String> = sensor
                    .components
                    .iter()
                    .map(|c| c.unit.dimension.to_string())
                    .collect();
                fields.push(TuningField {
                    name: ctx.tuning_covariance(index),
                    ty: quote!([[#t; #m]; #m]),
                    default: quote!([#(#rows),*]),
                    doc: format!(
                        "Reading-noise covariance of `{}`, row by row; entry (i, j) has unit u_i u_j with u = [{}] (SI).",
                        sensor.name,
                        units.join(", ")
                    ),
                });
            }
        }
        if sensor.gate.is_some() && ctx.options.method.is_kalman() {
            let constant = ctx.gate_constant(index);
            fields.push(TuningField {
                name: ctx.tuning_gate(index),
                ty: t.clone(),
                default: quote!(#constant),
                doc: format!(
                    "Innovation gate of `{}`: readings whose normalised innovation squared exceeds it are rejected. Dimensionless.",
                    sensor.name
                ),
            });
        }
    }
    fields
}

pub(super) fn tuning_struct(ctx: &Context) -> TokenStream {
    let fields = tuning_fields(ctx);
    let declarations = fields.iter().map(|f| {
        let doc = doc(&f.doc);
        let (name, ty) = (&f.name, &f.ty);
        quote! {
            #doc
            pub #name: #ty,
        }
    });
    let defaults = fields.iter().map(|f| {
        let (name, value) = (&f.name, &f.default);
        quote!(#name: #value,)
    });
    quote! {
        /// Noise and gate values the firmware may change at run time (SI units).
        #[derive(Clone, Copy, Debug, PartialEq)]
        pub struct Tuning {
            #(#declarations)*
        }
        impl Default for Tuning {
            /// The values the spec gives.
            fn default() -> Tuning {
                Tuning {
                    #(#defaults)*
                }
            }
        }
    }
}

/// The expression building `Dynamics` for a step of `dt`.
fn dynamics_value(ctx: &Context, models: &models::Models) -> TokenStream {
    let needs_tuning = models.dynamics_reads_tuning || !white_states(ctx.model).is_empty();
    if !models.runtime.is_empty() {
        if needs_tuning {
            quote!(Dynamics::discretised(&self.tuning, dt))
        } else {
            quote!(Dynamics::discretised(dt))
        }
    } else if models.dynamics_reads_tuning {
        quote!(Dynamics {
            tuning: &self.tuning
        })
    } else {
        quote!(Dynamics)
    }
}

fn estimator(ctx: &Context, models: &models::Models) -> TokenStream {
    let t = ctx.scalar_type();
    let model = ctx.model;
    let n = usize_literal(model.states.len());
    let ukf = ctx.options.method == Method::Ukf;

    let new = if model.initial.iter().all(Option::is_some) && !model.initial.is_empty() {
        let fields: Vec<Ident> = model.states.iter().map(|s| names::ident(&s.name)).collect();
        let beliefs: Vec<&Distribution> = model.initial.iter().flatten().collect();
        let means = beliefs.iter().map(|d| ctx.number(d.mean()));
        let sigmas = beliefs.iter().map(|d| ctx.number(d.variance().sqrt()));
        let fields_again = fields.clone();
        quote! {
            /// An estimator starting from the spec's `initial` block, with the spec's tuning.
            pub fn new() -> Result<Estimator, InitError> {
                Estimator::with_initial(
                    State { #(#fields: #means),* },
                    State { #(#fields_again: #sigmas),* },
                    Tuning::default(),
                )
            }
        }
    } else {
        quote!()
    };
    let any_wrap = model.states.iter().any(|s| s.wrap);
    let (filter_binding, angles) = if any_wrap {
        let mask = model.states.iter().map(|s| s.wrap);
        (
            quote!(let mut filter),
            quote!(filter.set_angle_states(SVector::from([#(#mask),*]))?;),
        )
    } else {
        (quote!(let filter), quote!())
    };
    let dynamics = dynamics_value(ctx, models);
    let predict_call = if ukf {
        quote!(self
            .filter
            .predict_unscented(&dynamics, &input.si_vector(), dt, &WEIGHTS))
    } else {
        quote!(self.filter.predict(&dynamics, &input.si_vector(), dt))
    };
    let corrections = model.sensors.iter().enumerate().map(|(index, sensor)| {
        let name = names::joined(&["correct", &sensor.name]);
        let reading_ty = names::type_ident(&sensor.name, "Reading");
        let sensor_ty = names::type_ident(&sensor.name, "Sensor");
        let m = usize_literal(sensor.components.len());
        let arg_names: Vec<Ident> = sensor
            .args
            .iter()
            .map(|a| match a.name.as_str() {
                "reading" | "sensor" | "args" | "gate" => names::joined(&[&a.name, "arg"]),
                other => names::ident(other),
            })
            .collect();
        let arg_si = sensor
            .args
            .iter()
            .zip(&arg_names)
            .map(|(a, ident)| to_si(ctx, quote!(#ident), &a.unit));
        let arg_docs: Vec<String> = sensor
            .args
            .iter()
            .map(|a| format!("`{}` in `{}`", a.name, a.unit.text))
            .collect();
        let args_sentence = if arg_docs.is_empty() {
            String::new()
        } else {
            format!(" Arguments: {}.", arg_docs.join(", "))
        };
        let gate = if sensor.gate.is_some() {
            let field = ctx.tuning_gate(index);
            quote!(Some(self.tuning.#field))
        } else {
            quote!(None)
        };
        let call = if ukf {
            quote!(self.filter.correct_unscented(&sensor, &reading.si_vector(), &args, #gate, &WEIGHTS))
        } else {
            quote!(self.filter.correct(&sensor, &reading.si_vector(), &args, #gate))
        };
        let doc = doc(format!(
            "Corrects the estimate with a reading of `{}` (in the units the spec declares).{args_sentence} Returns the innovation in SI units; a rejected reading leaves the estimate untouched.",
            sensor.name
        ));
        let allow = if sensor.args.len() + 2 > 7 {
            // Spec-defined sensor arguments become parameters one to one.
            quote!(#[allow(clippy::too_many_arguments)])
        } else {
            quote!()
        };
        quote! {
            #doc
            #allow
            pub fn #name(&mut self, reading: &#reading_ty #(, #arg_names: #t)*) -> Result<Innovation<#t, Const<#m>>, CorrectError<#t>> {
                let sensor = #sensor_ty { tuning: &self.tuning };
                let args = [#(#arg_si),*];
                #call
            }
        }
    });
    let model_doc = model.doc.iter().flat_map(|d| d.lines()).map(doc);
    let doc_line = doc(format!(
        "{} for `{}` over {} states. Holds SI values; readings arrive in declared units.",
        super::method_title(ctx.options.method)
            .split_at(1)
            .0
            .to_ascii_uppercase()
            + super::method_title(ctx.options.method).split_at(1).1,
        model.name,
        model.states.len()
    ));
    quote! {
        #(#model_doc)*
        #doc_line
        #[derive(Clone, Debug)]
        pub struct Estimator {
            filter: KalmanFilter<#t, Const<#n>>,
            tuning: Tuning,
        }
        impl Estimator {
            #new
            /// An estimator starting from `mean` with independent standard deviations `std_dev` (both SI), with `tuning`.
            pub fn with_initial(mean: State, std_dev: State, tuning: Tuning) -> Result<Estimator, InitError> {
                let sigma = std_dev.vector();
                #filter_binding = KalmanFilter::new(mean.vector(), SMatrix::from_diagonal(&sigma.component_mul(&sigma)))?;
                #angles
                Ok(Estimator { filter, tuning })
            }
            /// Moves the estimate over a step of `dt` seconds under `input`; a rejected step leaves the estimate untouched.
            pub fn predict(&mut self, input: &Input, dt: #t) -> Result<(), PredictError> {
                let dynamics = #dynamics;
                #predict_call
            }
            #(#corrections)*
            /// The estimate's mean (SI).
            pub fn state(&self) -> State {
                State::from_vector(self.filter.state())
            }
            /// The standard deviation of each state component (SI).
            pub fn std_dev(&self) -> State {
                State::from_vector(&self.filter.covariance().diagonal().map(<#t as ComplexField>::sqrt))
            }
            /// The covariance of the estimate, in SI units squared, ordered as the fields of `State`.
            pub fn covariance(&self) -> &SMatrix<#t, #n, #n> {
                self.filter.covariance()
            }
            /// What the filter has been through: committed and rejected steps.
            pub fn health(&self) -> &Health {
                self.filter.health()
            }
            /// The noise and gate values in use.
            pub fn tuning(&self) -> &Tuning {
                &self.tuning
            }
            /// Replaces the noise and gate values; takes effect from the next step.
            pub fn set_tuning(&mut self, tuning: Tuning) {
                self.tuning = tuning;
            }
        }
    }
}

fn dynamics(ctx: &Context, models: &models::Models) -> TokenStream {
    let t = ctx.scalar_type();
    let size = ctx.lowered.state_count;
    let n = usize_literal(size);
    let stores_tuning = models.dynamics_reads_tuning;
    let lifetime = if stores_tuning {
        quote!(<'a>)
    } else {
        quote!()
    };
    let mut fields = Vec::new();
    let mut values = Vec::new();
    if stores_tuning {
        fields.push(quote!(tuning: &'a Tuning,));
        values.push(quote!(tuning));
    }
    for &matrix in &models.runtime {
        let field = Ident::new(runtime_field(matrix), proc_macro2::Span::call_site());
        fields.push(quote!(#field: SMatrix<#t, #n, #n>,));
        values.push(quote!(#field));
    }
    let doc = quote!(#[doc = " The motion model over one step, for the runtime's filters."]);
    let declaration = if fields.is_empty() {
        quote!(#doc struct Dynamics;)
    } else {
        quote!(#doc struct Dynamics #lifetime { #(#fields)* })
    };
    if models.runtime.is_empty() {
        return declaration;
    }
    let Some(system) = ctx.lowered.discretisation.linear_system.as_ref() else {
        return declaration;
    };
    let zero = ctx.number(0.0);
    let a = construct(size, size, |r, c| ctx.number(system.a[r * size + c]));
    let uses = |m| models.runtime.contains(&m);
    let reads_densities = !white_states(ctx.model).is_empty();
    let tuning_param = if stores_tuning {
        quote!(tuning: &'a Tuning,)
    } else if reads_densities {
        quote!(tuning: &Tuning,)
    } else {
        quote!()
    };
    let pattern = |m: RuntimeMatrix| {
        if uses(m) {
            let field = Ident::new(runtime_field(m), proc_macro2::Span::call_site());
            quote!(#field)
        } else {
            quote!(_)
        }
    };
    let (phi_pattern, qd_pattern) = (
        pattern(RuntimeMatrix::Transition),
        pattern(RuntimeMatrix::ProcessNoise),
    );
    // Phi and Qd from one Van Loan exponential (with zero density when there is no
    // white noise), as the interpreter computes them.
    let white = white_states(ctx.model);
    let density = construct(size, size, |r, c| {
        if r == c && white.contains(&r) {
            let field = ctx.tuning_white(r);
            quote!(tuning.#field * tuning.#field)
        } else {
            zero.clone()
        }
    });
    let block = usize_literal(2 * size);
    let exponentials = quote! {
        let a: SMatrix<#t, #n, #n> = #a;
        let density: SMatrix<#t, #n, #n> = #density;
        let (#phi_pattern, #qd_pattern) = match reckon_runtime::expm::van_loan(&a, &density, dt, Const::<#block>) {
            Ok(discretised) => (discretised.transition, discretised.noise),
            Err(_) => (nan, nan),
        };
    };
    let gamma = if uses(RuntimeMatrix::InputGain) {
        // Gamma is the top-right block of exp([[A, I], [0, 0]] dt).
        let block_size = 2 * size;
        let block_n = usize_literal(block_size);
        let block = construct(block_size, block_size, |r, c| {
            if r < size && c < size {
                let value = system.a[r * size + c];
                if value == 0.0 {
                    zero.clone()
                } else if value == 1.0 {
                    quote!(dt)
                } else {
                    let value = ctx.number(value);
                    quote!(#value * dt)
                }
            } else if r < size && c == r + size {
                quote!(dt)
            } else {
                zero.clone()
            }
        });
        let read = destructure(quote!(exponential), "e", block_size, block_size, |r, c| {
            r < size && c >= size
        });
        let gamma = construct(size, size, |r, c| {
            let ident = entry_ident("e", r, c + size);
            quote!(#ident)
        });
        quote! {
            let block: SMatrix<#t, #block_n, #block_n> = #block;
            let gamma = match reckon_runtime::expm::expm(&block) {
                Ok(exponential) => {
                    #read
                    #gamma
                }
                Err(_) => nan,
            };
        }
    } else {
        quote!()
    };
    let nan = names::number(f64::NAN, ctx.scalar).tokens;
    quote! {
        #declaration
        impl #lifetime Dynamics #lifetime {
            /// The run-time matrices of the linear motion over `dt`; NaN entries (which
            /// the filter rejects as a non-finite result) when the exponential fails.
            fn discretised(#tuning_param dt: #t) -> Dynamics #lifetime {
                let nan = SMatrix::from_element(#nan);
                #exponentials
                #gamma
                Dynamics { #(#values),* }
            }
        }
    }
}
