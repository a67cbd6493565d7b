//! The command-line front end (the binary only; the library knows nothing of it).

pub mod args;
pub mod cluster;
pub mod commands;
pub mod signals;
