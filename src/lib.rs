//! qheat: electro-thermal quantum transport (manual expanded as layers land).
#![warn(missing_docs)]

/// Complex double, the scalar of every Green's function.
pub type C64 = num_complex::Complex64;

pub mod case;
pub mod device;
pub mod grid;
pub mod leads;
pub mod model;
pub mod observables;
pub mod output;
pub mod rgf;
pub mod scattering;
pub mod scba;
pub mod sweep;
pub mod thermo;
pub mod units;
