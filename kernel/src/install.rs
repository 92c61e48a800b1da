//! `headroom install`: writes the kernelspec where Jupyter looks for it.
//!
//! Where Jupyter looks follows `jupyter_core.paths` (from memory of its source, version 5):
//! the user's data directory is `$JUPYTER_DATA_DIR` when set, else `~/Library/Jupyter` on
//! macOS, `%APPDATA%\jupyter` on Windows, and `$XDG_DATA_HOME/jupyter` (default
//! `~/.local/share/jupyter`) elsewhere; an environment's is `sys.prefix/share/jupyter`.

use anyhow::{bail, Context};
use clap::Args;
use serde_json::json;
use std::path::{Path, PathBuf};

#[derive(Args, Debug)]
pub struct InstallArgs {
    /// Install for the current user (the default).
    #[arg(long, conflicts_with_all = ["sys_prefix", "prefix"])]
    pub user: bool,
    /// Install into the active virtual or conda environment.
    #[arg(long = "sys-prefix", conflicts_with = "prefix")]
    pub sys_prefix: bool,
    /// Install under PREFIX/share/jupyter/kernels.
    #[arg(long, value_name = "PREFIX")]
    pub prefix: Option<PathBuf>,
    /// Print the directory the kernelspec was written to (and nothing else).
    #[arg(long)]
    pub print: bool,
}

/// The kernelspec's name: `jupyter console --kernel headroom`.
const KERNEL_NAME: &str = "headroom";

const LOGOS: [(&str, &[u8]); 3] = [
    (
        "logo-32x32.png",
        include_bytes!("../../install/logo-32x32.png"),
    ),
    (
        "logo-64x64.png",
        include_bytes!("../../install/logo-64x64.png"),
    ),
    ("logo-svg.svg", include_bytes!("../../install/logo-svg.svg")),
];

pub fn install(args: &InstallArgs) -> anyhow::Result<()> {
    let env = |name: &str| {
        std::env::var_os(name)
            .filter(|v| !v.is_empty())
            .map(PathBuf::from)
    };
    let data_dir = if let Some(prefix) = &args.prefix {
        prefix.join("share").join("jupyter")
    } else if args.sys_prefix {
        sys_prefix_data_dir(&env)?
    } else {
        user_data_dir(&env, Platform::current())?
    };
    let exe = std::env::current_exe()
        .and_then(|p| p.canonicalize())
        .context("cannot tell where the headroom binary is")?;
    let dir = write_kernelspec(&data_dir, &exe)?;
    if args.print {
        println!("{}", dir.display());
    } else {
        println!("Installed the Headroom kernel in {}", dir.display());
        if args.prefix.is_some() {
            println!(
                "Jupyter finds it when {} is on JUPYTER_PATH, or when that prefix is the \
                 sys.prefix of the Python running Jupyter.",
                data_dir.display()
            );
        }
        println!("Start it with `jupyter console --kernel {KERNEL_NAME}` or pick \"Headroom\" in JupyterLab.");
    }
    Ok(())
}

/// Writes `kernels/headroom/` under `data_dir` and returns that directory.
fn write_kernelspec(data_dir: &Path, exe: &Path) -> anyhow::Result<PathBuf> {
    let dir = data_dir.join("kernels").join(KERNEL_NAME);
    std::fs::create_dir_all(&dir).with_context(|| format!("cannot create {}", dir.display()))?;
    let spec = kernel_json(exe);
    let text = serde_json::to_string_pretty(&spec)? + "\n";
    write(&dir.join("kernel.json"), text.as_bytes())?;
    for (name, bytes) in LOGOS {
        write(&dir.join(name), bytes)?;
    }
    Ok(dir)
}

fn write(path: &Path, bytes: &[u8]) -> anyhow::Result<()> {
    std::fs::write(path, bytes).with_context(|| format!("cannot write {}", path.display()))
}

