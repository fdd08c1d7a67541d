//! The open host of stance-toolbox: which processes there are (built-in tools and plugins),
//! whether a plugin keeps the contract (`stance check-plugin`), and the OGC API – Processes
//! service (`stance serve`). The umbrella executable `stance` links it; no tool does.

pub mod check;
pub mod registry;
pub mod service;
