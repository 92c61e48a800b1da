//! The connection file Jupyter writes for a kernel, and binding the five sockets it names.

use anyhow::{bail, Context};
use jupyter_protocol::{ConnectionInfo, Transport};
use ring::hmac;
use std::path::{Path, PathBuf};
use zeromq::Socket;

/// The only signature scheme the protocol defines today.
const HMAC_SHA256: &str = "hmac-sha256";

/// A parsed connection file.
pub(crate) struct Connection {
    pub info: ConnectionInfo,
    /// `None` when the key is empty: the specification then disables signing.
    pub key: Option<hmac::Key>,
}

impl Connection {
    pub fn load(path: &Path) -> anyhow::Result<Self> {
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("cannot read the connection file {}", path.display()))?;
        Self::parse(&text)
            .with_context(|| format!("the connection file {} is not usable", path.display()))
    }

    pub fn parse(text: &str) -> anyhow::Result<Self> {
        let info: ConnectionInfo = serde_json::from_str(text)?;
        if info.signature_scheme != HMAC_SHA256 {
            bail!(
                "unknown signature_scheme {:?}: this kernel signs messages with {HMAC_SHA256:?} only",
                info.signature_scheme
            );
        }
        let key =
            (!info.key.is_empty()).then(|| hmac::Key::new(hmac::HMAC_SHA256, info.key.as_bytes()));
        Ok(Connection { info, key })
    }

    pub fn endpoints(&self) -> Endpoints {
        let i = &self.info;
        Endpoints {
            shell: i.shell_url(),
            iopub: i.iopub_url(),
            stdin: i.stdin_url(),
            control: i.control_url(),
            heartbeat: i.hb_url(),
        }
    }

    /// The socket files of an IPC connection (empty for TCP).
    pub fn ipc_paths(&self) -> Vec<PathBuf> {
        if self.info.transport != Transport::IPC {
            return Vec::new();
        }
        self.endpoints()
            .all()
            .iter()
            .filter_map(|e| e.strip_prefix("ipc://").map(PathBuf::from))
            .collect()
    }
}

pub(crate) struct Endpoints {
    pub shell: String,
    pub iopub: String,
    pub stdin: String,
    pub control: String,
    pub heartbeat: String,
}

impl Endpoints {
    fn all(&self) -> [&String; 5] {
        [
            &self.shell,
            &self.iopub,
            &self.stdin,
            &self.control,
            &self.heartbeat,
        ]
    }
}

/// Binds `socket` to `endpoint`. For IPC, a socket file left by an earlier kernel that died
/// makes the bind fail with "address in use", so a stale file is removed first; a live kernel
/// never shares our path because the client picks a fresh one per kernel.
pub(crate) async fn bind<S: Socket>(socket: &mut S, endpoint: &str) -> anyhow::Result<()> {
    if let Some(path) = endpoint.strip_prefix("ipc://") {
        match std::fs::remove_file(path) {
            Ok(()) => tracing::info!("removed a stale IPC socket file {path}"),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            Err(e) => tracing::warn!("cannot remove the stale IPC socket file {path}: {e}"),
        }
    }
    socket
        .bind(endpoint)
        .await
        .with_context(|| format!("cannot bind {endpoint}"))?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn file(scheme: &str, key: &str, transport: &str) -> String {
        format!(
            r#"{{"shell_port": 5001, "iopub_port": 5002, "stdin_port": 5003, "control_port": 5004,
                "hb_port": 5005, "ip": "/tmp/k-ipc", "key": "{key}", "transport": "{transport}",
                "signature_scheme": "{scheme}", "kernel_name": "headroom"}}"#
        )
    }

    #[test]
    fn an_unknown_signature_scheme_is_refused_by_name() {
        let err = Connection::parse(&file("hmac-md5", "k", "tcp"))
            .err()
            .map(|e| e.to_string());
        let err = err.unwrap_or_default();
        assert!(
            err.contains("hmac-md5") && err.contains("signature_scheme"),
            "{err}"
        );
    }

    #[test]
    fn an_empty_key_disables_signing() {
        let c = Connection::parse(&file("hmac-sha256", "", "tcp")).expect("valid file");
        assert!(c.key.is_none());
        let c = Connection::parse(&file("hmac-sha256", "secret", "tcp")).expect("valid file");
        assert!(c.key.is_some());
    }

    #[test]
    fn ipc_endpoints_are_path_dash_number() {
        // jupyter_client names IPC sockets "{ip}-{port}" (its connect.py, from memory).
        let c = Connection::parse(&file("hmac-sha256", "k", "ipc")).expect("valid file");
        assert_eq!(c.endpoints().shell, "ipc:///tmp/k-ipc-5001");
        assert_eq!(c.ipc_paths().len(), 5);
        assert_eq!(c.ipc_paths()[4], PathBuf::from("/tmp/k-ipc-5005"));
        let t = Connection::parse(&file("hmac-sha256", "k", "tcp")).expect("valid file");
        assert!(t.ipc_paths().is_empty());
    }
}
