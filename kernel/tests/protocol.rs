//! The kernel binary driven over ZeroMQ as a Jupyter client would drive it.
//!
//! The client here signs and verifies with RustCrypto's `hmac`/`sha2`, independently of the
//! kernel's `ring`-based code, and reads every message as raw JSON so that the shapes the
//! message specification asks for are checked as sent.

#[macro_use]
mod common;

use hmac::{Hmac, Mac};
use serde_json::{json, Value};
use sha2::Sha256;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};
use tokio::time::timeout;
use zeromq::{Socket, SocketRecv, SocketSend, ZmqMessage};

const DELIMITER: &[u8] = b"<IDS|MSG>";
/// Generous: a loaded CI machine must not turn a healthy kernel red.
const REPLY_TIMEOUT: Duration = Duration::from_secs(10);
/// How long we wait to conclude that the kernel did not answer.
const SILENCE: Duration = Duration::from_millis(600);

// ---------------------------------------------------------------------------------------
// A small client

#[derive(Clone, Copy, PartialEq)]
enum Transport {
    Tcp,
    Ipc,
}

struct Kernel {
    child: Child,
    dir: tempfile::TempDir,
    info: Value,
}

impl Kernel {
    fn start(transport: Transport, key: &str) -> Kernel {
        Self::start_with(transport, key, "hmac-sha256", |_| {})
    }

    fn start_with(
        transport: Transport,
        key: &str,
        scheme: &str,
        before: impl FnOnce(&Value),
    ) -> Kernel {
        let dir = tempfile::tempdir().expect("temp dir");
        let info = match transport {
            Transport::Tcp => {
                // Hold the listeners until the file is written, so no two kernels of this
                // test run get the same port.
                let listeners: Vec<_> = (0..5)
                    .map(|_| std::net::TcpListener::bind("127.0.0.1:0").expect("a free port"))
                    .collect();
                let p: Vec<u16> = listeners
                    .iter()
                    .map(|l| l.local_addr().expect("addr").port())
                    .collect();
                json!({"transport": "tcp", "ip": "127.0.0.1", "shell_port": p[0], "iopub_port": p[1],
                       "stdin_port": p[2], "control_port": p[3], "hb_port": p[4], "key": key,
                       "signature_scheme": scheme, "kernel_name": "headroom"})
            }
            Transport::Ipc => {
                let ip = dir.path().join("kernel-ipc");
                json!({"transport": "ipc", "ip": ip.to_string_lossy(), "shell_port": 1, "iopub_port": 2,
                       "stdin_port": 3, "control_port": 4, "hb_port": 5, "key": key,
                       "signature_scheme": scheme, "kernel_name": "headroom"})
            }
        };
        before(&info);
        let file = dir.path().join("kernel.json");
        std::fs::write(&file, info.to_string()).expect("connection file");
        let stderr = std::fs::File::create(dir.path().join("stderr.log")).expect("log file");
        let child = Command::new(env!("CARGO_BIN_EXE_headroom"))
            .args(["kernel", "--connection-file"])
            .arg(&file)
            .env("RUST_LOG", "warn")
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(stderr)
            .spawn()
            .expect("the kernel starts");
        Kernel { child, dir, info }
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

    fn stderr(&self) -> String {
        std::fs::read_to_string(self.dir.path().join("stderr.log")).unwrap_or_default()
    }

    /// Waits for the process to end on its own.
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

    async fn connect(&self) -> Client {
        let mut shell = zeromq::DealerSocket::new();
        shell.connect(&self.url("shell")).await.expect("shell");
        let mut control = zeromq::DealerSocket::new();
        control
            .connect(&self.url("control"))
            .await
            .expect("control");
        let mut iopub = zeromq::SubSocket::new();
        iopub.subscribe("").await.expect("subscribe");
        iopub.connect(&self.url("iopub")).await.expect("iopub");
        let key = self.info["key"].as_str().unwrap_or("").as_bytes().to_vec();
        let mut c = Client {
            shell,
            control,
            iopub,
            key,
            session: uuid::Uuid::new_v4().to_string(),
        };
        c.wait_ready().await;
        c
    }
}

impl Drop for Kernel {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

#[derive(Debug, Clone)]
struct Msg {
    signature: String,
    header: Value,
    parent: Value,
    content: Value,
    /// The four JSON parts as sent, for checking the signature.
    parts: Vec<Vec<u8>>,
}

impl Msg {
    fn msg_type(&self) -> &str {
        self.header["msg_type"].as_str().unwrap_or("")
    }
    fn parent_id(&self) -> &str {
        self.parent["msg_id"].as_str().unwrap_or("")
    }
}

#[derive(Clone, Copy)]
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

impl Client {
    fn header(&self, msg_type: &str) -> Value {
        json!({"msg_id": uuid::Uuid::new_v4().to_string(), "username": "tester",
               "session": self.session, "date": "2024-05-01T12:00:00.000000Z",
               "msg_type": msg_type, "version": "5.4"})
    }

