//! End-to-end tests: drive the built `stagna` binary as a user would.

mod bad_inputs;
mod demo;
mod layout;
mod repl;
mod scans;
mod scripts;
mod shards;
