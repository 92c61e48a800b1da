//! Notebooks: run, seal and verify `.ipynb` files (STUB).
use clap::Args;
use std::path::PathBuf;

#[derive(Args, Debug)]
pub struct SealArgs {
    /// The notebook to seal.
    pub notebook: PathBuf,
    /// Who reviewed it.
    #[arg(long)]
    pub reviewer: String,
    /// A note to keep with the review.
    #[arg(long)]
    pub note: Option<String>,
}

#[derive(Args, Debug)]
pub struct VerifyArgs {
    /// The notebooks to verify.
    #[arg(required = true)]
    pub notebooks: Vec<PathBuf>,
}

pub fn seal(args: &SealArgs) -> anyhow::Result<u8> {
    let _ = args;
    anyhow::bail!("seal is not implemented yet")
}

pub fn verify(args: &VerifyArgs) -> anyhow::Result<u8> {
    let _ = args;
    anyhow::bail!("verify is not implemented yet")
}
