//! Invented scenario generator.
pub mod generate;
