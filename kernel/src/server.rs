//! The Jupyter kernel: messaging protocol 5.4 over ZeroMQ (the `zeromq` crate on tokio).
//!
//! - `connection` reads the connection file and binds the sockets it names;
//! - `wire` frames, signs and verifies messages;
//! - `handlers` answers requests, one dispatch path per channel;
//! - `execute` turns a worksheet run into what is published; `history` keeps the inputs;
//! - `cursor` converts Jupyter's code-point positions to the language's byte offsets.
//!
//! Two threads, each with a current-thread tokio runtime. The shell thread serves shell and
//! iopub: a reader, the worker (which evaluates cells on this thread, without handing them
//! to another) and the iopub publisher. The main thread serves control, heartbeat and stdin,
//! and watches SIGINT and the parent process, so an interrupt or a shutdown never waits for
//! a cell.
//! IOPub is a plain PUB socket: XPUB in `zeromq` 0.7 stalls every subscriber when one stops
//! reading.

mod connection;
mod cursor;
mod execute;
mod handlers;
mod history;
mod wire;

use connection::Connection;
use handlers::{Replier, Shared, Shell};
use std::path::Path;
use std::sync::Arc;
use std::time::Duration;
use tokio::sync::{mpsc, Notify};
use worksheet_lang::Interrupt;
use zeromq::{Socket, SocketRecv, SocketSend};

/// `send` returns before the bytes are on the wire; this long after the shutdown reply the
/// kernel exits.
const SHUTDOWN_GRACE: Duration = Duration::from_millis(100);

/// Stack of the threads that evaluate worksheets.
pub const EVAL_STACK_BYTES: usize = 64 * 1024 * 1024;

pub fn serve(connection_file: &Path) -> anyhow::Result<()> {
    // The kernel's sockets and files are its user's alone.
    #[cfg(unix)]
    // SAFETY: umask only sets the process's file-creation mask; it cannot fail.
    unsafe {
        libc::umask(0o077);
    }
    let conn = Connection::load(connection_file)?;
    // This thread serves control, heartbeat and stdin; `run` starts the shell thread, which
    // serves shell and iopub and evaluates. Each thread's tasks share it, so a request, its
    // evaluation and its replies cross no other thread.
    let runtime = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()?;
    let result = runtime.block_on(run(&conn));
    runtime.shutdown_timeout(Duration::from_millis(200));
    for path in conn.ipc_paths() {
        let _ = std::fs::remove_file(path);
    }
    result
}

async fn run(conn: &Connection) -> anyhow::Result<()> {
    let ep = conn.endpoints();
    let (iopub_tx, iopub_rx) = mpsc::unbounded_channel();
    let shared = Arc::new(Shared {
        session: wire::Session::new(conn.key.clone()),
        key: conn.key.clone(),
        iopub: iopub_tx,
        interrupt: Interrupt::new(),
        shutdown: Notify::new(),
        busy: std::sync::atomic::AtomicBool::new(false),
        seen: Default::default(),
    });
    // The shell thread binds its sockets while this one binds the others.
    let (bound_tx, bound_rx) = tokio::sync::oneshot::channel();
    let shell_shared = shared.clone();
    let (shell_ep, iopub_ep) = (ep.shell.clone(), ep.iopub.clone());
    std::thread::Builder::new()
        .name("headroom-shell".into())
        // Evaluation recurses over nested expressions and calls (both capped by the
        // language); a roomy stack keeps the deepest allowed worksheet far from the guard.
        .stack_size(EVAL_STACK_BYTES)
        .spawn(move || serve_shell(shell_ep, iopub_ep, shell_shared, iopub_rx, bound_tx))?;

    let mut control = zeromq::RouterSocket::new();
    connection::bind(&mut control, &ep.control).await?;
    let mut stdin = zeromq::RouterSocket::new();
    connection::bind(&mut stdin, &ep.stdin).await?;
    let mut heartbeat = zeromq::RepSocket::new();
    connection::bind(&mut heartbeat, &ep.heartbeat).await?;
    match bound_rx.await {
        Ok(Ok(())) => {}
        Ok(Err(e)) => return Err(e),
        Err(_) => anyhow::bail!("the shell thread stopped while binding its sockets"),
    }
    tracing::info!("kernel listening on {}", ep.shell);

    tokio::spawn(echo_heartbeat(heartbeat));
    tokio::spawn(drain_stdin(stdin));
    tokio::spawn(interrupt_on_sigint(shared.interrupt.clone()));
    tokio::spawn(exit_with_parent(shared.clone()));

    let (control_send, control_recv) = control.split();
    let replier = Replier {
        socket: control_send,
    };
    tokio::spawn(handlers::serve_control(
        control_recv,
        replier,
        shared.clone(),
    ));

    shared.shutdown.notified().await;
    // A cell that was running when the shutdown came answers before the kernel goes (the
    // evaluation was interrupted, so this is short).
    let deadline = tokio::time::Instant::now() + BUSY_AT_SHUTDOWN;
    while shared.busy.load(std::sync::atomic::Ordering::SeqCst)
        && tokio::time::Instant::now() < deadline
    {
        tokio::time::sleep(Duration::from_millis(5)).await;
    }
    tokio::time::sleep(SHUTDOWN_GRACE).await;
    Ok(())
}