    /// The frames of a request; `sign` may replace the signature the key gives.
    fn frames(
        &self,
        header: &Value,
        content: &Value,
        metadata: &Value,
        signature: Option<&str>,
    ) -> ZmqMessage {
        let parts: Vec<Vec<u8>> = [header, &json!({}), metadata, content]
            .iter()
            .map(|v| serde_json::to_vec(v).expect("json"))
            .collect();
        let sig = signature.map_or_else(|| hmac_hex(&self.key, &parts), str::to_string);
        let mut frames: Vec<bytes::Bytes> =
            vec![DELIMITER.to_vec().into(), sig.into_bytes().into()];
        frames.extend(parts.into_iter().map(bytes::Bytes::from));
        ZmqMessage::try_from(frames).expect("frames")
    }

    async fn send_frames(&mut self, channel: Channel, frames: ZmqMessage) {
        let socket = match channel {
            Channel::Shell => &mut self.shell,
            Channel::Control => &mut self.control,
        };
        socket.send(frames).await.expect("send");
    }

    /// Sends a request and returns its msg_id.
    async fn send_meta(
        &mut self,
        channel: Channel,
        msg_type: &str,
        content: Value,
        metadata: Value,
    ) -> String {
        let header = self.header(msg_type);
        let frames = self.frames(&header, &content, &metadata, None);
        self.send_frames(channel, frames).await;
        header["msg_id"].as_str().unwrap_or("").to_string()
    }

    async fn send(&mut self, channel: Channel, msg_type: &str, content: Value) -> String {
        self.send_meta(channel, msg_type, content, json!({})).await
    }

    fn decode(&self, frames: ZmqMessage) -> Msg {
        let frames = frames.into_vec();
        let d = frames
            .iter()
            .position(|f| f.as_ref() == DELIMITER)
            .expect("a delimiter frame");
        let signature = String::from_utf8(frames[d + 1].to_vec()).expect("hex signature");
        let parts: Vec<Vec<u8>> = frames[d + 2..d + 6].iter().map(|f| f.to_vec()).collect();
        let json = |i: usize| -> Value { serde_json::from_slice(&parts[i]).expect("a JSON part") };
        Msg {
            signature,
            header: json(0),
            parent: json(1),
            content: json(3),
            parts,
        }
    }

    async fn recv(&mut self, channel: Channel, within: Duration) -> Option<Msg> {
        let socket = match channel {
            Channel::Shell => &mut self.shell,
            Channel::Control => &mut self.control,
        };
        let frames = timeout(within, socket.recv()).await.ok()?.ok()?;
        let m = self.decode(frames);
        assert_eq!(
            m.signature,
            hmac_hex(&self.key, &m.parts),
            "every reply is signed"
        );
        Some(m)
    }

    async fn reply(&mut self, channel: Channel, id: &str) -> Msg {
        let m = self
            .recv(channel, REPLY_TIMEOUT)
            .await
            .unwrap_or_else(|| panic!("no reply to {id}"));
        assert_eq!(m.parent_id(), id, "the reply answers the request");
        m
    }

    async fn iopub_msg(&mut self, within: Duration) -> Option<Msg> {
        let frames = timeout(within, self.iopub.recv()).await.ok()?.ok()?;
        let m = self.decode(frames);
        assert_eq!(
            m.signature,
            hmac_hex(&self.key, &m.parts),
            "every iopub message is signed"
        );
        Some(m)
    }

