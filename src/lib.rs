//! meniscus: volumetrics of liquid mixtures.
//!
//! The [`kernel`] (always built) holds the numerics: the ethanol–water
//! reference equation, the binary-mixture model trait and everything
//! provided on top of it. The Lua host, REPL and command line sit behind
//! Cargo features (`lua`, `repl`, `cli`; all on by default), so an embedder
//! can take the kernel alone with `default-features = false`.

#[cfg(feature = "cli")]
pub mod cli;
pub mod io;
pub mod kernel;
#[cfg(feature = "lua")]
pub mod lua;
#[cfg(feature = "plot")]
pub mod plot;
#[cfg(feature = "plot")]
pub mod plot_job;
#[cfg(feature = "repl")]
pub mod repl;

pub use kernel::{Composition, Error, EthanolWater, Mixture, Result, Strength};
