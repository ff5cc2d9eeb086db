//! Around the chain: getting readings in and results out.
//!
//! Reads tables of readings (CSV, Parquet, spreadsheets) and writes them atomically
//! ([`table`]), draws charts of profiles, trends, budgets and layouts as SVG or PNG
//! ([`plot`]), shows the library's main types in Rust notebooks ([`evcxr`]) and reads
//! and writes the record files behind coefficients ([`record`]) and the set-up files of
//! instruments, sites and campaigns ([`setup`]). A [`tap`] shows a caller the bytes CSV scans
//! read from a file (the batch runner hashes its inputs from them).

pub mod evcxr;
mod plain_csv;
pub mod plot;
pub mod record;
pub mod scan;
pub mod setup;
pub mod table;
pub mod tap;