    /// The iopub messages of one request, from its busy status to its idle status.
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
                assert_eq!(
                    out[0].content["execution_state"], "busy",
                    "busy comes first"
                );
                return out;
            }
        }
        panic!(
            "no idle status for {id}; got {:?}",
            out.iter().map(Msg::msg_type).collect::<Vec<_>>()
        );
    }

    /// A late subscriber misses messages, so ask for kernel_info until its status messages
    /// arrive on iopub (as jupyter_client does).
    async fn wait_ready(&mut self) {
        for _ in 0..100 {
            let id = self
                .send(Channel::Shell, "kernel_info_request", json!({}))
                .await;
            let _ = self.reply(Channel::Shell, &id).await;
            let until = Instant::now() + Duration::from_millis(300);
            while Instant::now() < until {
                match self.iopub_msg(Duration::from_millis(100)).await {
                    Some(m) if m.parent_id() == id && m.content["execution_state"] == "idle" => {
                        return
                    }
                    _ => {}
                }
            }
        }
        panic!("iopub never delivered");
    }

    async fn execute(&mut self, code: &str, extra: Value) -> (Msg, Vec<Msg>) {
        self.execute_meta(code, extra, json!({})).await
    }

    async fn execute_meta(&mut self, code: &str, extra: Value, metadata: Value) -> (Msg, Vec<Msg>) {
        let mut content = json!({"code": code, "silent": false, "store_history": true,
                                 "user_expressions": {}, "allow_stdin": false, "stop_on_error": true});
        if let (Some(c), Some(e)) = (content.as_object_mut(), extra.as_object()) {
            c.extend(e.clone());
        }
        let id = self
            .send_meta(Channel::Shell, "execute_request", content, metadata)
            .await;
        let reply = self.reply(Channel::Shell, &id).await;
        let outputs = self.outputs(&id).await;
        (reply, outputs)
    }
}

fn types(outputs: &[Msg]) -> Vec<&str> {
    outputs.iter().map(Msg::msg_type).collect()
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
        kernel.wait_exit(Duration::from_secs(5)).is_some(),
        "the kernel exits"
    );
}

