//! The catalogue of diagnostic codes: identifier, default severity, title, and the
//! long explanation with an example that `reckon explain CODE` prints.
//!
//! Codes are stable: never renumber or reuse one. Ranges:
//! `E01xx` syntax, `E02xx` names and structure, `E03xx` units and dimensions,
//! `E04xx` noise and distributions, `E05xx` sensors and gates, `E06xx` methods and
//! back ends, `E07xx` project files, `W08xx` warnings.
//! Every code must have a test in the invalid-spec corpus (a test enforces it).

use super::Severity;

/// The documentation of a diagnostic code.
#[derive(Debug, PartialEq, Eq, Hash)]
pub struct CodeInfo {
    /// Stable identifier such as `E0301`.
    pub id: &'static str,
    /// Default severity.
    pub severity: Severity,
    /// Short title.
    pub title: &'static str,
    /// Long explanation with a small example (plain text, may span lines).
    pub explanation: &'static str,
}

/// A diagnostic code: a pointer-sized handle to its [`CodeInfo`] (fields readable
/// through `Deref`, e.g. `code.id`), so diagnostics stay small.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Code(&'static CodeInfo);

impl std::ops::Deref for Code {
    type Target = CodeInfo;

    fn deref(&self) -> &CodeInfo {
        self.0
    }
}

impl serde::Serialize for Code {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.id)
    }
}

/// Looks a code up by identifier (case-insensitive).
pub fn find(id: &str) -> Option<Code> {
    ALL.iter().copied().find(|c| c.id.eq_ignore_ascii_case(id))
}

macro_rules! codes {
    ($($name:ident = $id:literal, $sev:ident, $title:literal, $expl:literal;)*) => {
        $(
            #[doc = $title]
            pub const $name: Code = Code(&CodeInfo {
                id: $id,
                severity: Severity::$sev,
                title: $title,
                explanation: $expl,
            });
        )*
        /// Every code, in catalogue order.
        pub const ALL: &[Code] = &[$($name),*];
    };
}

