//! `stagna`: differential-pressure flow reduction from the command line.
//!
//! `stagna` alone starts the REPL (or evaluates piped input); `stagna run` is the
//! batch runner; `stagna demo` runs the bundled demo script over the bundled demo
//! data; `stagna layout` plans a traverse; `stagna units` lists unit names;
//! `stagna reference` writes the function reference from the catalog.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// mimalloc with a running count of the bytes held, which the session's memory limit reads
/// at every script operation (tracking only: it never refuses). mimalloc rather than the
/// system allocator: a scan allocates and frees each batch's columns, and glibc's malloc
/// returned them to the system and faulted them back in (a third of a 10 M-reading scan's
/// CPU time in the kernel); measured A/B in DEVELOPERS.md.
#[global_allocator]
static ALLOCATOR: cap::Cap<mimalloc::MiMalloc> = cap::Cap::new(mimalloc::MiMalloc, usize::MAX);

/// Stack of the thread that runs every command: deep script data (arrays nested
/// thousands deep) is dropped and displayed recursively. Reserved, not committed.
const STACK_BYTES: usize = 512 << 20;

mod api;
mod catalog;
mod demo;
mod jupyter;
mod layout_cmd;
mod repl;
mod report;
mod run;
mod session;
mod shard;

/// Differential-pressure flow measurement: fluids, manometers, probes, traverses.
#[derive(Parser)]
#[command(name = "stagna", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
    /// Limits of the REPL's session (`stagna run` and `stagna kernel` take their own).
    #[command(flatten)]
    limits: session::LimitArgs,
}

#[derive(Subcommand)]
enum Command {
    /// Run the bundled demo script over the bundled demo data (a duct traverse and a water-main survey).
    Demo {
        /// Read `pretendbury-ahu2-supply.csv` and `neverbrook-main.csv` from this folder instead
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
    /// The Jupyter kernel: `stagna kernel install`, or run with `--connection-file` (Jupyter does).
    Kernel(KernelArgs),
}

#[derive(clap::Args)]
struct KernelArgs {
    #[command(subcommand)]
    action: Option<KernelAction>,
    /// Connection file written by the Jupyter client.
    #[arg(long, value_name = "FILE")]
    connection_file: Option<PathBuf>,
    /// Limits of the kernel's session (add them to the kernelspec's argv, or set the
    /// environment variables in its env).
    #[command(flatten)]
    limits: session::LimitArgs,
    /// Also allow notebooks to write into this folder (repeatable); by default they write
    /// only inside the folder the kernel starts in (the notebook's). Reading is not restricted.
    #[arg(long, value_name = "DIR")]
    allow_write: Vec<PathBuf>,
}

#[derive(Subcommand)]
enum KernelAction {
    /// Install the kernelspec so that JupyterLab, Notebook and the console list Stagna.
    Install(SpecTarget),
    /// Remove the kernelspec.
    Uninstall(SpecTarget),
}

#[derive(clap::Args)]
struct SpecTarget {
    /// The user's Jupyter data folder (the default).
    #[arg(long, conflicts_with_all = ["sys_prefix", "prefix"])]
    user: bool,
    /// The active Python environment.
    #[arg(long, conflicts_with = "prefix")]
    sys_prefix: bool,
    /// DIR/share/jupyter/kernels.
    #[arg(long, value_name = "DIR")]
    prefix: Option<PathBuf>,
}

impl SpecTarget {
    fn target(&self) -> jupyter::install::Target {
        match (&self.prefix, self.sys_prefix) {
            (Some(d), _) => jupyter::install::Target::Prefix(d.clone()),
            (None, true) => jupyter::install::Target::SysPrefix,
            _ => jupyter::install::Target::User,
        }
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match std::thread::Builder::new().name("stagna".into()).stack_size(STACK_BYTES).spawn(move || command(cli)) {
        Ok(t) => t.join().unwrap_or(ExitCode::FAILURE),
        Err(e) => {
            eprintln!("error: cannot start: {e}");
            ExitCode::FAILURE
        }
    }
}

fn command(cli: Cli) -> ExitCode {
    let top_limits =
        cli.limits.max_operations.is_some() || cli.limits.max_memory.is_some() || cli.limits.max_array.is_some();
    if top_limits && cli.command.is_some() {
        eprintln!(
            "error: --max-operations, --max-memory and --max-array before a subcommand set the REPL's limits; give them after `run` or `kernel`"
        );
        return ExitCode::FAILURE;
    }
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
        Some(Command::Kernel(k)) => match (k.action, k.connection_file, k.limits.limits()) {
            (_, _, Err(e)) => Err(e.into()),
            (Some(KernelAction::Install(t)), ..) => jupyter::install::install(&t.target()).map(|d| {
                println!("installed the stagna kernelspec in {}", d.display());
            }),
            (Some(KernelAction::Uninstall(t)), ..) => jupyter::install::uninstall(&t.target()).map(|d| {
                println!("removed {}", d.display());
            }),
            (None, Some(f), Ok(limits)) => match jupyter::run(&f, limits, k.allow_write) {
                Ok(0) => Ok(()),
                Ok(code) => return ExitCode::from(code as u8),
                Err(e) => Err(e),
            },
            (None, None, _) => Err("stagna kernel: give --connection-file FILE (Jupyter does), or `install`".into()),
        },
        Some(Command::Reference) => {
            print!("{}", demo::reference_markdown(&session::Session::new()));
            Ok(())
        }
        None => match cli.limits.limits() {
            Ok(limits) => return ExitCode::from(repl::run(session::Session::with_limits(limits)) as u8),
            Err(e) => Err(e.into()),
        },
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
