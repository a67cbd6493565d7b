//! kicktrain: design laser pulse sequences that align gas-phase molecules.
//!
//! A time-dependent quantum rotor solver for thermal ensembles driven by trains of non-resonant
//! laser pulses, with exact field-free evolution between and after the pulses.
//!
//! ```
//! use kicktrain::{field::Pulse, scenario::{Scenario, Window}, simulate::simulate};
//! let window = Window { start_ps: 0.2, stop_ps: 5.0, step_fs: 50.0 };
//! let s = Scenario::new("N2", 50.0, vec![Pulse::gaussian(0.0, 100.0, 2e13)], window).unwrap();
//! let sim = simulate(&s).unwrap();
//! let peak = sim.result.trace.cos2.iter().cloned().fold(0.0, f64::max);
//! assert!(peak > 1.0 / 3.0);
//! ```

#![warn(missing_docs)]

pub mod basis;
pub mod design;
pub mod ensemble;
pub mod error;
pub mod field;
pub mod goal;
pub mod input;
pub mod limits;
pub mod molecule;
pub mod numeric;
pub mod observe;
pub mod optics;
pub mod pendular;
pub mod propagate;
pub mod quadrature;
pub mod report;
pub mod resources;
pub mod scan;
pub mod scenario;
pub mod shard;
pub mod simulate;
pub mod tolerance;
pub mod units;

pub use error::{Error, Result};
