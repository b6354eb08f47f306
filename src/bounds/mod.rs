//! The bounds of `docs/method.md`: pure functions, no I/O.
//!
//! * [`family`]: per-family constants and the bias generating function (§2);
//! * [`global`]: the global bounds at one (time, observable) point (§3), written on per-source
//!   sensitivities so that the light-cone version (§5) can reuse them;
//! * [`data_interval`]: confidence intervals for a bounded mean from the data themselves
//!   (betting, empirical Bernstein, Clopper–Pearson; §6.1);
//! * [`data_statement`]: the data statement of §6, built on them, and the split of ε;
//! * [`device`]: the device-error terms (incoherent, preparation, readout; §7);
//! * [`confidence`]: splitting the user's confidence into the noise and shot parts, Bonferroni;
//! * [`fidelity`]: the fidelity lower bound (§4);
//! * [`light_cone`]: Lieb–Robinson walk sums and exposure times `T_i(t)` (§5);
//! * [`local`]: the light-cone versions of the §3 terms for one observable over all times (§5);
//! * [`quantiles`]: standard-normal quantiles;
//! * [`special`]: the error function and the normal tail, accurate to a few ulps;
//! * [`windows`]: noise drawn again during an evolution (correlation times): window lengths,
//!   sums of squares and the bias factor per source.

pub mod confidence;
pub mod data_interval;
pub mod data_statement;
pub mod device;
pub mod family;
pub mod fidelity;
pub mod global;
pub mod light_cone;
pub mod local;
pub mod planning;
pub mod quantiles;
pub mod run_bounds;
pub mod special;
pub mod windows;
