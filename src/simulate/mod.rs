//! Exact state-vector simulation of noisy runs, for examples and tests.
//!
//! The simulator evolves a product state under the XXZ Hamiltonian of a scenario plus one
//! random draw of its true noise, exactly (to 1e-10 in the state's norm), and samples shots
//! from the result. Conventions and method: docs/simulator.md.
//!
//! * [`pauli`]: Pauli strings as bit masks, applied to basis states;
//! * [`hamiltonian`]: sums of Pauli strings, compiled into a diagonal plus grouped flips;
//! * [`propagate`]: Chebyshev propagation with a rigorous truncation bound;
//! * [`lindblad`]: density matrices under single-site Lindblad jumps, for device errors;
//! * `open`: the realizations of a scenario with device errors, as density matrices;
//! * [`sample`]: random streams, noise draws and shot sampling;
//! * [`run`]: the whole pipeline from a scenario to the simulated data;
//! * [`fidelity`]: the ideal trajectory kept in memory, compared with one noisy evolution.

pub mod fidelity;
pub mod hamiltonian;
pub mod lindblad;
mod open;
pub mod pauli;
pub mod propagate;
pub mod run;
pub mod sample;
