//! The physics of the model: one folder per process, one file per swappable variant. Each
//! variant file opens with what the form is, when to use it and its `Reference:` lines, and
//! holds the form's formulas as `#[inline]` band functions; the process's `mod.rs` holds its
//! enum and the dispatch. Pure functions over slices, no I/O. `crate::model` assembles one
//! of each process and fuses them in its hot loops by calling these band functions.

pub mod albedo;
pub mod heat_capacity;
pub mod insolation;
pub mod longwave;
pub mod transport;
