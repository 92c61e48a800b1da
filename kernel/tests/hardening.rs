//! Hardening of the kernel and the command line under hostile input, faults and load, through
//! the real binary: forged signatures, malformed and oversized traffic, raw bytes on the
//! ports, clients that vanish, a long soak, interrupt and shutdown while busy, listening
//! addresses and file modes, and `headroom run` killed while it writes.
//!
//! Every server here binds 127.0.0.1 (or IPC files in a private temporary directory). Each
//! test prints its figures; bounds are generous so a loaded machine does not fail them.

#[macro_use]
mod common;

use hmac::{Hmac, Mac};
use serde_json::{json, Value};
use sha2::Sha256;
use std::collections::{BTreeSet, HashMap};
use std::io::{Read as _, Write as _};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};
use tokio::time::timeout;
use zeromq::{Socket, SocketRecv, SocketSend, ZmqMessage};

const DELIMITER: &[u8] = b"<IDS|MSG>";
const REPLY_TIMEOUT: Duration = Duration::from_secs(20);
/// How long we listen before concluding that nothing is coming.
const SILENCE: Duration = Duration::from_millis(700);

// ---------------------------------------------------------------------------------------
// The kernel process

struct Kernel {
    child: Child,
    dir: tempfile::TempDir,
    info: Value,
    file: PathBuf,
}

#[derive(Default)]
struct Start {
    ipc: bool,
    /// Run under `umask 022`, the usual default, so that file modes are the kernel's doing.
    umask_022: bool,
    env: Vec<(String, String)>,
}

fn free_ports(n: usize) -> Vec<u16> {
    // Hold every listener until all ports are known, so no two are the same.
    let listeners: Vec<_> = (0..n)
        .map(|_| std::net::TcpListener::bind("127.0.0.1:0").expect("a free port"))
        .collect();
    listeners
        .iter()
        .map(|l| l.local_addr().expect("addr").port())
        .collect()
}

impl Kernel {
    fn start(key: &str) -> Kernel {
        Self::start_with(key, Start::default())
    }

    fn start_with(key: &str, how: Start) -> Kernel {
        let dir = tempfile::tempdir().expect("temp dir");
        let info = if how.ipc {
            let ip = dir.path().join("kernel-ipc");
            json!({"transport": "ipc", "ip": ip.to_string_lossy(), "shell_port": 1, "iopub_port": 2,
                   "stdin_port": 3, "control_port": 4, "hb_port": 5, "key": key,
                   "signature_scheme": "hmac-sha256", "kernel_name": "headroom"})
        } else {
            let p = free_ports(5);
            json!({"transport": "tcp", "ip": "127.0.0.1", "shell_port": p[0], "iopub_port": p[1],
                   "stdin_port": p[2], "control_port": p[3], "hb_port": p[4], "key": key,
                   "signature_scheme": "hmac-sha256", "kernel_name": "headroom"})
        };
        let file = dir.path().join("kernel.json");
        std::fs::write(&file, info.to_string()).expect("connection file");
        let child = spawn_kernel(&file, dir.path(), &how);
        Kernel {
            child,
            dir,
            info,
            file,
        }
    }

    /// A new kernel process on the same connection file, as a client's restart does.
    fn restart_process(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
        self.child = spawn_kernel(&self.file, self.dir.path(), &Start::default());
    }

    fn pid(&self) -> u32 {
        self.child.id()
    }

    fn url(&self, channel: &str) -> String {
        let i = &self.info;
        let port = &i[format!("{channel}_port")];
        if i["transport"] == "ipc" {
            format!("ipc://{}-{}", i["ip"].as_str().unwrap_or(""), port)
        } else {
            format!("tcp://127.0.0.1:{port}")
        }
    }

    fn port(&self, channel: &str) -> u16 {
        self.info[format!("{channel}_port")]
            .as_u64()
            .and_then(|p| u16::try_from(p).ok())
            .expect("a port")
    }

    fn stderr(&self) -> String {
        std::fs::read_to_string(self.dir.path().join("stderr.log")).unwrap_or_default()
    }

    fn alive(&mut self) -> bool {
        matches!(self.child.try_wait(), Ok(None))
    }

    fn wait_exit(&mut self, within: Duration) -> Option<std::process::ExitStatus> {
        let until = Instant::now() + within;
        while Instant::now() < until {
            if let Ok(Some(status)) = self.child.try_wait() {
                return Some(status);
            }
            std::thread::sleep(Duration::from_millis(20));
        }
        None
    }

    fn rss_kib(&self) -> u64 {
        rss_kib(self.pid())
    }

    async fn connect(&self) -> Client {
        Client::connect(self, self.info["key"].as_str().unwrap_or("")).await
    }
}

fn spawn_kernel(file: &Path, dir: &Path, how: &Start) -> Child {
    let stderr = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(dir.join("stderr.log"))
        .expect("log file");
    let exe = env!("CARGO_BIN_EXE_headroom");
    let mut cmd = if how.umask_022 {
        let mut c = Command::new("sh");
        c.args([
            "-c",
            "umask 022; exec \"$0\" kernel --connection-file \"$1\"",
            exe,
        ])
        .arg(file);
        c
    } else {
        let mut c = Command::new(exe);
        c.args(["kernel", "--connection-file"]).arg(file);
        c
    };
    cmd.env("RUST_LOG", "warn")
        .envs(how.env.iter().cloned())
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(stderr)
        .spawn()
        .expect("the kernel starts")
}

impl Drop for Kernel {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn proc_status_field(pid: u32, field: &str) -> Option<u64> {
    let s = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    s.lines()
        .find_map(|l| l.strip_prefix(field))
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|v| v.parse().ok())
}

fn rss_kib(pid: u32) -> u64 {
    proc_status_field(pid, "VmRSS:").unwrap_or(0)
}

/// True while `pid` exists and is not a zombie.
fn pid_running(pid: u32) -> bool {
    match std::fs::read_to_string(format!("/proc/{pid}/stat")) {
        Ok(stat) => {
            // The state follows the parenthesised command name.
            let state = stat
                .rsplit(')')
                .next()
                .and_then(|r| r.split_whitespace().next());
            !matches!(state, Some("Z") | Some("X") | None)
        }
        Err(_) => false,
    }
}

// ---------------------------------------------------------------------------------------
// A small client (signing with RustCrypto, independently of the kernel's ring)

#[derive(Debug, Clone)]
struct Msg {
    header: Value,
    parent: Value,
    content: Value,
}

impl Msg {
    fn msg_type(&self) -> &str {
        self.header["msg_type"].as_str().unwrap_or("")
    }
    fn parent_id(&self) -> &str {
        self.parent["msg_id"].as_str().unwrap_or("")
    }
}

#[derive(Clone, Copy, Debug)]
enum Channel {
    Shell,
    Control,
}

struct Client {
    shell: zeromq::DealerSocket,
    control: zeromq::DealerSocket,
    iopub: zeromq::SubSocket,
    key: Vec<u8>,
    session: String,
}

