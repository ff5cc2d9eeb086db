//! `stagna`: differential-pressure flow reduction from the command line.
//!
//! For now: `stagna demo` reduces the bundled demo data (or the same layout
//! from `--data-dir`), `stagna layout` plans a traverse, `stagna units` lists
//! the unit names with their sources. The script session, REPL, batch runner and Jupyter kernel build
//! on this binary.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

mod demo;
mod layout_cmd;
mod readings;

/// Differential-pressure flow measurement: fluids, manometers, probes, traverses.
#[derive(Parser)]
#[command(name = "stagna", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
}

#[derive(Subcommand)]
enum Command {
    /// Reduce the bundled demo campaign (a duct traverse and a water-main survey) and print the results.
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
        None => {
            println!("stagna {}: try `stagna demo` or `stagna --help`", env!("CARGO_PKG_VERSION"));
            Ok(())
        }
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::FAILURE
        }
    }
}
