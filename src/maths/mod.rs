//! The mathematics the pipeline stages share and no crate does as the models need it:
//! root finders and least-squares fits ([`numeric`]), monotone interpolation ([`pchip`])
//! and special functions with physical constants ([`special`]).

pub mod numeric;
pub mod pchip;
pub mod special;
