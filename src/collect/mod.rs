//! Reading window output (window tables and configurable columns) and the parse cache.

pub mod config;

pub use config::ReaderConfig;
