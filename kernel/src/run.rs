//! `headroom run` (STUB).
use clap::Args;
use std::path::PathBuf;

#[derive(Args, Debug)]
pub struct RunArgs {
    /// The worksheet (.hrw) or notebook (.ipynb) to run.
    pub file: PathBuf,
    /// Override a `given`: NAME=VALUE in the language's literal syntax (`iload=250mA`).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Where to write the executed notebook.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
    /// Write the executed notebook over the input.
    #[arg(long = "in-place")]
    pub in_place: bool,
    /// Print the results data as JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: &RunArgs) -> anyhow::Result<u8> {
    let _ = args;
    anyhow::bail!("run is not implemented yet")
}