/// The shell thread: binds shell and iopub (saying how that went on `bound`), then serves
/// them until the process ends.
fn serve_shell(
    shell_ep: String,
    iopub_ep: String,
    shared: Arc<Shared>,
    iopub_rx: mpsc::UnboundedReceiver<zeromq::ZmqMessage>,
    bound: tokio::sync::oneshot::Sender<anyhow::Result<()>>,
) {
    let runtime = match tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
    {
        Ok(r) => r,
        Err(e) => {
            let _ = bound.send(Err(e.into()));
            return;
        }
    };
    let on_exit = shared.clone();
    let served = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        runtime.block_on(async move {
            let mut shell = zeromq::RouterSocket::new();
            let mut iopub = zeromq::PubSocket::new();
            let binding = async {
                connection::bind(&mut shell, &shell_ep).await?;
                connection::bind(&mut iopub, &iopub_ep).await
            };
            if let Err(e) = binding.await {
                let _ = bound.send(Err(e));
                return false;
            }
            let _ = bound.send(Ok(()));
            tokio::spawn(publish(iopub, iopub_rx));
            let (shell_send, shell_recv) = shell.split();
            let (queue_tx, queue_rx) = mpsc::unbounded_channel();
            tokio::spawn(handlers::read_shell(shell_recv, shared.clone(), queue_tx));
            let replier = Replier { socket: shell_send };
            Shell::new(shared, replier, queue_rx).run().await;
            true
        })
    }));
    // Serving ends only when the shell socket closes or the worker panics outside a cell
    // (a cell's own panic is caught and answered). A kernel without its shell would look
    // alive to the heartbeat and answer nothing: it shuts down, so the client can restart it.
    if served.unwrap_or(true) {
        tracing::error!("the shell channel stopped; shutting the kernel down");
        on_exit.interrupt.raise();
        on_exit.shutdown.notify_one();
    }
}

/// How long a shutdown waits for a running request's reply.
const BUSY_AT_SHUTDOWN: Duration = Duration::from_secs(2);

/// A kernel whose manager has died would serve nobody and hold its ports: when the parent
/// process changes (the kernel was re-parented) or the process named by `JPY_PARENT_PID`
/// is gone, the kernel shuts down.
async fn exit_with_parent(shared: Arc<Shared>) {
    #[cfg(unix)]
    {
        let parent = std::os::unix::process::parent_id();
        let named: Option<i32> = std::env::var("JPY_PARENT_PID")
            .ok()
            .and_then(|p| p.parse().ok());
        loop {
            tokio::time::sleep(Duration::from_secs(1)).await;
            // SAFETY: kill with signal 0 only asks whether the process exists.
            let named_gone = named.is_some_and(|pid| {
                pid > 0
                    && unsafe { libc::kill(pid, 0) } != 0
                    && std::io::Error::last_os_error().raw_os_error() == Some(libc::ESRCH)
            });
            if std::os::unix::process::parent_id() != parent || named_gone {
                tracing::warn!("the process that started the kernel is gone; shutting down");
                shared.interrupt.raise();
                shared.shutdown.notify_one();
                return;
            }
        }
    }
    #[cfg(not(unix))]
    {
        let _ = shared;
        std::future::pending::<()>().await;
    }
}

async fn publish(
    mut socket: zeromq::PubSocket,
    mut rx: mpsc::UnboundedReceiver<zeromq::ZmqMessage>,
) {
    while let Some(frames) = rx.recv().await {
        if let Err(e) = socket.send(frames).await {
            tracing::warn!("cannot publish on iopub: {e}");
        }
    }
}

async fn echo_heartbeat(mut socket: zeromq::RepSocket) {
    loop {
        match socket.recv().await {
            Ok(ping) => {
                if let Err(e) = socket.send(ping).await {
                    tracing::warn!("heartbeat reply failed: {e}");
                }
            }
            Err(e) => {
                tracing::error!("the heartbeat socket closed: {e}");
                return;
            }
        }
    }
}

/// The language never asks for input, but the socket must be bound and read so that a
/// client's stray `input_reply` does not pile up.
async fn drain_stdin(mut socket: zeromq::RouterSocket) {
    while let Ok(frames) = socket.recv().await {
        tracing::debug!("ignoring a message on stdin ({} frames)", frames.len());
    }
}

/// Clients send SIGINT on interrupt (with `interrupt_mode: "signal"`) and before shutting a
/// kernel down; it stops the running evaluation and must not kill the kernel.
async fn interrupt_on_sigint(interrupt: Interrupt) {
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        let mut sigint = match signal(SignalKind::interrupt()) {
            Ok(s) => s,
            Err(e) => {
                tracing::warn!("cannot watch SIGINT: {e}");
                return;
            }
        };
        while sigint.recv().await.is_some() {
            tracing::info!("SIGINT: interrupting the running evaluation");
            interrupt.raise();
        }
    }
    #[cfg(not(unix))]
    while tokio::signal::ctrl_c().await.is_ok() {
        tracing::info!("Ctrl-C: interrupting the running evaluation");
        interrupt.raise();
    }
}
