//! `stagna`: differential-pressure flow reduction from the command line.
//!
//! `stagna` alone starts the REPL (or evaluates piped input); `stagna run` is the
//! batch runner; `stagna demo` runs the bundled demo script over the bundled demo
//! data; `stagna layout` plans a traverse; `stagna units` lists unit names;
//! `stagna reference` writes the function reference from the catalog.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

mod api;
mod catalog;
mod demo;
mod layout_cmd;
mod repl;
mod run;
mod session;

/// Differential-pressure flow measurement: fluids, manometers, probes, traverses.
#[derive(Parser)]
#[command(name = "stagna", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
    /// Operation limit per input in the REPL (stops runaway loops).
    #[arg(long, value_name = "N", global = true)]
    max_operations: Option<u64>,
}

#[derive(Subcommand)]
enum Command {
    /// Run the bundled demo script over the bundled demo data (a duct traverse and a water-main survey).
    Demo {
        /// Read `larkfield-ahu2-supply.csv` and `hollin-brook-main.csv` from this folder instead
        /// of the bundled copies.
        #[arg(long, value_name = "DIR")]
        data_dir: Option<PathBuf>,
    },
    /// Plan a traverse: point positions and insertion depths (field sheet), optionally an SVG drawing.
    Layout(layout_cmd::LayoutArgs),
    /// List every unit name the unit parser accepts, with its SI factor and source.
    Units,
    /// Run a script, once per input file (in parallel), writing results to an output folder.
    Run(run::RunArgs),
    /// Print the function reference (Markdown) generated from the catalog.
    Reference,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Some(Command::Demo { data_dir }) => demo::run(data_dir.as_deref()),
        Some(Command::Layout(args)) => layout_cmd::run(&args),
        Some(Command::Units) => {
            print!("{}", demo::units_table());
            Ok(())
        }
        Some(Command::Run(args)) => match run::run(&args) {
            Ok(0) => Ok(()),
            Ok(code) => return ExitCode::from(code as u8),
            Err(e) => Err(e),
        },
        Some(Command::Reference) => {
            print!("{}", demo::reference_markdown(&session::Session::new()));
            Ok(())
        }
        None => {
            let limits = session::Limits {
                operations: cli.max_operations.unwrap_or(session::Limits::default().operations),
                ..Default::default()
            };
            return ExitCode::from(repl::run(session::Session::with_limits(limits)) as u8);
        }
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            let e = e.to_string();
            if e.starts_with("Error") {
                eprintln!("{e}")
            } else {
                eprintln!("error: {e}")
            }
            ExitCode::FAILURE
        }
    }
}
