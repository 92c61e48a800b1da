//! `headroom`: the Jupyter kernel and the command line of the Headroom worksheet language.

mod alloc;
mod install;
mod notebook;
mod outputs;
mod render;
mod run;
mod server;

use clap::{Parser, Subcommand};
use std::path::PathBuf;
use std::process::ExitCode;

/// mimalloc (see `alloc`): a cell's evaluation makes many small, short-lived allocations.
#[global_allocator]
static ALLOC: alloc::Mimalloc = alloc::Mimalloc;

#[derive(Parser)]
#[command(
    name = "headroom",
    version,
    about = "Power-design worksheets: a Jupyter kernel and command line"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run as a Jupyter kernel (started by Jupyter through the kernelspec).
    Kernel {
        /// The connection file Jupyter wrote for this kernel.
        #[arg(long = "connection-file", short = 'f')]
        connection_file: PathBuf,
    },
    /// Register the kernel with Jupyter.
    Install(install::InstallArgs),
    /// Run a worksheet (.hrw) or a notebook (.ipynb) and print its results.
    Run(run::RunArgs),
    /// Record a review of a notebook: reviewer, time, engine version and digests.
    Seal(notebook::SealArgs),
    /// Rerun notebooks and check that every stored result and the seal still hold.
    Verify(notebook::VerifyArgs),
}

fn main() -> ExitCode {
    init_logging();
    let cli = Cli::parse();
    // The command runs on a thread with the evaluator's roomy stack (see server.rs).
    let worker = std::thread::Builder::new()
        .name("headroom".into())
        .stack_size(server::EVAL_STACK_BYTES)
        .spawn(move || dispatch(cli));
    match worker.map(|h| h.join()) {
        Ok(Ok(code)) => code,
        _ => {
            eprintln!("headroom: internal error: the command thread failed");
            ExitCode::from(3)
        }
    }
}

fn dispatch(cli: Cli) -> ExitCode {
    let result = match cli.command {
        Command::Kernel { connection_file } => server::serve(&connection_file).map(|()| 0),
        Command::Install(args) => install::install(&args).map(|()| 0),
        Command::Run(args) => run::run(&args),
        Command::Seal(args) => notebook::seal(&args),
        Command::Verify(args) => notebook::verify(&args),
    };
    match result {
        Ok(code) => ExitCode::from(code),
        Err(err) => {
            eprintln!("headroom: {err:#}");
            ExitCode::from(2)
        }
    }
}

/// Logs go to stderr only (stdout belongs to the command's output), quiet unless RUST_LOG says.
fn init_logging() {
    let filter = tracing_subscriber::EnvFilter::try_from_default_env()
        .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("warn"));
    tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_target(false)
        .init();
}
