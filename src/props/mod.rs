//! Constitutive laws and water properties. Every law returns its value together with the
//! derivatives the Jacobian needs; a conformance test checks each derivative against a
//! central difference over the law's whole range.

pub mod conductivity;
pub mod constants;
mod jet;
pub mod retention;
pub mod table;
pub mod thermal;
pub mod vapor;
pub mod water;