// ---------------------------------------------------------------------------------------
// Tests that hold whatever the language computes

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn kernel_info_is_signed_dated_and_describes_the_language() {
    let mut kernel = Kernel::start(Transport::Tcp, "a-secret-key");
    let mut c = kernel.connect().await;
    for channel in [Channel::Shell, Channel::Control] {
        let id = c.send(channel, "kernel_info_request", json!({})).await;
        let r = c.reply(channel, &id).await;
        assert_eq!(r.msg_type(), "kernel_info_reply");
        let k = &r.content;
        assert_eq!(k["status"], "ok");
        assert_eq!(k["protocol_version"], "5.4");
        assert_eq!(k["implementation"], "headroom");
        assert_eq!(k["language_info"]["name"], "headroom");
        assert_eq!(k["language_info"]["file_extension"], ".hrw");
        assert_eq!(k["language_info"]["mimetype"], "text/x-headroom");
        assert!(k["banner"]
            .as_str()
            .is_some_and(|b| b.contains("datasheet")));
        // The header is the kernel's own: its session, this protocol version, and a date
        // with exactly six fractional digits, as Python's isoformat writes.
        let h = &r.header;
        assert_eq!(h["version"], "5.4");
        assert_ne!(h["session"], c.session.as_str());
        assert_ne!(h["username"], "runtimelib");
        let date = h["date"].as_str().unwrap_or("");
        let frac = date.split('.').nth(1).unwrap_or("");
        assert_eq!(frac.len(), 7, "six digits then Z: {date}");
        assert!(
            frac.ends_with('Z') && frac[..6].chars().all(|ch| ch.is_ascii_digit()),
            "{date}"
        );
        // Busy and idle are published around kernel_info too, on either channel.
        let out = c.outputs(&id).await;
        assert_eq!(types(&out), ["status", "status"]);
        // The parent header is the request's header, unchanged.
        assert_eq!(out[0].parent["session"], c.session.as_str());
        assert_eq!(out[0].parent["date"], "2024-05-01T12:00:00.000000Z");
    }
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn execution_counts_history_flags_and_silent_runs() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;

    let (r, out) = c.execute("x = 1 V", json!({})).await;
    assert_eq!(r.content["status"], "ok", "{:?}", r.content);
    assert_eq!(r.content["execution_count"], 1);
    assert_eq!(r.content["user_expressions"], json!({}));
    assert_eq!(r.content["payload"], json!([]));
    // The reply's metadata carries how long the evaluation took.
    let metadata: Value = serde_json::from_slice(&r.parts[2]).expect("metadata is JSON");
    let seconds = metadata["headroom"]["evaluation_seconds"]
        .as_f64()
        .unwrap_or_else(|| panic!("no evaluation time in {metadata}"));
    assert!(seconds > 0.0 && seconds < 60.0, "{metadata}");
    let input = out
        .iter()
        .find(|m| m.msg_type() == "execute_input")
        .expect("execute_input");
    assert_eq!(
        input.content,
        json!({"code": "x = 1 V", "execution_count": 1})
    );

    // Not stored: the count stays.
    let (r, _) = c.execute("y = 2 V", json!({"store_history": false})).await;
    assert_eq!(r.content["execution_count"], 1);

    // Silent: nothing but busy and idle is broadcast, and the count stays.
    let (r, out) = c.execute("z = 3 V", json!({"silent": true})).await;
    assert_eq!(r.content["status"], "ok");
    assert_eq!(r.content["execution_count"], 1);
    assert_eq!(types(&out), ["status", "status"]);

    // Real clients may leave out silent and store_history: the defaults apply.
    let id = c
        .send(
            Channel::Shell,
            "execute_request",
            json!({"code": "w = 4 V"}),
        )
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.content["status"], "ok", "{:?}", r.content);
    assert_eq!(r.content["execution_count"], 2);
    let out = c.outputs(&id).await;
    assert!(types(&out).contains(&"execute_input"));

    // user_expressions get one answer per key.
    let (r, _) = c
        .execute("v = 5 V", json!({"user_expressions": {"a": "x"}}))
        .await;
    assert_eq!(r.content["user_expressions"]["a"]["status"], "error");
    assert_eq!(r.content["execution_count"], 3);

    // History holds the stored inputs only, numbered by execution count.
    let id = c
        .send(
            Channel::Shell,
            "history_request",
            json!({"hist_access_type": "tail", "n": 10, "output": false, "raw": true}),
        )
        .await;
    let h = c.reply(Channel::Shell, &id).await;
    assert_eq!(h.content["status"], "ok");
    assert_eq!(
        h.content["history"],
        json!([[1, 1, "x = 1 V"], [1, 2, "w = 4 V"], [1, 3, "v = 5 V"]])
    );
    let id = c
        .send(Channel::Shell, "history_request",
              json!({"hist_access_type": "range", "session": 0, "start": 2, "stop": 3, "output": false, "raw": true}))
        .await;
    let h = c.reply(Channel::Shell, &id).await;
    assert_eq!(h.content["history"], json!([[1, 2, "w = 4 V"]]));
    let id = c
        .send(Channel::Shell, "history_request",
              json!({"hist_access_type": "search", "pattern": "? = [45] V", "output": false, "raw": true}))
        .await;
    let h = c.reply(Channel::Shell, &id).await;
    assert_eq!(
        h.content["history"],
        json!([[1, 2, "w = 4 V"], [1, 3, "v = 5 V"]])
    );
    let id = c
        .send(
            Channel::Shell,
            "history_request",
            json!({"hist_access_type": "tail", "n": 1, "output": true, "raw": true}),
        )
        .await;
    let h = c.reply(Channel::Shell, &id).await;
    assert_eq!(h.content["history"][0][2][0], "v = 5 V");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn complete_inspect_is_complete_and_comm_info_replies() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;

    // "θ = 1 V\nθ" is 9 code points but 11 bytes: positions must come back in code points.
    let code = "θ = 1 V\nθ";
    let id = c
        .send(
            Channel::Shell,
            "complete_request",
            json!({"code": code, "cursor_pos": 9}),
        )
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.msg_type(), "complete_reply");
    assert_eq!(r.content["status"], "ok");
    assert_eq!(r.content["cursor_end"], 9);
    assert!(r.content["cursor_start"].as_u64().is_some_and(|s| s <= 9));
    assert!(r.content["matches"].is_array());
    assert!(r.content["metadata"].is_object());

    let id = c
        .send(
            Channel::Shell,
            "inspect_request",
            json!({"code": "zz_nothing_here", "cursor_pos": 3, "detail_level": 0}),
        )
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.content["status"], "ok");
    assert_eq!(r.content["found"], false);
    assert_eq!(r.content["data"], json!({}));
    assert_eq!(r.content["metadata"], json!({}));

    let id = c
        .send(
            Channel::Shell,
            "is_complete_request",
            json!({"code": "x = 1 V"}),
        )
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.content["status"], "complete");

    let id = c
        .send(
            Channel::Shell,
            "comm_info_request",
            json!({"target_name": "anything"}),
        )
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.content, json!({"status": "ok", "comms": {}}));
    assert_eq!(types(&c.outputs(&id).await), ["status", "status"]);

    // A malformed request gets an error reply, not silence and not a crash.
    let id = c
        .send(Channel::Shell, "complete_request", json!({"code": 42}))
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.content["status"], "error");
    assert_eq!(r.content["ename"], "BadRequest");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn unknown_message_types_are_ignored() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let _ = c
        .send(Channel::Shell, "frobnicate_request", json!({}))
        .await;
    let _ = c
        .send(Channel::Control, "frobnicate_request", json!({}))
        .await;
    assert!(
        c.recv(Channel::Control, SILENCE).await.is_none(),
        "no reply on control"
    );
    let id = c
        .send(Channel::Shell, "kernel_info_request", json!({}))
        .await;
    let r = c
        .recv(Channel::Shell, REPLY_TIMEOUT)
        .await
        .expect("a reply");
    assert_eq!(r.parent_id(), id, "the first reply is the kernel_info one");
    assert!(
        kernel.stderr().contains("frobnicate_request"),
        "the kernel logs it"
    );
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn messages_failing_verification_are_dropped_and_logged() {
    let mut kernel = Kernel::start(Transport::Tcp, "the-real-key");
    let mut c = kernel.connect().await;
    let exec = json!({"code": "x = 1 V", "silent": false, "store_history": true, "user_expressions": {},
                      "allow_stdin": false, "stop_on_error": true});

    // Signed with another key.
    let h = c.header("execute_request");
    let parts: Vec<Vec<u8>> = [&h, &json!({}), &json!({}), &exec]
        .iter()
        .map(|v| serde_json::to_vec(v).expect("json"))
        .collect();
    let wrong = hmac_hex(b"not-the-key", &parts);
    let frames = c.frames(&h, &exec, &json!({}), Some(&wrong));
    c.send_frames(Channel::Shell, frames).await;
    // A correct signature over different content (tampered after signing).
    let h2 = c.header("shutdown_request");
    let sig_for_other = hmac_hex(
        &c.key,
        &[
            serde_json::to_vec(&h2).expect("json"),
            b"{}".to_vec(),
            b"{}".to_vec(),
            b"{\"restart\":true}".to_vec(),
        ],
    );
    let frames = c.frames(
        &h2,
        &json!({"restart": false}),
        &json!({}),
        Some(&sig_for_other),
    );
    c.send_frames(Channel::Control, frames).await;
    // No signature at all, and one that is not hex.
    let frames = c.frames(&c.header("execute_request"), &exec, &json!({}), Some(""));
    c.send_frames(Channel::Shell, frames).await;
    let frames = c.frames(
        &c.header("execute_request"),
        &exec,
        &json!({}),
        Some("zz-not-hex"),
    );
    c.send_frames(Channel::Shell, frames).await;
    // Not a Jupyter message at all.
    c.send_frames(Channel::Shell, ZmqMessage::from("garbage"))
        .await;

    assert!(
        c.recv(Channel::Shell, SILENCE).await.is_none(),
        "no shell reply"
    );
    assert!(
        c.recv(Channel::Control, SILENCE).await.is_none(),
        "no control reply"
    );
    assert!(
        kernel.wait_exit(Duration::from_millis(100)).is_none(),
        "the tampered shutdown was not acted on"
    );
    // Nothing ran: no execute_input, no busy status.
    while let Some(m) = c.iopub_msg(Duration::from_millis(200)).await {
        assert_ne!(m.msg_type(), "execute_input", "a rejected request ran");
    }

    // A correctly signed request is then served, and nothing was counted.
    let (r, _) = c.execute("x = 1 V", json!({})).await;
    assert_eq!(r.content["execution_count"], 1);
    let log = kernel.stderr();
    assert!(
        log.matches("dropped a message").count() >= 5,
        "each drop is logged: {log}"
    );
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn an_empty_key_disables_signing() {
    let mut kernel = Kernel::start(Transport::Tcp, "");
    let mut c = kernel.connect().await;
    let id = c
        .send(Channel::Shell, "kernel_info_request", json!({}))
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.signature, "");
    shut_down(&mut kernel, &mut c).await;
}

