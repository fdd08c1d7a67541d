//! stance-core: the tool host, GeoPackage and CRS I/O, and the maths every stance tool shares.

pub mod assign;
pub mod error;
pub mod gpkg;
pub mod grid;
pub mod host;
pub mod montecarlo;
pub mod multiple;
pub mod normal;
pub mod stance;
pub mod time;
pub mod weights;

pub use error::{Error, Result};

/// Version of the toolbox (all crates share it).
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
