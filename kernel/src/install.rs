//! Kernelspec installation (STUB).
use clap::Args;

#[derive(Args, Debug)]
pub struct InstallArgs {
    /// Install for the current user (the default).
    #[arg(long)]
    pub user: bool,
    /// Install into the active virtual or conda environment.
    #[arg(long = "sys-prefix")]
    pub sys_prefix: bool,
    /// Install under PREFIX/share/jupyter/kernels.
    #[arg(long)]
    pub prefix: Option<std::path::PathBuf>,
    /// Only print where the kernelspec would go.
    #[arg(long)]
    pub print: bool,
}

pub fn install(args: &InstallArgs) -> anyhow::Result<()> {
    let _ = args;
    anyhow::bail!("install is not implemented yet")
}
