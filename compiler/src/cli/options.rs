//! Command-line spellings of the build options, shared by the subcommands that take
//! them (clap value enums mirroring `reckon::options`).

use reckon::options::{Integrator, Method, Scalar, UpdateForm};

macro_rules! value_enum {
    ($arg:ident => $target:ident { $($variant:ident),* }) => {
        /// Command-line value of the option of the same name.
        #[derive(Clone, Copy, clap::ValueEnum)]
        pub enum $arg { $($variant),* }

        impl From<$arg> for $target {
            fn from(value: $arg) -> $target {
                match value { $($arg::$variant => $target::$variant),* }
            }
        }
    };
}

value_enum!(MethodArg => Method { Kf, Ekf, Ukf, Grid, Particle });
value_enum!(ScalarArg => Scalar { F32, F64 });
value_enum!(UpdateArg => UpdateForm { Joseph, Sequential });
value_enum!(IntegratorArg => Integrator { Auto, Euler, Rk4 });