#[test]
fn an_unknown_signature_scheme_stops_start_up() {
    let mut kernel = Kernel::start_with(Transport::Tcp, "k", "hmac-whirlpool", |_| {});
    let status = kernel
        .wait_exit(Duration::from_secs(10))
        .expect("the kernel exits");
    assert!(!status.success());
    let log = kernel.stderr();
    assert!(
        log.contains("signature_scheme") && log.contains("hmac-whirlpool"),
        "{log}"
    );
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn heartbeat_echoes() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let mut hb = zeromq::ReqSocket::new();
    hb.connect(&kernel.url("hb")).await.expect("hb");
    for word in ["ping", "pong?"] {
        hb.send(ZmqMessage::from(word)).await.expect("send");
        let back = timeout(REPLY_TIMEOUT, hb.recv())
            .await
            .expect("in time")
            .expect("recv");
        assert_eq!(
            back.get(0).map(|b| b.to_vec()),
            Some(word.as_bytes().to_vec())
        );
    }
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn shutdown_with_restart_on_shell() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let id = c
        .send(Channel::Shell, "shutdown_request", json!({"restart": true}))
        .await;
    let r = c.reply(Channel::Shell, &id).await;
    assert_eq!(r.msg_type(), "shutdown_reply");
    assert_eq!(r.content, json!({"restart": true, "status": "ok"}));
    let status = kernel
        .wait_exit(Duration::from_secs(5))
        .expect("the kernel exits");
    assert!(status.success());
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn shutdown_on_control_exits_cleanly() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let id = c
        .send(
            Channel::Control,
            "shutdown_request",
            json!({"restart": false}),
        )
        .await;
    let r = c.reply(Channel::Control, &id).await;
    assert_eq!(r.content, json!({"restart": false, "status": "ok"}));
    let status = kernel
        .wait_exit(Duration::from_secs(5))
        .expect("the kernel exits");
    assert!(status.success());
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn ipc_transport_replaces_a_stale_socket_file() {
    let stale: std::cell::Cell<Option<PathBuf>> = std::cell::Cell::new(None);
    let mut kernel = Kernel::start_with(Transport::Ipc, "k", "hmac-sha256", |info| {
        // A file left behind by a kernel that died would make the bind fail.
        let path = PathBuf::from(format!("{}-1", info["ip"].as_str().unwrap_or("")));
        std::fs::write(&path, b"left over").expect("stale file");
        stale.set(Some(path));
    });
    let mut c = kernel.connect().await;
    let (r, _) = c.execute("x = 1 V", json!({})).await;
    assert_eq!(r.content["status"], "ok");
    shut_down(&mut kernel, &mut c).await;
    let stale = stale.take().expect("path");
    assert!(
        !Path::new(&stale).exists(),
        "socket files are removed on exit"
    );
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn interrupt_while_idle_is_acknowledged() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let id = c
        .send(Channel::Control, "interrupt_request", json!({}))
        .await;
    let r = c.reply(Channel::Control, &id).await;
    assert_eq!(r.content, json!({"status": "ok"}));
    // An interrupt with nothing running does not spoil the next run.
    let (r, _) = c.execute("x = 1 V", json!({})).await;
    assert_eq!(r.content["status"], "ok");
    shut_down(&mut kernel, &mut c).await;
}

#[cfg(unix)]
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn sigint_does_not_kill_the_kernel() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let pid = kernel.child.id().to_string();
    let ok = Command::new("kill")
        .args(["-INT", &pid])
        .status()
        .expect("kill runs");
    assert!(ok.success());
    tokio::time::sleep(Duration::from_millis(200)).await;
    assert!(
        kernel.wait_exit(Duration::from_millis(10)).is_none(),
        "still running"
    );
    let id = c
        .send(Channel::Shell, "kernel_info_request", json!({}))
        .await;
    let _ = c.reply(Channel::Shell, &id).await;
    shut_down(&mut kernel, &mut c).await;
}