codes! {
    // Entries are added by each stage as it grows; keep ids unique and sorted.
    INTERNAL = "E0001", Error, "internal error in reckon",
        "The compiler reached a state it believed impossible. This is a bug in reckon, not in your spec.\nPlease report it with the spec that triggers it.";
    SYNTAX = "E0101", Error, "syntax error",
        "The text does not follow the grammar of a spec at this point. The message names what\nwas expected there.\n\nExample:\n    state {\n      x m        // a colon is missing\n    }\nFix: `x : m`.";
    NOT_UTF8 = "E0102", Error, "the file is not valid UTF-8",
        "Specs are UTF-8 text. The byte at the reported offset does not start a valid UTF-8\nsequence, which usually means the file is binary or was saved in a legacy encoding.\n\nFix: save the file as UTF-8 (units such as `µs` need it).";
    TOO_DEEP = "E0103", Error, "nesting too deep",
        "Brackets, powers or operators nest more deeply than the checker accepts (256 levels).\nNo real model needs this; it usually means generated or damaged text.\n\nExample:\n    const c = ((((((...1...))))))\nFix: split the expression with named constants.";
    NUMBER_OUT_OF_RANGE = "E0104", Error, "number out of range",
        "A number (or a unit exponent) is too large to represent: beyond about 1.8e308 for\nvalues, beyond 64-bit integers for exponents.\n\nExample:\n    const c = 1e400 m\nFix: check the exponent, or use a larger unit.";
    INVALID_CHARACTER = "E0105", Error, "unexpected character",
        "The text contains a character that is not part of the language, such as a control\ncharacter or a symbol with no meaning in a spec.\n\nExample:\n    const c = 2 m \u{0007}\nFix: remove the character; specs are plain text.";
    UNKNOWN_NAME = "E0201", Error, "unknown name",
        "An expression uses a name that is not a state, input, constant or sensor argument in\nscope here, nor one of the built-in names `pi` and `dt`.\n\nExample:\n    east' = sped * cos(heading)\nFix: `speed`; the message suggests the closest known name.";
    DUPLICATE_NAME = "E0202", Error, "duplicate name",
        "Two declarations use the same name. States, inputs and constants share one namespace;\nwithin a sensor, its arguments and reading components share another, and sensors\nmust have distinct names.\n\nExample:\n    state { x : m  x : m/s }\nFix: rename one of them.";
    MISSING_MODEL = "E0203", Error, "missing `model` declaration",
        "Every spec names its model once, with `model name`, usually on the first line.\n\nExample:\n    model rail_cart\n    state { x : m }";
    DUPLICATE_BLOCK = "E0204", Error, "block given twice",
        "A spec has at most one `model` line and one each of the `state`, `input`, `motion`,\n`process` and `initial` blocks (sensors may be many).\n\nExample:\n    state { x : m }\n    state { v : m/s }\nFix: merge them: `state { x : m  v : m/s }`.";
    MISSING_MOTION = "E0205", Error, "missing `motion` block",
        "A spec says how its state moves, with `motion continuous { ... }` (rates) or\n`motion discrete { ... }` (next state). States left out of the block keep a zero rate\n(continuous) or their value (discrete), but the block itself is required.\n\nExample:\n    motion continuous { x' = v }";
    NO_STATES = "E0206", Error, "no states",
        "A spec needs a `state` block with at least one variable.\n\nExample:\n    state { x : m  v : m/s }";
    NOT_A_STATE = "E0207", Error, "target is not a state",
        "The left side of a motion equation, and the subject of a `process` or `initial`\nstatement, must be a state variable.\n\nExample:\n    input { accel : m/s^2 }\n    process { accel ~ normal(1 m/s^2) }\nFix: noise on an input belongs on its declaration: `accel : m/s^2 ~ normal(1 m/s^2)`.";
    DUPLICATE_TARGET = "E0208", Error, "state given twice",
        "A state has at most one motion equation, one process-noise term and one initial\nbelief.\n\nExample:\n    motion continuous { x' = v  x' = 2 * v }\nFix: keep one equation.";
    RATE_IN_DISCRETE = "E0209", Error, "rate equation in discrete motion",
        "`x' = ...` gives a rate, which only continuous motion integrates. Discrete motion\ngives the next value: `x = x + v * dt`.\n\nExample:\n    motion discrete { x' = v }\nFix: `x = x + v * dt`, or switch to `motion continuous`.";
    VALUE_IN_CONTINUOUS = "E0210", Error, "next-value equation in continuous motion",
        "Continuous motion gives rates, written with a prime: `x' = v`. A plain `x = ...`\nbelongs in discrete motion.\n\nExample:\n    motion continuous { x = x + v * dt }\nFix: `x' = v`.";
    DT_OUTSIDE_DISCRETE = "E0211", Error, "`dt` outside discrete motion",
        "`dt`, the step length in seconds, exists only inside `motion discrete`. Continuous\nmotion gives rates, which the integrator multiplies by the step itself.\n\nExample:\n    motion continuous { x' = v * dt }\nFix: `x' = v`.";
    NOT_CONSTANT = "E0212", Error, "value must be constant",
        "Constants, range bounds, distribution parameters, covariance entries and gates are\nfixed numbers: they may use literals, earlier constants and `pi`, but not states,\ninputs, sensor arguments or `dt`.\n\nExample:\n    const reach = x + 2 m\nFix: use the state in the motion or sensor equations instead.";
    UNKNOWN_FUNCTION = "E0213", Error, "unknown function",
        "Only the built-in functions may be called: sin cos tan asin acos atan atan2 sqrt\nhypot exp ln abs min max.\n\nExample:\n    r : m = dist(x, y)\nFix: `hypot(x, y)`.";
    WRONG_ARITY = "E0214", Error, "wrong number of arguments",
        "A built-in function was called with the wrong number of arguments. atan2, hypot,\nmin and max take two; the others take one.\n\nExample:\n    b : rad = atan2(y)\nFix: `atan2(y, x)`.";
    RESERVED_NAME = "E0215", Error, "reserved name",
        "`pi`, `dt` and the built-in function names cannot be declared as states, inputs,\nconstants, arguments or components: every use would be ambiguous.\n\nExample:\n    state { dt : s }\nFix: choose another name, such as `elapsed`.";
    INPUT_IN_SENSOR = "E0216", Error, "input used in a sensor reading",
        "A predicted reading depends on the state, constants and the sensor's own arguments.\nControl inputs belong to the motion model.\n\nExample:\n    sensor odo { v : m/s = speed + throttle }\nFix: if the reading needs a value known only when it arrives, declare it as an\nargument: `sensor odo(throttle: 1) { ... }`.";
    INVALID_RANGE = "E0217", Error, "invalid grid range",
        "A state's range `in lo .. hi by cell` needs `lo < hi` and, when given, a cell size\ngreater than zero and no larger than the range.\n\nExample:\n    x : m in 10 m .. 0 m\nFix: `x : m in 0 m .. 10 m`.";
    UNKNOWN_UNIT = "E0301", Error, "unknown unit",
        "A unit symbol is not in the catalogue (SI units with prefixes, accepted non-SI units\nand common trade units). Symbols are case-sensitive.\n\nExample:\n    speed : M/s\nFix: `m/s`; the message suggests the closest symbols.";
    MISMATCHED_DIMENSIONS = "E0302", Error, "mismatched dimensions",
        "`+`, `-`, min, max, hypot and atan2 combine values of one dimension (their units\nmay differ: `1 m + 1 ft` is fine and is converted exactly).\n\nExample:\n    east + speed        // m + m/s\nFix: multiply the speed by a time, or fix the formula.";
    MOTION_DIMENSION = "E0303", Error, "motion equation has the wrong dimension",
        "In continuous motion, `x' = e` needs `e` in the unit of x per second; in discrete\nmotion, `x = e` needs `e` in the unit of x.\n\nExample:\n    state { east : m  speed : m/s }\n    motion continuous { east' = speed * 2 s }\nFix: `east' = speed`.";
    TRIG_ARGUMENT = "E0304", Error, "trigonometric argument is not an angle",
        "sin, cos and tan take an angle (or a plain number, read as radians).\n\nExample:\n    sin(speed)\nFix: pass an angle such as `heading`.";
    NEEDS_DIMENSIONLESS = "E0305", Error, "argument must be a plain number",
        "exp, ln, asin, acos and atan take dimensionless values (a ratio of like quantities).\n\nExample:\n    ln(pressure)\nFix: `ln(pressure / 1013.25 hPa)`.";
    BAD_EXPONENT = "E0306", Error, "invalid exponent",
        "The exponent of `^` must be a dimensionless constant, and a rational number (such as\n2, -1 or 0.5) when the base has a dimension, so the result has a dimension too. Unit\nexponents must have a non-zero denominator.\n\nExample:\n    x^speed\nFix: use a constant exponent: `x^2`.";
    ANGLE_CYCLE_CONFLICT = "E0307", Error, "cycles mixed with radians",
        "SI treats rad and Hz's cycles as plain numbers, but one cycle is 2 pi radians. A value\ncounting cycles (Hz, rpm, rev) meeting one counting angle (rad/s, deg/s) is almost\nalways a missing factor of 2 pi.\n\nExample:\n    state { spin : rad/s }\n    sensor tach { f : Hz = spin }\nFix: `f : Hz = spin / (2 * pi)`, or declare the reading in rad/s or rpm with a `rev`-based formula.";
    WRAP_NOT_ANGLE = "E0308", Error, "`wrap` on a value that is not an angle",
        "`wrap` makes residuals and means wrap around the circle, which only makes sense for\nangles.\n\nExample:\n    east : m wrap\nFix: remove `wrap`, or declare the unit as an angle (rad, deg).";
    READING_DIMENSION = "E0309", Error, "reading has the wrong dimension",
        "A reading component's expression must have the dimension of its declared unit (the\nunits may differ: a conversion is inserted).\n\nExample:\n    rate : deg/s = heading\nFix: `rate : deg/s = yaw_rate`.";
    DIMENSION_OVERFLOW = "E0310", Error, "dimension exponent too large",
        "Multiplying or raising units pushed an exponent beyond what the checker represents.\n\nExample:\n    const c = (2 m)^100000000000";
    RANGE_DIMENSION = "E0311", Error, "range bound has the wrong dimension",
        "The bounds and cell size of a state's range are in the state's unit.\n\nExample:\n    x : m in 0 s .. 10 s\nFix: `x : m in 0 m .. 10 m`.";
    NOT_FINITE = "E0312", Error, "constant is not a finite number",
        "A constant expression evaluates to infinity or to no number at all, for example a\ndivision by zero, `ln(0)` or `sqrt(-1)`.\n\nExample:\n    const k = 1 / 0\nFix: check the formula.";
    UNKNOWN_DISTRIBUTION = "E0401", Error, "unknown distribution",
        "Distributions are `normal`, `triangle`, `uniform` and (in `process` only) `white`.\n\nExample:\n    x ~ gaussian(1 m)\nFix: `x ~ normal(1 m)`.";
    DISTRIBUTION_ARGUMENTS = "E0402", Error, "wrong distribution arguments",
        "normal(sigma) or normal(mean, sigma); triangle(half_width) or triangle(mean,\nhalf_width); uniform(half_width) or uniform(lo .. hi); white(amplitude).\n\nExample:\n    x ~ uniform(0 m, 10 m)\nFix: `x ~ uniform(0 m .. 10 m)`.";
    NOISE_DIMENSION = "E0403", Error, "noise has the wrong dimension",
        "Per-step process noise, initial beliefs, input noise and reading noise are in the\nunit of the quantity they describe (any unit of the same dimension).\n\nExample:\n    state { v : m/s }\n    initial { v ~ normal(0 m/s, 1 m) }\nFix: `normal(0 m/s, 1 m/s)`.";
    WHITE_DIMENSION = "E0404", Error, "white-noise density has the wrong dimension",
        "`white(a)` is continuous white noise on the state's rate; `a` is the square root of its\npower spectral density, in [state]/s/sqrt(Hz) = [state] s^-1/2 (datasheets write\ne.g. m/s^2/sqrt(Hz) for a speed or deg/h/sqrt(h) for a gyro bias).\n\nExample:\n    state { v : m/s }\n    process { v ~ white(0.3 m/s^2) }\nFix: `white(0.03 m/s^2/sqrt(Hz))` if 0.3 m/s^2 is a sigma sampled at 100 Hz.";
    WHITE_NOT_ALLOWED = "E0405", Error, "`white` noise is not allowed here",
        "Continuous white noise exists only in the `process` block of continuous motion.\nDiscrete motion, inputs, readings and initial beliefs take per-step distributions in\nthe quantity's own unit.\n\nExample:\n    motion discrete { x = x + v * dt }\n    process { v ~ white(0.1 m/s^2/sqrt(Hz)) }\nFix: `v ~ normal(0.01 m/s)` per step.";
    NONPOSITIVE_SPREAD = "E0406", Error, "spread must be positive",
        "A sigma or half-width must be greater than zero, and `uniform(lo .. hi)` needs lo < hi.\n\nExample:\n    x ~ normal(0 m, 0 m)\nFix: give the real uncertainty, e.g. `normal(0 m, 1 cm)`.";
    MISSING_READING_NOISE = "E0407", Error, "reading component without noise",
        "Every reading component needs noise: a shared `noise ~ ...`, a per-component\n`name ~ ...`, or a full `noise ~ covariance [...]`.\n\nExample:\n    sensor gnss { e : m = east }\nFix: add `noise ~ normal(1.5 m)`.";
    DUPLICATE_READING_NOISE = "E0408", Error, "noise given twice",
        "A component's noise comes from exactly one statement: the shared `noise ~ ...` or its\nown `name ~ ...`, not both, and not twice.\n\nExample:\n    sensor gnss { e : m = east  noise ~ normal(1 m)  e ~ normal(2 m) }\nFix: keep one.";
    COVARIANCE_SHAPE = "E0409", Error, "covariance has the wrong shape",
        "A full covariance is a square matrix with one row and one column per reading\ncomponent, in declaration order; rows are separated by `;`.\n\nExample:\n    noise ~ covariance [ 1 m^2, 0 m^2 ]      // two components\nFix: `covariance [ 1 m^2, 0 m^2 ; 0 m^2, 1 m^2 ]`.";
    COVARIANCE_DIMENSION = "E0410", Error, "covariance entry has the wrong dimension",
        "Entry (i, j) of a reading covariance has the dimension of component i times\ncomponent j (m^2 for two ranges, m^2/s for a range and a range rate).\n\nExample:\n    sensor s { r : m = x  w : m/s = v\n      noise ~ covariance [ 1 m^2, 0 m ; 0 m, 0.01 m^2/s^2 ] }\nFix: `covariance [ 1 m^2, 0 m^2/s ; 0 m^2/s, 0.01 m^2/s^2 ]`.";
    COVARIANCE_ASYMMETRIC = "E0411", Error, "covariance is not symmetric",
        "A covariance matrix equals its transpose: entry (i, j) and entry (j, i) must agree\n(after conversion to SI).\n\nExample:\n    covariance [ 1 m^2, 0.2 m^2 ; 0.3 m^2, 1 m^2 ]";
    COVARIANCE_NOT_SPD = "E0412", Error, "covariance is not positive definite",
        "A covariance must be positive definite: every variance positive and every\ncorrelation strictly between -1 and 1.\n\nExample:\n    covariance [ 1 m^2, 2 m^2 ; 2 m^2, 1 m^2 ]   // correlation 2\nFix: check the off-diagonal terms (|c_ij| < sqrt(c_ii * c_jj)).";
    SENSOR_WITHOUT_COMPONENTS = "E0501", Error, "sensor reads nothing",
        "A sensor needs at least one reading component `name : unit = expression`.\n\nExample:\n    sensor gnss { noise ~ normal(1 m) }\nFix: `sensor gnss { e : m = east  noise ~ normal(1 m) }`.";
    GATE_RANGE = "E0502", Error, "gate probability out of range",
        "A gate is the probability that a consistent reading passes the chi-square test; it\nmust lie strictly between 0 and 100 %.\n\nExample:\n    gate 99.9\nFix: `gate 99.9 %`.";
    DUPLICATE_GATE = "E0503", Error, "gate given twice",
        "A sensor has at most one gate.\n\nExample:\n    gate 99 %  gate 95 %";
    UNKNOWN_COMPONENT = "E0504", Error, "noise for an unknown component",
        "`name ~ dist` inside a sensor gives the noise of the component called `name`; no\ncomponent of this sensor has that name.\n\nExample:\n    sensor compass { hdg : deg = heading  heading ~ normal(2 deg) }\nFix: `hdg ~ normal(2 deg)`.";
    KF_NEEDS_LINEAR_MODEL = "E0601", Error, "the linear Kalman filter needs a linear model",
        "Method `kf` computes the covariance with fixed matrices, which is exact only when the\nmotion and every sensor are linear (affine) in the states and inputs. A product of two\nstates, a trigonometric function of a state or a division by a state is not:\n\n    motion continuous { east' = speed * cos(heading) }   // cos(heading): not linear\n\nChoose `ekf` or `ukf` for this model, or rewrite it linearly.";
    KALMAN_NEEDS_GAUSSIAN_NOISE = "E0602", Error, "Kalman methods need Gaussian noise",
        "Methods `kf`, `ekf` and `ukf` represent every noise by a mean and a covariance, so\nthey accept only `normal(...)` (and `white(...)`) noise. A triangle or uniform noise is\nrefused instead of being silently replaced:\n\n    process { slip ~ triangle(0.05 m) }   // refused by kf/ekf/ukf\n\nUse a Gaussian of the same variance: a triangle of half-width a has sigma a/sqrt(6);\na uniform of half-width a has sigma a/sqrt(3).";
    UNSCENTED_PARAMETERS_INVALID = "E0604", Error, "the unscented scaling parameters are not valid",
        "The sigma points of `ukf` need `alpha > 0` and `alpha^2 (n + kappa) > 0` for a state of\ndimension n; otherwise their weights are undefined:\n\n    [[estimator]]\n    method = \"ukf\"\n    unscented = { alpha = 1.0, beta = 2.0, kappa = 0.0 }";
    // E0603 (a method without a generator) was retired when every method got one.
    MODEL_DOES_NOT_FIT_METHOD = "E0605", Error, "the model does not fit the grid or particle method",
        "The grid and particle methods hold the belief as cell masses or samples, which asks\nthings of the model that the Kalman methods do not:\n\n- grid: one or two states, each with a bounded range and a cell size\n      state { position : m in 0 m .. 40 m by 5 cm }\n  (or `cells = N` in the `[[estimator]]` table for ranges without `by`);\n- both: no wrapped (`wrap`) states, since their means are not taken on the circle;\n- both: reading noise given per component, not as a full `covariance [...]`.\n\nChoose `ekf` or `ukf` for a model that cannot meet these.";
    GRID_MOTION_NOISE = "E0606", Error, "the motion noise cannot be spread along the grid axes",
        "A grid prediction spreads each axis with one noise kernel that is the same for every\ncell. So every state needs motion noise, each noise (process or input) may reach only\none state, through a factor that does not depend on the state, and a state may\ncombine several noises only when all of them are normal (their variances add):\n\n    motion discrete { position = position + speed * dt }\n    process { position ~ triangle(2 cm) }\n    input { speed : m/s ~ normal(0.02 m/s) }   // refused: triangle + normal on `position`\n\nFix: give the state one noise that covers both (here `position ~ normal(...)` with\nthe summed variance), or use the `particle` method, which samples every noise where\nit enters the motion.";
    BELIEF_SIZE_INVALID = "E0607", Error, "a grid or particle setting is out of range",
        "A generated grid or particle filter keeps its whole belief in fixed-size arrays on\nthe stack or in static memory, so its size is bounded: at most 1,000,000 grid cells\nand between 1 and 1,000,000 particles; the resampling threshold `resample_below` is a\nfraction of the particle count in (0, 1].\n\nFix: a coarser cell (`by ...` in the spec or `cells = N` in `reckon.toml`), a smaller\nrange, or fewer particles (`particles = N`).";
    PROJECT_FILE_INVALID = "E0701", Error, "the project file is not valid",
        "`reckon.toml` could not be read: a key is unknown, a value has the wrong type, or a\nrequired key is missing. Each `[[estimator]]` table needs `spec` and `output`:\n\n    [[estimator]]\n    spec = \"specs/rail_cart.reckon\"\n    output = \"src/rail_cart.rs\"\n    method = \"ekf\"      # kf, ekf, ukf, grid, particle\n    scalar = \"f32\"      # f32 or f64\n";
    SCENARIO_QUANTITY = "E0711", Error, "a scenario quantity is not valid",
        "A `[[scenario]]` value is a quantity with a unit, written as a string and read\nlike a number in a spec: a duration or step in time units, a rate in Hz, an input,\nargument or truth value in the dimension the spec declares for it:\n\n    duration = \"20 s\"\n    step = \"10 ms\"\n    [[scenario.sensor]]\n    name = \"laser\"\n    rate = \"20 Hz\"";
    SCENARIO_UNKNOWN_NAME = "E0712", Error, "a scenario names something the spec does not have",
        "Inputs, initial truth values, sensors and sensor arguments of a scenario are named\nas in the spec. Check the spelling against the spec's `input`, `state` and `sensor`\nblocks.";
    SCENARIO_MISSING_VALUE = "E0713", Error, "a scenario leaves a value out",
        "Every input of the spec needs a value (a constant or a schedule), and every reading\nof a sensor with arguments needs each argument:\n\n    [scenario.inputs]\n    accel = [{ from = \"0 s\", value = \"0.2 m/s^2\" }, { from = \"5 s\", value = \"0 m/s^2\" }]\n    [[scenario.sensor]]\n    name = \"transponder\"\n    rate = \"1 Hz\"\n    args = [{ beacon_east = \"100 m\", beacon_north = \"0 m\" }]";
    SCENARIO_SPEC_UNREADABLE = "E0714", Error, "the scenario's spec cannot be read",
        "The `spec` path of a `[[scenario]]` is relative to the folder of `reckon.toml`; the\nfile must exist and be readable.";
    SCENARIO_METHOD = "E0715", Error, "the simulator cannot run this method",
        "The simulator runs every method through the runtime, but it holds a grid or particle\nfilter in one of a few fixed capacities: up to 65536 cells on a 1-D grid, 512 x 512\non a 2-D grid, 65536 particles, and 1 to 8 states for a particle filter. A larger\nfilter (which a generated estimator may still be, within the limits of E0607) is\nrefused, as is a run whose worker thread cannot get the stack the filter needs.\n\nFix: fewer cells (`cells = N`, or a coarser `by` in the spec), fewer particles\n(`particles = N` in the `[[scenario]]`), or a Kalman method.";
    SCENARIO_NO_INITIAL_BELIEF = "E0716", Error, "a simulated state has no initial belief",
        "The filter starts from the spec's `initial` block, and the truth is drawn from it\nunless the scenario fixes it. A state without an initial belief cannot start a filter:\nadd it to the spec's `initial` block.";
    UNOBSERVED_STATE = "W0801", Warning, "state never observed",
        "No sensor reading depends on this state, directly or through the motion of a state\nthat is read: the filter can only predict it, and its uncertainty grows without\nbound. (This is a structural test; the IR stage runs a full observability test.)\n\nExample:\n    state { x : m  drift : m/s }\n    sensor s { r : m = x ... }\n    // and drift appears in no equation that reaches x";
    BARE_ANGLE = "W0802", Warning, "bare number used as an angle",
        "A trigonometric function received a literal number without a unit. It is read as\nradians, which is rarely what a number like 30 means.\n\nExample:\n    sin(30)\nFix: `sin(30 deg)` (or `sin(0.5236 rad)`).";
    DANGLING_DOC = "W0803", Warning, "doc comment documents nothing",
        "A `///` doc comment must sit directly above the model, a constant, a state or input\nvariable, a sensor or a reading component. This one is followed by something else\n(a block header, a statement, or the end of the file), so it would be lost.\n\nExample:\n    /// the states\n    state { x : m }\nFix: move it above `x`, or write `//` for a plain comment.";
    SEQUENTIAL_NEEDS_DIAGONAL_NOISE = "W0850", Warning, "sequential updates need independent reading noise",
        "The sequential scalar update processes one reading component at a time, which is\nexact only when the components' noises are independent (a diagonal covariance). A\nsensor with a full `covariance [...]` noise is corrected with the Joseph form instead.";
    INITIAL_NOT_GAUSSIAN = "W0851", Warning, "a Kalman filter starts from a Gaussian initial belief",
        "A Kalman method represents the initial belief by its mean and variance, so an initial\n`uniform(lo .. hi)` or `triangle(...)` becomes the Gaussian with the same mean and\nvariance (uniform: sigma = (hi - lo)/sqrt(12)). Write `normal(mean, sigma)` to say so\nexplicitly.";
    GATE_NOT_APPLIED = "W0852", Warning, "grid and particle filters do not apply innovation gates",
        "A `gate` compares the normalised innovation squared with a chi-square quantile,\nwhich assumes a Gaussian prediction. The grid and particle filters keep every reading\nand weigh it by its likelihood instead; a reading the belief did not expect shows as a\nvery negative log evidence, which the generated `correct_*` functions return.";
}