fn hmac_hex(key: &[u8], parts: &[Vec<u8>]) -> String {
    if key.is_empty() {
        return String::new();
    }
    let mut mac = Hmac::<Sha256>::new_from_slice(key).expect("any key length");
    for p in parts {
        mac.update(p);
    }
    mac.finalize()
        .into_bytes()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

fn to_vec(v: &Value) -> Vec<u8> {
    serde_json::to_vec(v).expect("json")
}

fn zmq(frames: Vec<Vec<u8>>) -> ZmqMessage {
    let frames: Vec<bytes::Bytes> = frames.into_iter().map(bytes::Bytes::from).collect();
    ZmqMessage::try_from(frames).expect("at least one frame")
}

fn execute_content(code: &str) -> Value {
    json!({"code": code, "silent": false, "store_history": true, "user_expressions": {},
           "allow_stdin": false, "stop_on_error": true})
}

impl Client {
    async fn connect(kernel: &Kernel, key: &str) -> Client {
        let mut shell = zeromq::DealerSocket::new();
        shell.connect(&kernel.url("shell")).await.expect("shell");
        let mut control = zeromq::DealerSocket::new();
        control
            .connect(&kernel.url("control"))
            .await
            .expect("control");
        let mut iopub = zeromq::SubSocket::new();
        iopub.subscribe("").await.expect("subscribe");
        iopub.connect(&kernel.url("iopub")).await.expect("iopub");
        let mut c = Client {
            shell,
            control,
            iopub,
            key: key.as_bytes().to_vec(),
            session: uuid::Uuid::new_v4().to_string(),
        };
        c.wait_ready().await;
        c
    }

    fn header(&self, msg_type: &str) -> Value {
        json!({"msg_id": uuid::Uuid::new_v4().to_string(), "username": "tester",
               "session": self.session, "date": "2024-05-01T12:00:00.000000Z",
               "msg_type": msg_type, "version": "5.4"})
    }

    /// The four JSON parts of a request, as bytes.
    fn parts(header: &Value, content: &Value) -> Vec<Vec<u8>> {
        vec![
            to_vec(header),
            b"{}".to_vec(),
            b"{}".to_vec(),
            to_vec(content),
        ]
    }

    /// A request signed with `key`; `signature` replaces the signature when given.
    fn frames_with(
        key: &[u8],
        header: &Value,
        content: &Value,
        signature: Option<&str>,
    ) -> ZmqMessage {
        let parts = Self::parts(header, content);
        let sig = signature.map_or_else(|| hmac_hex(key, &parts), str::to_string);
        let mut frames = vec![DELIMITER.to_vec(), sig.into_bytes()];
        frames.extend(parts);
        zmq(frames)
    }

    fn socket(&mut self, channel: Channel) -> &mut zeromq::DealerSocket {
        match channel {
            Channel::Shell => &mut self.shell,
            Channel::Control => &mut self.control,
        }
    }

    async fn send_raw(&mut self, channel: Channel, frames: ZmqMessage) {
        self.socket(channel).send(frames).await.expect("send");
    }

    async fn send(&mut self, channel: Channel, msg_type: &str, content: Value) -> String {
        let header = self.header(msg_type);
        let frames = Self::frames_with(&self.key, &header, &content, None);
        self.send_raw(channel, frames).await;
        header["msg_id"].as_str().unwrap_or("").to_string()
    }

    fn decode(&self, frames: ZmqMessage) -> Msg {
        let frames = frames.into_vec();
        let d = frames
            .iter()
            .position(|f| f.as_ref() == DELIMITER)
            .expect("a delimiter frame");
        let parts: Vec<Vec<u8>> = frames[d + 2..d + 6].iter().map(|f| f.to_vec()).collect();
        let signature = String::from_utf8_lossy(&frames[d + 1]).into_owned();
        assert_eq!(
            signature,
            hmac_hex(&self.key, &parts),
            "every message is signed"
        );
        let json = |i: usize| -> Value { serde_json::from_slice(&parts[i]).expect("a JSON part") };
        Msg {
            header: json(0),
            parent: json(1),
            content: json(3),
        }
    }

    async fn recv(&mut self, channel: Channel, within: Duration) -> Option<Msg> {
        let frames = timeout(within, self.socket(channel).recv())
            .await
            .ok()?
            .ok()?;
        Some(self.decode(frames))
    }

    async fn reply(&mut self, channel: Channel, id: &str) -> Msg {
        let m = self
            .recv(channel, REPLY_TIMEOUT)
            .await
            .unwrap_or_else(|| panic!("no reply to {id} on {channel:?}"));
        assert_eq!(m.parent_id(), id, "the reply answers the request");
        m
    }

    async fn iopub_msg(&mut self, within: Duration) -> Option<Msg> {
        let frames = timeout(within, self.iopub.recv()).await.ok()?.ok()?;
        Some(self.decode(frames))
    }

    /// Everything on iopub until `quiet` passes without a message.
    async fn drain_iopub(&mut self, quiet: Duration) -> Vec<Msg> {
        let mut out = Vec::new();
        while let Some(m) = self.iopub_msg(quiet).await {
            out.push(m);
        }
        out
    }

    async fn outputs(&mut self, id: &str) -> Vec<Msg> {
        let mut out = Vec::new();
        let until = Instant::now() + REPLY_TIMEOUT;
        while Instant::now() < until {
            let Some(m) = self.iopub_msg(REPLY_TIMEOUT).await else {
                break;
            };
            if m.parent_id() != id {
                continue;
            }
            let idle = m.msg_type() == "status" && m.content["execution_state"] == "idle";
            out.push(m);
            if idle {
                return out;
            }
        }
        panic!("no idle status for {id}");
    }

    /// A late subscriber misses messages: ask for kernel_info until its idle status shows.
    async fn wait_ready(&mut self) {
        for _ in 0..100 {
            let id = self
                .send(Channel::Shell, "kernel_info_request", json!({}))
                .await;
            let _ = self.reply(Channel::Shell, &id).await;
            let until = Instant::now() + Duration::from_millis(300);
            while Instant::now() < until {
                if let Some(m) = self.iopub_msg(Duration::from_millis(100)).await {
                    if m.parent_id() == id && m.content["execution_state"] == "idle" {
                        return;
                    }
                }
            }
        }
        panic!("iopub never delivered");
    }

    async fn execute(&mut self, code: &str) -> (Msg, Vec<Msg>) {
        let id = self
            .send(Channel::Shell, "execute_request", execute_content(code))
            .await;
        let reply = self.reply(Channel::Shell, &id).await;
        let outputs = self.outputs(&id).await;
        (reply, outputs)
    }

    /// kernel_info on shell: the kernel is up and serving, and this is the next reply.
    async fn assert_serving(&mut self, after: &str) {
        let id = self
            .send(Channel::Shell, "kernel_info_request", json!({}))
            .await;
        let r = self
            .recv(Channel::Shell, REPLY_TIMEOUT)
            .await
            .unwrap_or_else(|| panic!("no kernel_info reply after {after}"));
        assert_eq!(
            r.parent_id(),
            id,
            "after {after}: the next reply answers kernel_info"
        );
        assert_eq!(r.content["status"], "ok");
    }

    async fn wait_for_input(&mut self, id: &str) {
        loop {
            let m = self.iopub_msg(REPLY_TIMEOUT).await.expect("execute_input");
            if m.parent_id() == id && m.msg_type() == "execute_input" {
                return;
            }
        }
    }
}

async fn shut_down(kernel: &mut Kernel, client: &mut Client) {
    let id = client
        .send(
            Channel::Control,
            "shutdown_request",
            json!({"restart": false}),
        )
        .await;
    let _ = client.reply(Channel::Control, &id).await;
    assert!(
        kernel.wait_exit(Duration::from_secs(10)).is_some(),
        "the kernel exits"
    );
}

fn text_of(outputs: &[Msg], msg_type: &str) -> String {
    outputs
        .iter()
        .filter(|m| m.msg_type() == msg_type)
        .filter_map(|m| m.content["data"]["text/plain"].as_str())
        .collect::<Vec<_>>()
        .join("\n")
}

// ---------------------------------------------------------------------------------------
// Signatures

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_thousand_forged_messages_are_never_acted_on() {
    let mut kernel = Kernel::start("the-kernel-key");
    let mut c = kernel.connect().await;
    let other_key = b"a-key-from-another-kernel".to_vec();
    let started = Instant::now();
    let mut kinds: HashMap<&str, usize> = HashMap::new();
    for i in 0..1000 {
        // Each forged request would leave a visible trace if acted on: a definition, an
        // output, a shutdown, a busy status.
        let (msg_type, content, channel) = match i % 4 {
            0 => (
                "execute_request",
                execute_content(&format!("forged{i} = {i} V")),
                Channel::Shell,
            ),
            1 => ("kernel_info_request", json!({}), Channel::Shell),
            2 => (
                "shutdown_request",
                json!({"restart": false}),
                Channel::Control,
            ),
            _ => ("interrupt_request", json!({}), Channel::Control),
        };
        let header = c.header(msg_type);
        let parts = Client::parts(&header, &content);
        let good = hmac_hex(&c.key, &parts);
        let (kind, frames) = match (i / 4) % 5 {
            0 => (
                "another key",
                Client::frames_with(b"wrong", &header, &content, None),
            ),
            1 => (
                "truncated",
                Client::frames_with(&c.key, &header, &content, Some(&good[..good.len() / 2])),
            ),
            2 => (
                "missing",
                Client::frames_with(&c.key, &header, &content, Some("")),
            ),
            // A message as another kernel's client signed it, replayed here.
            3 => (
                "replayed from another key",
                Client::frames_with(&other_key, &header, &content, None),
            ),
            // The right key over different content: tampered after signing.
            _ => {
                let tampered = json!({"code": "tampered = 1 V", "silent": false});
                let sig = hmac_hex(&c.key, &Client::parts(&header, &tampered));
                (
                    "tampered",
                    Client::frames_with(&c.key, &header, &content, Some(&sig)),
                )
            }
        };
        *kinds.entry(kind).or_default() += 1;
        c.send_raw(channel, frames).await;
    }
    let sent = started.elapsed();
    let shell = c.recv(Channel::Shell, SILENCE).await;
    let control = c.recv(Channel::Control, SILENCE).await;
    let iopub = c.drain_iopub(SILENCE).await;
    println!(
        "forged messages: 1000 sent in {sent:?} ({kinds:?}); replies {}, iopub messages {}",
        usize::from(shell.is_some()) + usize::from(control.is_some()),
        iopub.len()
    );
    assert!(
        shell.is_none(),
        "a forged request was answered on shell: {shell:?}"
    );
    assert!(
        control.is_none(),
        "a forged request was answered on control: {control:?}"
    );
    assert!(
        iopub.is_empty(),
        "a forged request was acted on: {:?}",
        iopub.iter().map(Msg::msg_type).collect::<Vec<_>>()
    );
    assert!(kernel.alive(), "a forged shutdown was obeyed");
    // The correct client is served, nothing forged ran, nothing was counted.
    let (r, _) = c.execute("forged0").await;
    assert_eq!(
        r.content["status"], "error",
        "a forged definition exists: {:?}",
        r.content
    );
    assert_eq!(r.content["ename"], "UnknownName");
    assert_eq!(
        r.content["execution_count"], 1,
        "forged executes were counted"
    );
    let (r, _) = c.execute("tampered").await;
    assert_eq!(r.content["ename"], "UnknownName");
    let dropped = kernel.stderr().matches("dropped a message").count();
    println!("forged messages: {dropped} drops logged");
    assert!(dropped >= 1000, "each drop is logged: {dropped}");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn an_exact_replay_of_a_signed_request_is_refused() {
    // jupyter_client's Session refuses a signature it has seen before; the kernel does too.
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let header = c.header("execute_request");
    let content = execute_content("replayed = 1 V");
    let frames = Client::frames_with(&c.key, &header, &content, None);
    c.send_raw(Channel::Shell, frames.clone()).await;
    let first = c
        .recv(Channel::Shell, REPLY_TIMEOUT)
        .await
        .expect("the original is served");
    assert_eq!(first.content["execution_count"], 1);
    c.send_raw(Channel::Shell, frames).await;
    let second = c.recv(Channel::Shell, SILENCE * 2).await;
    println!(
        "an exact replay of a signed execute_request: {}",
        match &second {
            Some(m) => format!(
                "acted on again (execution_count {})",
                m.content["execution_count"]
            ),
            None => "refused".into(),
        }
    );
    assert!(second.is_none(), "a replayed request must not be served");
    c.assert_serving("a replay").await;
    shut_down(&mut kernel, &mut c).await;
}

// ---------------------------------------------------------------------------------------
// Malformed traffic

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn malformed_frames_and_json_are_dropped_and_the_kernel_serves_on() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let key = c.key.clone();
    let h = c.header("execute_request");
    let good = execute_content("x = 1 V");
    let signed = |parts: Vec<Vec<u8>>| -> ZmqMessage {
        let sig = hmac_hex(&key, &parts);
        let mut f = vec![DELIMITER.to_vec(), sig.into_bytes()];
        f.extend(parts);
        zmq(f)
    };
    let hb = to_vec(&h);
    let cases: Vec<(&str, ZmqMessage)> = vec![
        ("one empty frame", zmq(vec![Vec::new()])),
        ("the delimiter alone", zmq(vec![DELIMITER.to_vec()])),
        (
            "delimiter and signature only",
            zmq(vec![DELIMITER.to_vec(), b"00".to_vec()]),
        ),
        ("three JSON parts", {
            let parts = vec![hb.clone(), b"{}".to_vec(), b"{}".to_vec()];
            signed(parts)
        }),
        (
            "no delimiter",
            zmq(vec![
                b"sig".to_vec(),
                hb.clone(),
                b"{}".to_vec(),
                b"{}".to_vec(),
                to_vec(&good),
            ]),
        ),
        (
            "two delimiters",
            zmq(vec![
                DELIMITER.to_vec(),
                DELIMITER.to_vec(),
                hb.clone(),
                b"{}".to_vec(),
                b"{}".to_vec(),
                to_vec(&good),
            ]),
        ),
        ("200 empty frames", zmq(vec![Vec::new(); 200])),
        (
            "invalid JSON header, signed",
            signed(vec![
                b"{not json".to_vec(),
                b"{}".to_vec(),
                b"{}".to_vec(),
                to_vec(&good),
            ]),
        ),
        (
            "invalid UTF-8 header, signed",
            signed(vec![
                vec![0xff, 0xfe, 0x7b],
                b"{}".to_vec(),
                b"{}".to_vec(),
                to_vec(&good),
            ]),
        ),
        (
            "header is an array, signed",
            signed(vec![
                b"[1,2]".to_vec(),
                b"{}".to_vec(),
                b"{}".to_vec(),
                to_vec(&good),
            ]),
        ),
        (
            "content is a string, signed",
            signed(vec![
                hb.clone(),
                b"{}".to_vec(),
                b"{}".to_vec(),
                b"\"x = 1 V\"".to_vec(),
            ]),
        ),
        (
            "content is null, signed",
            signed(vec![
                hb.clone(),
                b"{}".to_vec(),
                b"{}".to_vec(),
                b"null".to_vec(),
            ]),
        ),
        (
            "metadata is a number, signed",
            signed(vec![
                hb.clone(),
                b"{}".to_vec(),
                b"7".to_vec(),
                to_vec(&good),
            ]),
        ),
        (
            "header without msg_type, signed",
            signed(vec![
                to_vec(&json!({"msg_id": "m"})),
                b"{}".to_vec(),
                b"{}".to_vec(),
                to_vec(&good),
            ]),
        ),
        (
            "msg_type is a number, signed",
            signed(vec![
                to_vec(&json!({"msg_id": "m", "msg_type": 5})),
                b"{}".to_vec(),
                b"{}".to_vec(),
                to_vec(&good),
            ]),
        ),
        (
            "JSON nested 100 000 deep, signed",
            signed(vec![
                hb.clone(),
                b"{}".to_vec(),
                b"{}".to_vec(),
                format!(
                    "{{\"code\":{}1{}}}",
                    "[".repeat(100_000),
                    "]".repeat(100_000)
                )
                .into_bytes(),
            ]),
        ),
        ("a 1 MiB non-hex signature", {
            let mut f = vec![DELIMITER.to_vec(), vec![b'z'; 1 << 20]];
            f.extend(Client::parts(&h, &good));
            zmq(f)
        }),
    ];
    let n = cases.len();
    for channel in [Channel::Shell, Channel::Control] {
        for (_, frames) in &cases {
            c.send_raw(channel, frames.clone()).await;
        }
    }
    // The JSON nesting case parses (serde_json stops at depth 128) into an error reply or
    // a drop; nothing else may come back, and the kernel must serve the next request.
    let mut answered = Vec::new();
    while let Some(m) = c.recv(Channel::Shell, SILENCE).await {
        answered.push(m.content.clone());
    }
    while let Some(m) = c.recv(Channel::Control, SILENCE).await {
        answered.push(m.content.clone());
    }
    let ran: Vec<String> = c
        .drain_iopub(SILENCE)
        .await
        .iter()
        .filter(|m| m.msg_type() == "execute_input")
        .map(|m| m.content["code"].to_string())
        .collect();
    println!(
        "malformed traffic: {} messages on shell and control, {} answered, {} ran",
        2 * n,
        answered.len(),
        ran.len()
    );
    for a in &answered {
        assert_eq!(
            a["status"], "error",
            "only error replies to malformed requests: {a}"
        );
    }
    assert!(ran.is_empty(), "a malformed request ran: {ran:?}");
    assert!(kernel.alive(), "the kernel died: {}", kernel.stderr());
    c.assert_serving("malformed traffic").await;
    let (r, _) = c.execute("y = 2 V").await;
    assert_eq!(
        r.content["execution_count"], 1,
        "nothing malformed was counted"
    );
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn wrong_types_in_content_get_error_replies() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let cases = [
        ("execute_request", json!({"code": 42})),
        (
            "execute_request",
            json!({"code": "x = 1 V", "silent": "yes"}),
        ),
        ("execute_request", json!({"code": ["x = 1 V"]})),
        ("execute_request", json!({})),
        ("complete_request", json!({"code": "x", "cursor_pos": -1})),
        (
            "complete_request",
            json!({"code": "x", "cursor_pos": "end"}),
        ),
        ("inspect_request", json!({"code": null, "cursor_pos": 0})),
        ("is_complete_request", json!({"code": 1.5})),
        (
            "history_request",
            json!({"hist_access_type": "tail", "n": "ten"}),
        ),
    ];
    let mut errors = 0;
    for (msg_type, content) in &cases {
        let id = c.send(Channel::Shell, msg_type, content.clone()).await;
        let r = c.reply(Channel::Shell, &id).await;
        assert_eq!(
            r.content["status"], "error",
            "{msg_type} {content}: {:?}",
            r.content
        );
        assert!(
            r.content["evalue"].as_str().is_some_and(|e| !e.is_empty()),
            "the error says what is wrong: {:?}",
            r.content
        );
        errors += 1;
    }
    // Positions far past the end are clamped, not a crash.
    for (msg_type, pos) in [
        ("complete_request", u64::MAX / 2),
        ("inspect_request", 1u64 << 40),
    ] {
        let id = c
            .send(
                Channel::Shell,
                msg_type,
                json!({"code": "θ = 1 V", "cursor_pos": pos}),
            )
            .await;
        let r = c.reply(Channel::Shell, &id).await;
        assert!(r.content["status"].is_string(), "{:?}", r.content);
    }
    println!("wrong types in content: {errors} requests, {errors} error replies");
    c.assert_serving("wrong types").await;
    let (r, _) = c.execute("x = 1 V").await;
    assert_eq!(
        r.content["execution_count"], 1,
        "no malformed execute was counted"
    );
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn unknown_message_types_get_no_reply_and_are_logged() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let types = [
        "frobnicate_request",
        "execute_reply",
        "",
        "input_reply",
        "comm_open",
        "debug_request",
        "x".repeat(10_000).leak(),
    ];
    for t in &types {
        let _ = c.send(Channel::Shell, t, json!({})).await;
        let _ = c.send(Channel::Control, t, json!({})).await;
    }
    let shell = c.recv(Channel::Shell, SILENCE).await;
    let control = c.recv(Channel::Control, SILENCE).await;
    println!(
        "unknown message types: {} sent on shell and control, replies {:?} / {:?}",
        2 * types.len(),
        shell.as_ref().map(Msg::msg_type),
        control.as_ref().map(Msg::msg_type)
    );
    // The message specification: a kernel does not reply to a message type it does not
    // know. (comm_open and debug_request are known to the specification but not served by
    // a kernel without comms or a debugger, which then ignores them the same way.)
    assert!(shell.is_none() && control.is_none());
    assert!(
        kernel.stderr().contains("frobnicate_request"),
        "the kernel logs it"
    );
    c.assert_serving("unknown types").await;
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_64_mib_message_is_served_and_the_kernel_stays_up() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let before = kernel.rss_kib();
    let big = "p".repeat(64 << 20);
    // Padding the kernel ignores, correctly signed.
    let started = Instant::now();
    let id = c
        .send(
            Channel::Shell,
            "kernel_info_request",
            json!({"padding": big}),
        )
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    let info_took = started.elapsed();
    assert_eq!(r.content["status"], "ok");
    // The same size with a bad signature is dropped.
    let h = c.header("execute_request");
    let frames = Client::frames_with(b"wrong", &h, &json!({"code": big}), None);
    c.send_raw(Channel::Shell, frames).await;
    // And a 64 MiB cell: refused as too large (the cap is 1 MiB), with a clear error.
    let code = format!("# {big}\nafter = 3 V");
    let started = Instant::now();
    let id = c
        .send(Channel::Shell, "execute_request", execute_content(&code))
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    let exec_took = started.elapsed();
    assert_eq!(r.content["status"], "error", "{:?}", r.content);
    assert_eq!(r.content["ename"], "LimitExceeded", "{:?}", r.content);
    let (r, _) = c.execute("after = 3 V").await;
    assert_eq!(r.content["status"], "ok");
    drop(code);
    let _ = c.drain_iopub(SILENCE).await;
    let peak = proc_status_field(kernel.pid(), "VmHWM:").unwrap_or(0);
    let after = kernel.rss_kib();
    println!(
        "64 MiB messages: kernel_info with 64 MiB padding answered in {info_took:?}; a 64 MiB \
         cell was refused in {exec_took:?}; RSS {before} KiB before, {after} KiB after, peak {peak} KiB"
    );
    let (r, out) = c.execute("after * 2").await;
    assert_eq!(r.content["status"], "ok");
    assert!(
        text_of(&out, "execute_result").contains('6'),
        "after = 3 V, doubled is 6 V"
    );
    shut_down(&mut kernel, &mut c).await;
}

// ---------------------------------------------------------------------------------------
// Raw bytes on the ports

/// The ZMTP 3.0 greeting of a NULL-mechanism client (RFC 23/ZMTP, section "Greeting"), and
/// its READY command naming a socket type.
fn zmtp_greeting_and_ready(socket_type: &str) -> Vec<u8> {
    let mut g = vec![0xFF, 0, 0, 0, 0, 0, 0, 0, 1, 0x7F, 3, 0];
    let mut mech = b"NULL".to_vec();
    mech.resize(20, 0);
    g.extend(mech);
    g.push(0); // as-server
    g.extend([0u8; 31]);
    let mut body = vec![5];
    body.extend(b"READY");
    body.push(11);
    body.extend(b"Socket-Type");
    body.extend((socket_type.len() as u32).to_be_bytes());
    body.extend(socket_type.as_bytes());
    g.push(0x04); // a short command frame
    g.push(u8::try_from(body.len()).expect("short"));
    g.extend(body);
    g
}

fn raw_tcp(port: u16, bytes: &[u8], then_read: bool) -> std::io::Result<()> {
    let mut s = std::net::TcpStream::connect(("127.0.0.1", port))?;
    s.set_write_timeout(Some(Duration::from_secs(2)))?;
    s.set_read_timeout(Some(Duration::from_millis(200)))?;
    s.write_all(bytes)?;
    if then_read {
        let mut buf = [0u8; 256];
        let _ = s.read(&mut buf);
    }
    Ok(())
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn raw_bytes_and_truncated_frames_on_every_port_do_not_stop_the_kernel() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let mut faults = 0;
    let mut rng: u64 = 0x9E37_79B9_7F4A_7C15;
    let mut noise = |n: usize| -> Vec<u8> {
        (0..n)
            .map(|_| {
                // xorshift64: reproducible noise without a dependency.
                rng ^= rng << 13;
                rng ^= rng >> 7;
                rng ^= rng << 17;
                (rng >> 24) as u8
            })
            .collect()
    };
    for channel in ["shell", "control", "iopub", "stdin", "hb"] {
        let port = kernel.port(channel);
        let sock_type = if channel == "iopub" {
            "SUB"
        } else if channel == "hb" {
            "REQ"
        } else {
            "DEALER"
        };
        let mut cases: Vec<(&str, Vec<u8>)> = vec![
            ("nothing", Vec::new()),
            ("64 KiB of noise", noise(64 << 10)),
            (
                "an HTTP request",
                b"GET / HTTP/1.1\r\nHost: 127.0.0.1\r\n\r\n".to_vec(),
            ),
            (
                "half a greeting",
                zmtp_greeting_and_ready(sock_type)[..30].to_vec(),
            ),
            ("a greeting with version 9", {
                let mut g = zmtp_greeting_and_ready(sock_type);
                g[10] = 9;
                g
            }),
            ("a greeting with an unknown mechanism", {
                let mut g = zmtp_greeting_and_ready(sock_type);
                g[12..16].copy_from_slice(b"EVIL");
                g
            }),
        ];
        let ready = zmtp_greeting_and_ready(sock_type);
        // A frame announcing 64 MiB, of which 1 KiB arrives before the peer goes.
        let mut partial = ready.clone();
        partial.push(0x02);
        partial.extend((64u64 << 20).to_be_bytes());
        partial.extend(vec![b'x'; 1024]);
        cases.push(("a 64 MiB frame cut after 1 KiB", partial));
        // A command frame that is not READY, after a good greeting.
        let mut cmd = ready[..64].to_vec();
        cmd.extend([0x04, 6, 5]);
        cmd.extend(b"ERROR");
        cases.push(("an ERROR command instead of READY", cmd));
        // A frame announcing 2^62 bytes: no one may allocate that up front.
        let mut huge = ready.clone();
        huge.push(0x02);
        huge.extend((1u64 << 62).to_be_bytes());
        huge.extend(vec![b'y'; 64]);
        cases.push(("a frame announcing 2^62 bytes", huge));
        for (what, bytes) in cases {
            let _ = raw_tcp(port, &bytes, true);
            faults += 1;
            // Long enough for the kernel to have read what was sent.
            tokio::time::sleep(Duration::from_millis(100)).await;
            assert!(
                kernel.alive(),
                "{channel}: {what} stopped the kernel: {}",
                kernel.stderr()
            );
        }
    }
    // Many idle connections held open at once.
    let idle: Vec<_> = (0..200)
        .filter_map(|i| {
            let port = kernel.port(["shell", "control", "hb"][i % 3]);
            std::net::TcpStream::connect(("127.0.0.1", port)).ok()
        })
        .collect();
    println!(
        "raw bytes: {faults} faults on 5 ports survived; {} idle connections held",
        idle.len()
    );
    c.assert_serving("raw bytes on the ports").await;
    let (r, _) = c.execute("x = 1 V").await;
    assert_eq!(r.content["status"], "ok");
    drop(idle);
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_client_that_vanishes_mid_request_leaves_the_kernel_serving() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let key = c.key.clone();
    let mut vanished = 0;
    for code in [
        // A long cell: the reply has nowhere to go.
        "given r = 10 Ω ± 1 %\ngiven v = 1 V\nsweep v over 0 V .. 1 V steps 300000: v * v / r",
        "y = 2 V",
    ] {
        let mut ghost = zeromq::DealerSocket::new();
        ghost.connect(&kernel.url("shell")).await.expect("connect");
        let h = json!({"msg_id": uuid::Uuid::new_v4().to_string(), "username": "ghost",
                       "session": "ghost", "date": "2024-05-01T12:00:00.000000Z",
                       "msg_type": "execute_request", "version": "5.4"});
        let frames = Client::frames_with(&key, &h, &execute_content(code), None);
        ghost.send(frames).await.expect("send");
        drop(ghost);
        vanished += 1;
    }
    // A raw TCP peer that greets, starts a multipart message and goes.
    let mut half = zmtp_greeting_and_ready("DEALER");
    half.push(0x01); // "more" flag: a first frame, with the rest never sent
    half.push(9);
    half.extend(DELIMITER);
    let _ = raw_tcp(kernel.port("shell"), &half, false);
    vanished += 1;
    tokio::time::sleep(Duration::from_millis(200)).await;
    assert!(kernel.alive());
    // The next client's request is served; the vanished ones ran in order before it.
    let (r, _) = c.execute("z = 3 V").await;
    assert_eq!(r.content["status"], "ok");
    let count = r.content["execution_count"].as_u64().unwrap_or(0);
    println!("vanishing clients: {vanished} left mid-request; the next execute is number {count}");
    assert_eq!(
        count, 3,
        "both ghost executes ran, and this one is the third"
    );
    shut_down(&mut kernel, &mut c).await;
}

// ---------------------------------------------------------------------------------------
// Soak

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn soak_20000_executes_none_lost_memory_flat() {
    const TOTAL: usize = 20_000;
    const WARM_UP: usize = 1_000;
    const IN_FLIGHT: usize = 8;
    let mut kernel = Kernel::start("soak-key");
    let mut c = kernel.connect().await;
    // iopub is read all along by a task of its own, as a front end does.
    let mut iopub = std::mem::replace(&mut c.iopub, zeromq::SubSocket::new());
    let (stop_tx, mut stop_rx) = tokio::sync::oneshot::channel::<()>();
    let reader = tokio::spawn(async move {
        let mut counts: HashMap<String, usize> = HashMap::new();
        loop {
            tokio::select! {
                _ = &mut stop_rx => break,
                m = iopub.recv() => match m {
                    Ok(frames) => {
                        let f = frames.into_vec();
                        let t = f.first().map(|t| String::from_utf8_lossy(t).into_owned()).unwrap_or_default();
                        let kind = t.rsplit('.').next().unwrap_or("").to_string();
                        *counts.entry(kind).or_default() += 1;
                    }
                    Err(_) => break,
                },
            }
        }
        counts
    });

    // One cell, rerun with new values, as a user editing a given does; every run carries
    // the cell id a front end sends.
    let meta = json!({"cellId": "soak"});
    let mut sent: Vec<String> = Vec::with_capacity(TOTAL);
    let mut received = 0usize;
    let mut wrong_count = 0usize;
    let mut errors = 0usize;
    let mut rss_after_warm_up = 0;
    let started = Instant::now();
    let mut warm_up_done = Instant::now();
    while received < TOTAL {
        while sent.len() < TOTAL && sent.len() - received < IN_FLIGHT {
            let i = sent.len();
            let header = c.header("execute_request");
            let content = execute_content(&format!(
                "given load = {} mA ± 5 %\np = load * 5 V",
                i % 997 + 1
            ));
            let parts = vec![
                to_vec(&header),
                b"{}".to_vec(),
                to_vec(&meta),
                to_vec(&content),
            ];
            let sig = hmac_hex(&c.key, &parts);
            let mut frames = vec![DELIMITER.to_vec(), sig.into_bytes()];
            frames.extend(parts);
            c.send_raw(Channel::Shell, zmq(frames)).await;
            sent.push(header["msg_id"].as_str().unwrap_or("").to_string());
        }
        let r = c
            .recv(Channel::Shell, REPLY_TIMEOUT)
            .await
            .unwrap_or_else(|| panic!("reply {} of {TOTAL} lost", received + 1));
        assert_eq!(r.parent_id(), sent[received], "replies come in order");
        if r.content["execution_count"].as_u64() != Some(received as u64 + 1) {
            wrong_count += 1;
        }
        if r.content["status"] != "ok" {
            errors += 1;
        }
        received += 1;
        if received == WARM_UP {
            tokio::time::sleep(Duration::from_millis(200)).await;
            rss_after_warm_up = kernel.rss_kib();
            warm_up_done = Instant::now();
        }
    }
    let took = started.elapsed();
    tokio::time::sleep(Duration::from_millis(300)).await;
    let rss_end = kernel.rss_kib();
    let _ = stop_tx.send(());
    let counts = reader.await.unwrap_or_default();
    let growth = rss_end.saturating_sub(rss_after_warm_up);
    let per_exec = took / TOTAL as u32;
    println!(
        "soak: {TOTAL} executes in {took:?} ({per_exec:?} each, {IN_FLIGHT} in flight); \
         replies {received}, wrong execution_count {wrong_count}, errors {errors}; \
         RSS after {WARM_UP} warm-up executes {rss_after_warm_up} KiB, at the end {rss_end} KiB, \
         growth {growth} KiB over {} executes; iopub received {counts:?}",
        TOTAL - WARM_UP
    );
    let _ = warm_up_done;
    assert_eq!(received, TOTAL);
    assert_eq!(wrong_count, 0, "execution counts run 1..{TOTAL}");
    assert_eq!(errors, 0);
    assert!(growth < 5 * 1024, "resident memory grew {growth} KiB");
    shut_down(&mut kernel, &mut c).await;
}

// ---------------------------------------------------------------------------------------
// Interrupt, shutdown and restart under load

/// A worksheet with tolerances and a ten-million-point sweep over it. Each point calls a
/// function that doubles itself ten times over (1 024 calls), so the sweep runs for seconds
/// however fast plain sweeps get, and every interrupt below lands while it runs.
const SWEEP_SETUP: &str = concat!(
    "given r = 10 Ω ± 1 %\ngiven x = 0.5 V\ny = x * x / r\n",
    doubling_functions!(),
);
const LONG_SWEEP: &str = "sweep x over 0 V .. 1 V steps 10000000: f10(y)";

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn interrupts_during_long_sweeps_stop_them_and_lose_nothing() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let (r, _) = c.execute(SWEEP_SETUP).await;
    assert_eq!(r.content["status"], "ok", "{:?}", r.content);
    let mut latencies = Vec::new();
    for round in 0..4 {
        let id = c
            .send(
                Channel::Shell,
                "execute_request",
                execute_content(LONG_SWEEP),
            )
            .await;
        c.wait_for_input(&id).await;
        tokio::time::sleep(Duration::from_millis(150 + 100 * round)).await;
        let i = c
            .send(Channel::Control, "interrupt_request", json!({}))
            .await;
        let at = Instant::now();
        let ir = c.reply(Channel::Control, &i).await;
        assert_eq!(ir.content["status"], "ok");
        let r = c.reply(Channel::Shell, &id).await;
        latencies.push(at.elapsed());
        assert_eq!(
            r.content["ename"], "Interrupted",
            "round {round}: {:?}",
            r.content
        );
        assert_eq!(r.content["execution_count"], 2 + round);
    }
    println!("interrupt latency over 4 sweeps of 10⁷ points: {latencies:?}");
    for l in &latencies {
        assert!(*l < Duration::from_secs(3), "{l:?}");
    }
    // Nothing was lost or changed: y = 0.5² / 10 = 25 mW... in volts squared per ohm, i.e. W.
    let (r, out) = c.execute("y").await;
    assert_eq!(r.content["status"], "ok");
    assert_eq!(r.content["execution_count"], 6);
    let text = text_of(&out, "execute_result");
    assert!(text.contains("25") && text.contains('W'), "{text}");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn an_interrupt_stops_a_long_chain_of_function_calls() {
    // 2^30 calls inside the call-depth cap of 32, in one evaluation pass: without a bound on
    // the calls, hours of work that only an interrupt polled inside the pass could stop.
    let mut src = String::from("f0(x) = x\n");
    for i in 1..=30 {
        src += &format!("f{i}(x) = f{j}(x) + f{j}(x)\n", j = i - 1);
    }
    src += "y = f30(1 V)";
    let kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let id = c
        .send(Channel::Shell, "execute_request", execute_content(&src))
        .await;
    c.wait_for_input(&id).await;
    tokio::time::sleep(Duration::from_millis(300)).await;
    let i = c
        .send(Channel::Control, "interrupt_request", json!({}))
        .await;
    let at = Instant::now();
    let _ = c.reply(Channel::Control, &i).await;
    let r = c.recv(Channel::Shell, Duration::from_secs(10)).await;
    println!(
        "interrupt during 2^30 function calls: {}",
        match &r {
            Some(m) => format!("{} after {:?}", m.content["ename"], at.elapsed()),
            None => "no reply within 10 s".into(),
        }
    );
    let r = r.expect("the interrupted cell replies within 10 s");
    assert_eq!(r.parent_id(), id);
    assert_eq!(r.content["status"], "error");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn shutdown_while_busy_answers_the_running_cell_and_exits() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let (r, _) = c.execute(SWEEP_SETUP).await;
    assert_eq!(r.content["status"], "ok");
    let running = c
        .send(
            Channel::Shell,
            "execute_request",
            execute_content(LONG_SWEEP),
        )
        .await;
    c.wait_for_input(&running).await;
    // Right after the cell started, as a user who closes the notebook at once would.
    let queued = c
        .send(
            Channel::Shell,
            "execute_request",
            execute_content("q = 1 V"),
        )
        .await;
    let s = c
        .send(
            Channel::Control,
            "shutdown_request",
            json!({"restart": false}),
        )
        .await;
    let at = Instant::now();
    let sr = c.reply(Channel::Control, &s).await;
    assert_eq!(sr.content["status"], "ok");
    let mut shell_replies = Vec::new();
    while let Some(m) = c.recv(Channel::Shell, Duration::from_secs(2)).await {
        shell_replies.push(m);
    }
    let status = kernel.wait_exit(Duration::from_secs(10));
    println!(
        "shutdown while busy: exit {:?} after {:?}; shell replies {:?}",
        status,
        at.elapsed(),
        shell_replies
            .iter()
            .map(|m| (m.parent_id() == running, m.content["status"].clone()))
            .collect::<Vec<_>>()
    );
    assert!(
        status.is_some_and(|s| s.success()),
        "the kernel exits cleanly"
    );
    assert!(
        shell_replies.iter().any(|m| m.parent_id() == running),
        "the running cell got no reply"
    );
    let _ = queued;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn restart_while_busy_leaves_no_process_and_the_new_kernel_serves() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let (r, _) = c.execute(SWEEP_SETUP).await;
    assert_eq!(r.content["status"], "ok");
    let old_pid = kernel.pid();
    let running = c
        .send(
            Channel::Shell,
            "execute_request",
            execute_content(LONG_SWEEP),
        )
        .await;
    c.wait_for_input(&running).await;
    let s = c
        .send(
            Channel::Control,
            "shutdown_request",
            json!({"restart": true}),
        )
        .await;
    let sr = c.reply(Channel::Control, &s).await;
    assert_eq!(sr.content, json!({"restart": true, "status": "ok"}));
    let status = kernel.wait_exit(Duration::from_secs(10));
    assert!(status.is_some(), "the old process exits");
    assert!(!pid_running(old_pid), "no orphaned process");
    // The client's kernel manager starts a new process on the same connection file; the
    // client's sockets reconnect by themselves.
    // A fresh client: the zeromq crate's DEALER does not reconnect to a new process on the
    // same port reliably (libzmq's does; tests/python/test_hardening.py covers that path).
    kernel.restart_process();
    let started = Instant::now();
    let mut c = kernel.connect().await;
    let ready = started.elapsed();
    let (r, _) = c.execute("y").await;
    println!(
        "restart while busy: old pid {old_pid} gone ({status:?}); new kernel ready in {ready:?}; \
         first execute {:?}",
        r.content["status"]
    );
    assert_eq!(r.content["execution_count"], 1, "a fresh session");
    assert_eq!(r.content["ename"], "UnknownName", "a fresh worksheet");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_kernel_whose_manager_dies_does_not_linger() {
    // Jupyter's kernel launcher passes its pid in JPY_PARENT_PID; kernels watch it so that a
    // killed notebook server leaves no kernel holding ports. A shell stands in for the
    // manager here and is killed with SIGKILL.
    let dir = tempfile::tempdir().expect("temp dir");
    let p = free_ports(5);
    let info = json!({"transport": "tcp", "ip": "127.0.0.1", "shell_port": p[0], "iopub_port": p[1],
                      "stdin_port": p[2], "control_port": p[3], "hb_port": p[4], "key": "k",
                      "signature_scheme": "hmac-sha256", "kernel_name": "headroom"});
    let file = dir.path().join("kernel.json");
    std::fs::write(&file, info.to_string()).expect("connection file");
    let mut manager = Command::new("sh")
        .args([
            "-c",
            "JPY_PARENT_PID=$$ \"$0\" kernel --connection-file \"$1\" </dev/null >/dev/null 2>&1 & echo $!; exec sleep 600",
            env!("CARGO_BIN_EXE_headroom"),
        ])
        .arg(&file)
        .stdout(Stdio::piped())
        .spawn()
        .expect("the stand-in manager starts");
    let mut line = String::new();
    let mut out = manager.stdout.take().expect("stdout");
    let mut byte = [0u8; 1];
    while out.read(&mut byte).unwrap_or(0) == 1 && byte[0] != b'\n' {
        line.push(byte[0] as char);
    }
    let kernel_pid: u32 = line.trim().parse().expect("the kernel's pid");
    std::thread::sleep(Duration::from_millis(500));
    assert!(pid_running(kernel_pid), "the kernel started");
    let _ = manager.kill();
    let _ = manager.wait();
    let until = Instant::now() + Duration::from_secs(10);
    while pid_running(kernel_pid) && Instant::now() < until {
        std::thread::sleep(Duration::from_millis(100));
    }
    let lingers = pid_running(kernel_pid);
    println!(
        "kernel after its manager died: {}",
        if lingers {
            "still running after 10 s"
        } else {
            "exited"
        }
    );
    if lingers {
        // Ours to end, by its pid.
        let _ = Command::new("kill")
            .args(["-KILL", &kernel_pid.to_string()])
            .status();
    }
    assert!(
        !lingers,
        "the kernel outlived its manager by more than 10 s"
    );
}

// ---------------------------------------------------------------------------------------
// Listening addresses and file modes

/// (local address, port) of every listening TCP socket in `table` whose inode is in `inodes`.
fn listening(table: &str, inodes: &BTreeSet<u64>) -> Vec<(String, u16)> {
    let text = std::fs::read_to_string(table).unwrap_or_default();
    let mut out = Vec::new();
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split_whitespace().collect();
        if f.len() < 10 || f[3] != "0A" {
            continue;
        }
        let inode: u64 = f[9].parse().unwrap_or(0);
        if !inodes.contains(&inode) {
            continue;
        }
        let (addr, port) = f[1].split_once(':').unwrap_or(("", ""));
        let port = u16::from_str_radix(port, 16).unwrap_or(0);
        // IPv4 addresses are written as one little-endian 32-bit hex word.
        let ip = if addr.len() == 8 {
            let n = u32::from_str_radix(addr, 16).unwrap_or(0);
            std::net::Ipv4Addr::from(n.swap_bytes()).to_string()
        } else {
            format!("[{addr}]")
        };
        out.push((ip, port));
    }
    out
}

fn socket_inodes(pid: u32) -> BTreeSet<u64> {
    let mut out = BTreeSet::new();
    if let Ok(entries) = std::fs::read_dir(format!("/proc/{pid}/fd")) {
        for e in entries.flatten() {
            if let Ok(target) = std::fs::read_link(e.path()) {
                let t = target.to_string_lossy();
                if let Some(n) = t.strip_prefix("socket:[").and_then(|r| r.strip_suffix(']')) {
                    out.extend(n.parse::<u64>().ok());
                }
            }
        }
    }
    out
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_kernel_listens_on_exactly_the_connection_files_addresses() {
    let mut kernel = Kernel::start("k");
    let mut c = kernel.connect().await;
    let inodes = socket_inodes(kernel.pid());
    let mut found = listening("/proc/net/tcp", &inodes);
    found.extend(listening("/proc/net/tcp6", &inodes));
    found.sort();
    let mut want: Vec<(String, u16)> = ["shell", "iopub", "stdin", "control", "hb"]
        .iter()
        .map(|ch| ("127.0.0.1".to_string(), kernel.port(ch)))
        .collect();
    want.sort();
    // No UDP at all.
    let udp: usize = ["/proc/net/udp", "/proc/net/udp6"]
        .iter()
        .map(|t| {
            std::fs::read_to_string(t)
                .unwrap_or_default()
                .lines()
                .skip(1)
                .filter(|l| {
                    l.split_whitespace()
                        .nth(9)
                        .and_then(|i| i.parse::<u64>().ok())
                        .is_some_and(|i| inodes.contains(&i))
                })
                .count()
        })
        .sum();
    println!("listening (TCP): {found:?}; UDP sockets {udp}");
    assert_eq!(found, want);
    assert_eq!(udp, 0);
    shut_down(&mut kernel, &mut c).await;
}

#[cfg(unix)]
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn ipc_sockets_and_files_the_kernel_writes_are_private() {
    use std::os::unix::fs::{FileTypeExt as _, PermissionsExt as _};
    // A private home for everything the kernel might write, under the usual umask.
    let home = tempfile::tempdir().expect("home");
    let env: Vec<(String, String)> = [
        "HOME",
        "TMPDIR",
        "XDG_RUNTIME_DIR",
        "XDG_DATA_HOME",
        "XDG_CACHE_HOME",
        "JUPYTER_RUNTIME_DIR",
        "JUPYTER_DATA_DIR",
    ]
    .iter()
    .map(|k| (k.to_string(), home.path().to_string_lossy().into_owned()))
    .collect();
    let mut kernel = Kernel::start_with(
        "k",
        Start {
            ipc: true,
            umask_022: true,
            env,
        },
    );
    let mut c = kernel.connect().await;
    let (r, _) = c
        .execute("given a = 1 V ± 1 %\nsweep a over 0 V .. 1 V steps 20: a * 2")
        .await;
    assert_eq!(r.content["status"], "ok");
    let inodes = socket_inodes(kernel.pid());
    let tcp =
        listening("/proc/net/tcp", &inodes).len() + listening("/proc/net/tcp6", &inodes).len();
    let mut modes = Vec::new();
    let ours = ["kernel.json", "stderr.log"];
    for dir in [kernel.dir.path(), home.path()] {
        for e in std::fs::read_dir(dir).expect("list").flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            if dir == kernel.dir.path() && ours.contains(&name.as_str()) {
                continue;
            }
            let meta = e.metadata().expect("stat");
            let kind = if meta.file_type().is_socket() {
                "socket"
            } else if meta.is_dir() {
                "dir"
            } else {
                "file"
            };
            modes.push((name, kind, meta.permissions().mode() & 0o777));
        }
    }
    println!(
        "files the kernel made (umask 022): {:?}; TCP listeners {tcp}",
        modes
            .iter()
            .map(|(n, k, m)| format!("{n} {k} {m:o}"))
            .collect::<Vec<_>>()
    );
    assert_eq!(tcp, 0, "an IPC kernel opens no TCP port");
    assert_eq!(
        modes.iter().filter(|(_, k, _)| *k == "socket").count(),
        5,
        "five IPC sockets"
    );
    for (name, kind, mode) in &modes {
        assert_eq!(
            mode & 0o077,
            0,
            "{name} ({kind}) is open to others: {mode:o}"
        );
    }
    shut_down(&mut kernel, &mut c).await;
}

// ---------------------------------------------------------------------------------------
// `headroom run` on notebooks: killed while writing, unwritable outputs

/// A notebook whose run writes a large file: many cells, each with a result block. Without
/// tolerances, so that the run is quick and the write is a large part of it.
fn big_notebook(cells: usize) -> Value {
    let mut list = vec![
        json!({"cell_type": "markdown", "id": "intro", "metadata": {},
                               "source": ["A scratch notebook of many small calculations.\n"]}),
    ];
    for i in 0..cells {
        list.push(json!({
            "cell_type": "code", "id": format!("c{i}"), "metadata": {"tags": ["kept"]},
            "execution_count": null, "outputs": [],
            "source": [format!("given v{i} = {} V\n", i + 1), format!("p{i} = v{i} * v{i} / 100 Ω")],
        }));
    }
    json!({"cells": list,
           "metadata": {"kernelspec": {"display_name": "Headroom", "language": "headroom", "name": "headroom"},
                        "language_info": {"name": "headroom"}},
           "nbformat": 4, "nbformat_minor": 5})
}

fn headroom_run(args: &[&std::ffi::OsStr]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .arg("run")
        .args(args)
        .env_remove("RUST_LOG")
        .stdin(Stdio::null())
        .output()
        .expect("headroom starts")
}

fn leftovers(dir: &Path, except: &[&str]) -> Vec<String> {
    std::fs::read_dir(dir)
        .map(|rd| {
            rd.flatten()
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .filter(|n| !except.contains(&n.as_str()))
                .collect()
        })
        .unwrap_or_default()
}

#[test]
fn headroom_run_killed_at_random_moments_never_leaves_a_partial_notebook() {
    let dir = tempfile::tempdir().expect("temp dir");
    let input = dir.path().join("in.ipynb");
    let original = serde_json::to_vec_pretty(&big_notebook(150)).expect("json");
    std::fs::write(&input, &original).expect("write");
    let out = dir.path().join("out.ipynb");
    // A full run first: how long it takes, and what a complete output is.
    let started = Instant::now();
    let full = headroom_run(&[input.as_os_str(), "-o".as_ref(), out.as_os_str()]);
    let full_time = started.elapsed();
    assert!(
        full.status.code().is_some_and(|c| c <= 1),
        "the notebook runs: {}",
        String::from_utf8_lossy(&full.stderr)
    );
    let complete: Value =
        serde_json::from_slice(&std::fs::read(&out).expect("output")).expect("JSON");
    let cells = complete["cells"].as_array().map_or(0, Vec::len);
    assert_eq!(cells, 151);
    let size = std::fs::metadata(&out).map(|m| m.len()).unwrap_or(0);

    let mut rng: u64 = 0x2545_F491_4F6C_DD1D;
    let (mut absent, mut whole, mut killed_early) = (0, 0, 0);
    let mut stale = 0;
    let runs = 30;
    for round in 0..runs {
        let _ = std::fs::remove_file(&out);
        // Half the runs overwrite an existing output, which must stay whole until replaced.
        let previous = round % 2 == 1;
        if previous {
            std::fs::write(&out, serde_json::to_vec(&complete).expect("json")).expect("seed");
        }
        rng ^= rng << 13;
        rng ^= rng >> 7;
        rng ^= rng << 17;
        let delay = full_time.mul_f64((rng % 1000) as f64 / 1000.0 * 1.1);
        let mut child = Command::new(env!("CARGO_BIN_EXE_headroom"))
            .arg("run")
            .arg(&input)
            .arg("-o")
            .arg(&out)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("starts");
        std::thread::sleep(delay);
        if matches!(child.try_wait(), Ok(None)) {
            killed_early += 1;
        }
        let _ = child.kill();
        let _ = child.wait();
        assert_eq!(
            std::fs::read(&input).expect("input"),
            original,
            "the input changed"
        );
        match std::fs::read(&out) {
            Err(_) => {
                assert!(!previous, "the previous output vanished");
                absent += 1;
            }
            Ok(bytes) => {
                let v: Value = serde_json::from_slice(&bytes).unwrap_or_else(|e| {
                    panic!("a partial notebook ({} of {size} bytes): {e}", bytes.len())
                });
                assert_eq!(
                    v["cells"].as_array().map_or(0, Vec::len),
                    151,
                    "a notebook missing cells"
                );
                whole += 1;
            }
        }
        let left = leftovers(dir.path(), &["in.ipynb", "out.ipynb"]);
        stale += left.len();
        for l in left {
            let _ = std::fs::remove_file(dir.path().join(l));
        }
    }
    println!(
        "kill while running: {runs} runs of {full_time:?} ({size} bytes written), {killed_early} \
         killed before they ended; output absent {absent}, whole {whole}, partial 0; hidden \
         temporary files left behind {stale}"
    );
}

#[test]
fn headroom_run_in_place_killed_at_random_moments_keeps_a_whole_notebook() {
    let dir = tempfile::tempdir().expect("temp dir");
    let input = dir.path().join("nb.ipynb");
    let original = serde_json::to_vec_pretty(&big_notebook(150)).expect("json");
    std::fs::write(&input, &original).expect("write");
    let started = Instant::now();
    let full = headroom_run(&[input.as_os_str(), "--in-place".as_ref()]);
    let full_time = started.elapsed();
    assert!(
        full.status.code().is_some_and(|c| c <= 1),
        "{}",
        String::from_utf8_lossy(&full.stderr)
    );
    let (mut old, mut new) = (0, 0);
    let mut rng: u64 = 0x1234_5678_9ABC_DEF1;
    for _ in 0..20 {
        std::fs::write(&input, &original).expect("reset");
        rng ^= rng << 13;
        rng ^= rng >> 7;
        rng ^= rng << 17;
        let delay = full_time.mul_f64((rng % 1000) as f64 / 1000.0 * 1.1);
        let mut child = Command::new(env!("CARGO_BIN_EXE_headroom"))
            .arg("run")
            .arg(&input)
            .arg("--in-place")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("starts");
        std::thread::sleep(delay);
        let _ = child.kill();
        let _ = child.wait();
        let bytes = std::fs::read(&input).expect("the notebook is there");
        if bytes == original {
            old += 1;
        } else {
            let v: Value = serde_json::from_slice(&bytes).expect("a whole notebook");
            assert_eq!(v["cells"].as_array().map_or(0, Vec::len), 151);
            new += 1;
        }
    }
    println!("kill during --in-place: 20 runs; notebook as before {old}, fully rewritten {new}, partial 0");
}

/// A small tmpfs mounted for the test and unmounted when dropped (needs root).
struct Mount(PathBuf);

impl Mount {
    fn tmpfs(at: &Path, options: &str) -> Option<Mount> {
        std::fs::create_dir_all(at).ok()?;
        let ok = Command::new("mount")
            .args(["-t", "tmpfs", "-o", options, "tmpfs"])
            .arg(at)
            .stderr(Stdio::null())
            .status()
            .is_ok_and(|s| s.success());
        ok.then(|| Mount(at.to_path_buf()))
    }
}

impl Drop for Mount {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
    }
}