// ---------------------------------------------------------------------------------------
// Tests of outputs: they need the language's evaluator.

/// A cell that runs for seconds: ten million points with worst-case bands, each calling a
/// function that doubles itself ten times over (1 024 calls a point).
const LONG_CELL: &str = concat!(
    "given a = 1 V ± 1 %\n",
    doubling_functions!(),
    "sweep a over 1 V .. 2 V steps 10000000: f10(a * a * a)",
);

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn an_error_aborts_the_queued_executes() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let content = |code: &str| {
        json!({"code": code, "silent": false, "store_history": true,
                                       "user_expressions": {}, "allow_stdin": false, "stop_on_error": true})
    };
    // Queue three at once, as "run all" does; the first one fails.
    let a = c
        .send(Channel::Shell, "execute_request", content("x = 12 V + 3 A"))
        .await;
    let b = c
        .send(Channel::Shell, "execute_request", content("y = 1 V"))
        .await;
    let k = c
        .send(Channel::Shell, "kernel_info_request", json!({}))
        .await;
    let d = c
        .send(Channel::Shell, "execute_request", content("z = 2 V"))
        .await;
    let ra = c.reply(Channel::Shell, &a).await;
    assert_eq!(ra.content["status"], "error");
    assert_eq!(ra.content["ename"], "DimensionMismatch");
    assert_eq!(
        c.reply(Channel::Shell, &b).await.content,
        json!({"status": "aborted"})
    );
    // Requests other than execute are answered as usual, in order.
    assert_eq!(c.reply(Channel::Shell, &k).await.content["status"], "ok");
    assert_eq!(
        c.reply(Channel::Shell, &d).await.content,
        json!({"status": "aborted"})
    );

    // The error output carries the caret excerpt; it is the only output.
    let out = c.outputs(&a).await;
    let errors: Vec<_> = out.iter().filter(|m| m.msg_type() == "error").collect();
    assert_eq!(errors.len(), 1);
    let tb: Vec<&str> = errors[0].content["traceback"]
        .as_array()
        .map(|a| a.iter().filter_map(Value::as_str).collect())
        .unwrap_or_default();
    assert!(tb.iter().any(|l| l.contains('^')), "{tb:?}");
    assert_eq!(types(&out), ["status", "execute_input", "error", "status"]);

    // With stop_on_error false the next one runs.
    let mut no_stop = content("x = 12 V + 3 A");
    no_stop["stop_on_error"] = json!(false);
    let a = c.send(Channel::Shell, "execute_request", no_stop).await;
    let b = c
        .send(Channel::Shell, "execute_request", content("y = 1 V"))
        .await;
    assert_eq!(c.reply(Channel::Shell, &a).await.content["status"], "error");
    assert_eq!(c.reply(Channel::Shell, &b).await.content["status"], "ok");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn interrupt_stops_a_long_run_and_control_stays_responsive() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let (r, _) = c.execute("given b = 2 V", json!({})).await;
    assert_eq!(r.content["status"], "ok");
    let started = Instant::now();
    let id = c
        .send(
            Channel::Shell,
            "execute_request",
            json!({"code": LONG_CELL, "silent": false, "store_history": true}),
        )
        .await;
    // Queued behind the long cell while it runs: the interrupted cell fails, so this one is
    // aborted (stop_on_error), though it waited in the socket all the while.
    let queued = c
        .send(
            Channel::Shell,
            "execute_request",
            json!({"code": "b = 3 V", "silent": false, "store_history": true}),
        )
        .await;
    // Once execute_input is out the cell is running; give it a moment to get deep in.
    loop {
        let m = c.iopub_msg(REPLY_TIMEOUT).await.expect("execute_input");
        if m.parent_id() == id && m.msg_type() == "execute_input" {
            break;
        }
    }
    tokio::time::sleep(Duration::from_millis(200)).await;
    // Control answers while the cell runs.
    let k = c
        .send(Channel::Control, "kernel_info_request", json!({}))
        .await;
    let _ = c.reply(Channel::Control, &k).await;
    let i = c
        .send(Channel::Control, "interrupt_request", json!({}))
        .await;
    let _ = c.reply(Channel::Control, &i).await;
    let interrupted_at = Instant::now();
    let r = c.reply(Channel::Shell, &id).await;
    let latency = interrupted_at.elapsed();
    println!(
        "interrupt latency: {latency:?} (run had gone {:?})",
        interrupted_at - started
    );
    assert_eq!(r.content["status"], "error");
    assert_eq!(r.content["ename"], "Interrupted");
    assert!(
        latency < Duration::from_secs(3),
        "stopped promptly: {latency:?}"
    );
    assert_eq!(
        c.reply(Channel::Shell, &queued).await.content,
        json!({"status": "aborted"})
    );
    // The kernel lives on, with the worksheet as it was.
    let (r, out) = c.execute("b * 2", json!({})).await;
    assert_eq!(r.content["status"], "ok");
    let result = out
        .iter()
        .find(|m| m.msg_type() == "execute_result")
        .expect("a result");
    let text = result.content["data"]["text/plain"].as_str().unwrap_or("");
    assert!(text.contains('4') && text.contains('V'), "{text}");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn result_blocks_have_display_ids_and_dependents_update() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let (r, out) = c
        .execute_meta("given a = 2 V", json!({}), json!({"cellId": "cell-a"}))
        .await;
    assert_eq!(r.content["status"], "ok");
    let block = out
        .iter()
        .find(|m| m.msg_type() == "display_data")
        .expect("a result block");
    assert_eq!(block.content["transient"]["display_id"], "headroom-cell-a");
    for mime in [
        "text/plain",
        "text/html",
        "application/vnd.headroom.results+json",
    ] {
        assert!(
            block.content["data"].get(mime).is_some(),
            "{mime} in the block"
        );
    }
    let (_, out) = c
        .execute_meta("b = a * 3", json!({}), json!({"cellId": "cell-b"}))
        .await;
    assert!(out.iter().any(|m| m.msg_type() == "display_data"));
    // Changing the given updates the other cell's block in place.
    let (_, out) = c
        .execute_meta("given a = 4 V", json!({}), json!({"cellId": "cell-a"}))
        .await;
    let update = out
        .iter()
        .find(|m| m.msg_type() == "update_display_data")
        .expect("the dependent block is updated");
    assert_eq!(update.content["transient"]["display_id"], "headroom-cell-b");
    // b = 4 V × 3 = 12 V.
    let text = update.content["data"]["text/plain"].as_str().unwrap_or("");
    assert!(text.contains("12"), "{text}");
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_bare_expression_is_the_execute_result() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let (r, out) = c.execute("2 V * 3", json!({})).await;
    assert_eq!(r.content["status"], "ok");
    let result = out
        .iter()
        .find(|m| m.msg_type() == "execute_result")
        .expect("a result");
    assert_eq!(result.content["execution_count"], 1);
    // 2 V × 3 = 6 V.
    let text = result.content["data"]["text/plain"].as_str().unwrap_or("");
    assert!(text.contains('6') && text.contains('V'), "{text}");
    assert!(result.content["metadata"].is_object());
    shut_down(&mut kernel, &mut c).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_sweep_adds_its_chart_as_a_display_of_its_own() {
    let mut kernel = Kernel::start(Transport::Tcp, "k");
    let mut c = kernel.connect().await;
    let (r, out) = c
        .execute_meta(
            "given i = 100 mA\nsweep i over 10 mA .. 100 mA steps 5: i * 10 Ω",
            json!({}),
            json!({"cellId": "s1"}),
        )
        .await;
    assert_eq!(r.content["status"], "ok", "{:?}", r.content);
    let displays: Vec<&Msg> = out
        .iter()
        .filter(|m| m.msg_type() == "display_data")
        .collect();
    assert_eq!(
        displays[0].content["transient"]["display_id"],
        "headroom-s1"
    );
    let chart = displays
        .iter()
        .find(|m| m.content["transient"]["display_id"] == "headroom-s1-chart-0")
        .expect("a chart display");
    // Untrusted notebooks do not show SVG, so a PNG comes along.
    assert!(chart.content["data"].get("image/svg+xml").is_some());
    assert!(chart.content["data"].get("image/png").is_some());
    shut_down(&mut kernel, &mut c).await;
}
