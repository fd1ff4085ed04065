//! The demo engine's toy system: two harmonic wells mixed linearly in λ, with exact free energies.
//!
//! This is the library half of `legwork-demo-engine`. It behaves like a real engine
//! (correlated samples, an equilibration transient, checkpoints, injected crashes)
//! while every free energy it is asked to produce is known in closed form, so the
//! whole pipeline can be checked end to end.
//!
//! - [`system`]: the potential, its exact F(λ) and ΔG.
//! - [`sampler`]: the exact Ornstein–Uhlenbeck (AR(1)) update.
//! - [`table`]: the window-table writer.
//! - [`checkpoint`] and [`start`]: the checkpoint and starting-configuration files.
//! - [`fault`]: injected failures for the scheduler tests.
//! - [`run`]: one window from start (or checkpoint) to the last frame.
//! - [`scenario`]: the invented demo scenario's ligand table and its exact answers.

pub mod checkpoint;
pub mod error;
pub mod fault;
pub mod run;
pub mod sampler;
pub mod scenario;
pub mod start;
pub mod system;
pub mod table;

pub use error::DemoError;
pub use system::{ToySystem, Well};
