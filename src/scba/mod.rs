//! The self-consistent Born loop.

mod params;
pub use params::{Mixing, ScbaParams};