fn run_to(input: &Path, out: &Path) -> (i32, String) {
    let o = headroom_run(&[input.as_os_str(), "-o".as_ref(), out.as_os_str()]);
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn unwritable_outputs_give_clear_errors_and_write_nothing() {
    let dir = tempfile::tempdir().expect("temp dir");
    let input = dir.path().join("in.ipynb");
    std::fs::write(&input, serde_json::to_vec(&big_notebook(40)).expect("json")).expect("write");
    let mut figures = Vec::new();

    // A directory that does not exist.
    let missing = dir.path().join("no/such/dir/out.ipynb");
    let (code, err) = run_to(&input, &missing);
    figures.push(format!("missing directory: exit {code}: {}", err.trim()));
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("no/such/dir"),
        "the error names the directory: {err}"
    );
    assert!(!dir.path().join("no").exists(), "no directories are made");

    // The output is a directory.
    let (code, err) = run_to(&input, dir.path());
    figures.push(format!(
        "output is a directory: exit {code}: {}",
        err.trim()
    ));
    assert_eq!(code, 2, "{err}");

    // A read-only file system, and a full one (tmpfs mounts; root only).
    let ro_at = dir.path().join("ro");
    if let Some(_ro) = Mount::tmpfs(&ro_at, "ro,size=64k") {
        let (code, err) = run_to(&input, &ro_at.join("out.ipynb"));
        figures.push(format!("read-only directory: exit {code}: {}", err.trim()));
        assert_eq!(code, 2, "{err}");
        assert!(
            err.contains("out.ipynb") && err.contains("nothing was written"),
            "{err}"
        );
    } else {
        figures.push("read-only directory: not tried (mount needs root)".into());
    }
    let full_at = dir.path().join("full");
    if let Some(_full) = Mount::tmpfs(&full_at, "size=64k") {
        let out = full_at.join("out.ipynb");
        let kept = br#"{"cells": [], "metadata": {}, "nbformat": 4, "nbformat_minor": 5}"#;
        std::fs::write(&out, kept).expect("an earlier output");
        // Fill what is left.
        let mut filler = std::fs::File::create(full_at.join("filler")).expect("filler");
        while filler.write_all(&[0u8; 4096]).is_ok() {}
        drop(filler);
        let (code, err) = run_to(&input, &out);
        figures.push(format!("full disk: exit {code}: {}", err.trim()));
        assert_eq!(code, 2, "{err}");
        assert!(err.contains("nothing was written"), "{err}");
        assert_eq!(
            std::fs::read(&out).expect("kept"),
            kept,
            "the earlier output is intact"
        );
        let left = leftovers(&full_at, &["out.ipynb", "filler"]);
        assert!(
            left.is_empty(),
            "temporary files left on the full disk: {left:?}"
        );
    } else {
        figures.push("full disk: not tried (mount needs root)".into());
    }
    for f in &figures {
        println!("{f}");
    }
}

#[cfg(unix)]
#[test]
fn an_output_path_that_is_a_device_is_not_replaced() {
    use std::os::unix::fs::FileTypeExt as _;
    // A character device like /dev/full (major 1, minor 7), made in a scratch directory so
    // that nothing of the machine's is at stake. Needs root; otherwise not tried.
    let dir = tempfile::tempdir().expect("temp dir");
    let input = dir.path().join("in.ipynb");
    std::fs::write(&input, serde_json::to_vec(&big_notebook(3)).expect("json")).expect("write");
    let dev = dir.path().join("full-device");
    let made = Command::new("mknod")
        .arg(&dev)
        .args(["c", "1", "7"])
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success());
    if !made {
        println!("device output: not tried (mknod needs root)");
        return;
    }
    let (code, err) = run_to(&input, &dev);
    let still_device =
        std::fs::symlink_metadata(&dev).is_ok_and(|m| m.file_type().is_char_device());
    println!(
        "-o onto a character device: exit {code}, still a device: {still_device}; {}",
        err.trim()
    );
    assert!(
        still_device,
        "headroom replaced a device node with a regular file"
    );
    assert_ne!(code, 0, "writing to a full device must fail clearly");
}