fn kernel_json(exe: &Path) -> serde_json::Value {
    json!({
        "argv": [exe.to_string_lossy(), "kernel", "--connection-file", "{connection_file}"],
        "display_name": "Headroom",
        "language": "headroom",
        "interrupt_mode": "message",
        "metadata": {"debugger": false},
    })
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum Platform {
    MacOs,
    Windows,
    Other,
}

impl Platform {
    fn current() -> Self {
        if cfg!(target_os = "macos") {
            Platform::MacOs
        } else if cfg!(windows) {
            Platform::Windows
        } else {
            Platform::Other
        }
    }
}

fn user_data_dir(
    env: &dyn Fn(&str) -> Option<PathBuf>,
    platform: Platform,
) -> anyhow::Result<PathBuf> {
    if let Some(dir) = env("JUPYTER_DATA_DIR") {
        return Ok(dir);
    }
    let home = || {
        env("HOME")
            .or_else(|| env("USERPROFILE"))
            .context("cannot tell the home directory: set HOME or JUPYTER_DATA_DIR")
    };
    Ok(match platform {
        Platform::MacOs => home()?.join("Library").join("Jupyter"),
        Platform::Windows => env("APPDATA")
            .context("cannot tell the data directory: set APPDATA or JUPYTER_DATA_DIR")?
            .join("jupyter"),
        Platform::Other => match env("XDG_DATA_HOME") {
            Some(xdg) => xdg.join("jupyter"),
            None => home()?.join(".local").join("share").join("jupyter"),
        },
    })
}

/// A Rust binary has no Python prefix of its own: the active environment tells, else the
/// `jupyter` command that is on the PATH.
fn sys_prefix_data_dir(env: &dyn Fn(&str) -> Option<PathBuf>) -> anyhow::Result<PathBuf> {
    if let Some(prefix) = env("VIRTUAL_ENV").or_else(|| env("CONDA_PREFIX")) {
        return Ok(prefix.join("share").join("jupyter"));
    }
    let output = std::process::Command::new("jupyter")
        .args(["--paths", "--json"])
        .output();
    let paths = match output {
        Ok(o) if o.status.success() => serde_json::from_slice::<serde_json::Value>(&o.stdout).ok(),
        _ => None,
    };
    let user = user_data_dir(env, Platform::current()).ok();
    if let Some(dir) = paths
        .as_ref()
        .and_then(|p| env_data_dir(p, env, user.as_deref()))
    {
        return Ok(dir);
    }
    bail!(
        "cannot tell which environment --sys-prefix means: no VIRTUAL_ENV or CONDA_PREFIX is set, \
         and `jupyter --paths --json` did not name one. Activate the environment, or use \
         --prefix DIR (the kernelspec then goes to DIR/share/jupyter/kernels) or --user."
    )
}

/// The environment's entry of `jupyter --paths --json`: its `data` list holds the
/// `JUPYTER_PATH` entries, the user directory, then `sys.prefix/share/jupyter`, then the
/// system directories.
fn env_data_dir(
    paths: &serde_json::Value,
    env: &dyn Fn(&str) -> Option<PathBuf>,
    user: Option<&Path>,
) -> Option<PathBuf> {
    let jupyter_path: Vec<PathBuf> = env("JUPYTER_PATH")
        .map(|p| std::env::split_paths(&p).collect())
        .unwrap_or_default();
    let system = [
        PathBuf::from("/usr/local/share/jupyter"),
        PathBuf::from("/usr/share/jupyter"),
    ];
    let program_data = env("PROGRAMDATA").map(|p| p.join("jupyter"));
    paths
        .get("data")?
        .as_array()?
        .iter()
        .filter_map(|v| v.as_str().map(PathBuf::from))
        .find(|p| {
            !jupyter_path.contains(p)
                && Some(p.as_path()) != user
                && !system.contains(p)
                && program_data.as_ref() != Some(p)
        })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::HashMap;

    fn env_of(vars: &[(&str, &str)]) -> impl Fn(&str) -> Option<PathBuf> {
        let map: HashMap<String, PathBuf> = vars
            .iter()
            .map(|(k, v)| (k.to_string(), PathBuf::from(v)))
            .collect();
        move |k| map.get(k).cloned()
    }

    #[test]
    fn jupyter_data_dir_wins_everywhere() {
        let env = env_of(&[
            ("JUPYTER_DATA_DIR", "/d"),
            ("HOME", "/h"),
            ("XDG_DATA_HOME", "/x"),
        ]);
        for p in [Platform::MacOs, Platform::Windows, Platform::Other] {
            assert_eq!(user_data_dir(&env, p).ok(), Some(PathBuf::from("/d")));
        }
    }

    #[test]
    fn linux_follows_xdg_then_dot_local() {
        let env = env_of(&[("HOME", "/home/ana"), ("XDG_DATA_HOME", "/xdg")]);
        assert_eq!(
            user_data_dir(&env, Platform::Other).ok(),
            Some(PathBuf::from("/xdg/jupyter"))
        );
        let env = env_of(&[("HOME", "/home/ana")]);
        assert_eq!(
            user_data_dir(&env, Platform::Other).ok(),
            Some(PathBuf::from("/home/ana/.local/share/jupyter"))
        );
    }

    #[test]
    fn macos_and_windows_locations() {
        let env = env_of(&[("HOME", "/Users/ana"), ("APPDATA", "/appdata")]);
        assert_eq!(
            user_data_dir(&env, Platform::MacOs).ok(),
            Some(PathBuf::from("/Users/ana/Library/Jupyter"))
        );
        assert_eq!(
            user_data_dir(&env, Platform::Windows).ok(),
            Some(PathBuf::from("/appdata/jupyter"))
        );
    }

    #[test]
    fn sys_prefix_uses_the_active_environment() {
        let env = env_of(&[("VIRTUAL_ENV", "/venvs/a"), ("CONDA_PREFIX", "/conda")]);
        assert_eq!(
            sys_prefix_data_dir(&env).ok(),
            Some(PathBuf::from("/venvs/a/share/jupyter"))
        );
        let env = env_of(&[("CONDA_PREFIX", "/conda")]);
        assert_eq!(
            sys_prefix_data_dir(&env).ok(),
            Some(PathBuf::from("/conda/share/jupyter"))
        );
    }

    #[test]
    fn the_environment_entry_of_jupyter_paths() {
        let paths = json!({"data": ["/jp", "/home/ana/.local/share/jupyter", "/opt/py/share/jupyter",
                                    "/usr/local/share/jupyter", "/usr/share/jupyter"]});
        let env = env_of(&[("JUPYTER_PATH", "/jp")]);
        let user = PathBuf::from("/home/ana/.local/share/jupyter");
        assert_eq!(
            env_data_dir(&paths, &env, Some(&user)),
            Some(PathBuf::from("/opt/py/share/jupyter"))
        );
        // A system Python (prefix /usr) leaves nothing that is clearly an environment.
        let paths = json!({"data": ["/home/ana/.local/share/jupyter", "/usr/local/share/jupyter",
                                    "/usr/share/jupyter"]});
        assert_eq!(env_data_dir(&paths, &env_of(&[]), Some(&user)), None);
    }

    #[test]
    fn the_kernelspec_names_this_binary_and_message_interrupts() {
        let dir = tempfile::tempdir().expect("temp dir");
        let exe = PathBuf::from("/opt/headroom/bin/headroom");
        let spec_dir = write_kernelspec(dir.path(), &exe).expect("written");
        assert_eq!(spec_dir, dir.path().join("kernels/headroom"));
        let text = std::fs::read_to_string(spec_dir.join("kernel.json")).expect("kernel.json");
        let spec: serde_json::Value = serde_json::from_str(&text).expect("valid JSON");
        assert_eq!(
            spec["argv"],
            json!([
                "/opt/headroom/bin/headroom",
                "kernel",
                "--connection-file",
                "{connection_file}"
            ])
        );
        assert_eq!(spec["interrupt_mode"], "message");
        assert_eq!(spec["language"], "headroom");
        // PNG files start with the 8-byte signature 89 50 4E 47 0D 0A 1A 0A (RFC 2083 §3.1).
        let png = std::fs::read(spec_dir.join("logo-64x64.png")).expect("logo");
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
        assert!(spec_dir.join("logo-svg.svg").exists());
    }
}
