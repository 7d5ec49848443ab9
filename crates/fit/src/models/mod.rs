//! The published current–time laws Diffusor fits. Each states its equation, source and range of
//! validity.

pub mod anson;
pub mod charging;
pub mod common;
pub mod double_step;
pub mod edge;
pub mod kinetics;
pub mod microdisk;
pub mod planar;
mod projected;
pub mod slab;
pub mod sphere;
