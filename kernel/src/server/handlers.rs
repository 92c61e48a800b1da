//! Request handling: one dispatch function per channel, each arm a call to a small handler.
//!
//! The shell channel is served in order by one task on the shell thread, which evaluates
//! cells itself; the control channel (interrupt, shutdown) lives on another thread and stays
//! responsive meanwhile.

use super::cursor;
use super::execute::{Outcome, Update};
use super::history::{self, History};
use super::wire::{self, Incoming, Session, PROTOCOL_VERSION};
use bytes::Bytes;
use jupyter_protocol::{
    CommInfoReply, CompleteReply, CompleteRequest, ErrorOutput, ExecuteInput, ExecuteReply,
    ExecuteRequest, ExecutionCount, ExpressionResult, InspectReply, InspectRequest, InterruptReply,
    IsCompleteReply, IsCompleteRequest, KernelInfoReply, LanguageInfo, Media, MediaType,
    ReplyError, ReplyStatus, ShutdownReply, ShutdownRequest, Status, StreamContent,
};
use ring::hmac;
use serde_json::{json, Map, Value};
use std::collections::{HashMap, VecDeque};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::Arc;
use tokio::sync::{mpsc, Notify};
use worksheet_lang::{Completeness, Interrupt, Worksheet};
use zeromq::{RouterSendHalf, SocketSend, ZmqMessage};

/// How long a failed cell's reply waits for requests sent right behind it, which
/// `stop_on_error` then aborts. Short enough not to be noticed.
const ABORT_WINDOW: std::time::Duration = std::time::Duration::from_millis(50);

/// How long the shell reader gets, after a failed cell, to queue the requests that came
/// while the cell ran: they are already in the socket, so a tick of the runtime suffices.
const READ_BACKLOG: std::time::Duration = std::time::Duration::from_millis(2);

/// What every task of the kernel shares.
pub(crate) struct Shared {
    pub session: Session,
    pub key: Option<hmac::Key>,
    pub iopub: mpsc::UnboundedSender<ZmqMessage>,
    pub interrupt: Interrupt,
    /// Notified once a shutdown reply has been sent.
    pub shutdown: Notify,
    /// True while the shell handles a request (a shutdown waits for its reply to go out).
    pub busy: std::sync::atomic::AtomicBool,
    /// Signatures of recent messages: an exact replay of a signed message is refused, as
    /// jupyter_client's own sessions do.
    pub seen: std::sync::Mutex<RecentSignatures>,
}

/// A bounded set of the most recent signatures (their first 16 bytes: 64 bits of a
/// verified HMAC are plenty to tell messages apart, and keep the set small).
#[derive(Default)]
pub(crate) struct RecentSignatures {
    order: std::collections::VecDeque<[u8; 16]>,
    set: std::collections::HashSet<[u8; 16]>,
}

impl RecentSignatures {
    /// How many signatures are remembered.
    const KEEP: usize = 16_384;

    /// Records `sig`; false when it was already there.
    pub fn insert(&mut self, sig: Vec<u8>) -> bool {
        let mut key = [0u8; 16];
        for (k, b) in key.iter_mut().zip(&sig) {
            *k = *b;
        }
        let sig = key;
        if self.set.contains(&sig) {
            return false;
        }
        if self.order.len() >= Self::KEEP {
            if let Some(old) = self.order.pop_front() {
                self.set.remove(&old);
            }
        }
        self.order.push_back(sig);
        self.set.insert(sig);
        true
    }
}

impl Shared {
    /// Verifies and parses a request; a message that fails is logged and dropped.
    pub fn decode(&self, frames: ZmqMessage, channel: &str) -> Option<Incoming> {
        // The signature frame follows the delimiter; kept to refuse exact replays.
        let signature = frames
            .iter()
            .position(|f| f.as_ref() == b"<IDS|MSG>")
            .and_then(|i| frames.get(i + 1))
            .map(|f| f.to_vec());
        match wire::decode(frames, &self.key) {
            Ok(m) => {
                if let (Some(_), Some(sig)) = (&self.key, signature) {
                    if !self
                        .seen
                        .lock()
                        .unwrap_or_else(|e| e.into_inner())
                        .insert(sig)
                    {
                        tracing::warn!(
                            "dropped a message on {channel}: a replay of a signature already seen"
                        );
                        return None;
                    }
                }
                Some(m)
            }
            Err(e) => {
                tracing::warn!("dropped a message on {channel}: {e}");
                None
            }
        }
    }

    pub fn publish(&self, msg_type: &str, parent: &Incoming, content: &Value) {
        let topic = Bytes::from(format!("kernel.{}.{msg_type}", self.session.id));
        let frames = self
            .session
            .encode(&[topic], msg_type, Some(&parent.header_bytes), content);
        // The publisher task only stops when the kernel does.
        let _ = self.iopub.send(frames);
    }

    fn status(&self, parent: &Incoming, busy: bool) {
        let s = if busy { Status::busy() } else { Status::idle() };
        self.publish("status", parent, &wire::content(&s, &[]));
    }
}

/// Sends replies back through a ROUTER socket.
pub(crate) struct Replier {
    pub socket: RouterSendHalf,
}

impl Replier {
    async fn send(&mut self, shared: &Shared, req: &Incoming, msg_type: &str, content: &Value) {
        self.send_with_metadata(shared, req, msg_type, &json!({}), content)
            .await
    }

    async fn send_with_metadata(
        &mut self,
        shared: &Shared,
        req: &Incoming,
        msg_type: &str,
        metadata: &Value,
        content: &Value,
    ) {
        let frames = shared.session.encode_with_metadata(
            &req.identities,
            msg_type,
            Some(&req.header_bytes),
            metadata,
            content,
        );
        if let Err(e) = self.socket.send(frames).await {
            // The client went away; nothing else to do with its reply.
            tracing::warn!("cannot send {msg_type}: {e}");
        }
    }
}

fn reply_type(msg_type: &str) -> String {
    format!("{}_reply", msg_type.trim_end_matches("_request"))
}

/// Adds each default whose key the request left out.
fn with_defaults(mut content: Value, defaults: &[(&str, Value)]) -> Value {
    if let Some(map) = content.as_object_mut() {
        for (k, v) in defaults {
            if !map.contains_key(*k) {
                map.insert((*k).to_string(), v.clone());
            }
        }
    }
    content
}

/// The error reply to a request whose content does not parse.
fn bad_request(err: &serde_json::Error) -> Value {
    json!({
        "status": "error",
        "ename": "BadRequest",
        "evalue": format!("the request content is not valid: {err}"),
        "traceback": [],
    })
}

/// Runs `f` on the worksheet, turning a panic inside the evaluator into `None`: a bug in
/// one cell must not take the session down with it (the panic hook has logged it).
fn guarded<T>(ws: &mut Worksheet, f: impl FnOnce(&mut Worksheet) -> T) -> Option<T> {
    catch_unwind(AssertUnwindSafe(|| f(ws))).ok()
}

pub(crate) fn kernel_info() -> Value {
    let version = env!("CARGO_PKG_VERSION");
    let reply = KernelInfoReply {
        status: ReplyStatus::Ok,
        protocol_version: PROTOCOL_VERSION.into(),
        implementation: "headroom".into(),
        implementation_version: version.into(),
        language_info: LanguageInfo {
            name: "headroom".into(),
            version: version.into(),
            mimetype: Some("text/x-headroom".into()),
            file_extension: Some(".hrw".into()),
            // No Pygments lexer knows the language yet; naming the plain-text one keeps
            // jupyter-console and nbconvert from warning about a missing lexer.
            pygments_lexer: Some("text".into()),
            codemirror_mode: None,
            nbconvert_exporter: None,
        },
        banner: format!(
            "Headroom {version}: power-design worksheets with units and worst-case ranges.\n\
             Results are engineering estimates from the inputs given: confirm them against the \
             parts' datasheets, by measurement, and with the codes that apply."
        ),
        help_links: Vec::new(),
        debugger: false,
        error: None,
    };
    wire::content(&reply, &[])
}

// ---------------------------------------------------------------------------------------
// control

pub(crate) async fn serve_control(
    mut recv: zeromq::RouterRecvHalf,
    mut replier: Replier,
    shared: Arc<Shared>,
) {
    use zeromq::SocketRecv;
    loop {
        let frames = match recv.recv().await {
            Ok(f) => f,
            Err(e) => {
                tracing::error!("the control socket closed: {e}");
                return;
            }
        };
        let Some(req) = shared.decode(frames, "control") else {
            continue;
        };
        match req.msg_type.as_str() {
            "kernel_info_request" => {
                shared.status(&req, true);
                replier
                    .send(&shared, &req, "kernel_info_reply", &kernel_info())
                    .await;
                shared.status(&req, false);
            }
            "interrupt_request" => {
                shared.status(&req, true);
                shared.interrupt.raise();
                let reply = wire::content(&InterruptReply::new(), &[]);
                replier.send(&shared, &req, "interrupt_reply", &reply).await;
                shared.status(&req, false);
            }
            "shutdown_request" => shutdown(&shared, &mut replier, &req).await,
            other => tracing::info!("ignoring {other} on the control channel"),
        }
    }
}

async fn shutdown(shared: &Shared, replier: &mut Replier, req: &Incoming) {
    shared.status(req, true);
    let request: ShutdownRequest = serde_json::from_value(with_defaults(
        req.content.clone(),
        &[("restart", json!(false))],
    ))
    .unwrap_or_default();
    let reply = ShutdownReply {
        restart: request.restart,
        status: ReplyStatus::Ok,
        error: None,
    };
    replier
        .send(shared, req, "shutdown_reply", &wire::content(&reply, &[]))
        .await;
    shared.status(req, false);
    // Stop a running evaluation; the client restarts the process itself when asked to.
    shared.interrupt.raise();
    shared.shutdown.notify_one();
}

// ---------------------------------------------------------------------------------------
// shell

/// Reads the shell socket into the queue whenever the shell thread is free, so requests that
/// wait behind a cell are known (and `stop_on_error` can tell which were waiting).
pub(crate) async fn read_shell(
    mut recv: zeromq::RouterRecvHalf,
    shared: Arc<Shared>,
    queue: mpsc::UnboundedSender<Incoming>,
) {
    use zeromq::SocketRecv;
    loop {
        match recv.recv().await {
            Ok(frames) => {
                if let Some(req) = shared.decode(frames, "shell") {
                    if queue.send(req).is_err() {
                        return;
                    }
                }
            }
            Err(e) => {
                tracing::error!("the shell socket closed: {e}");
                return;
            }
        }
    }
}

pub(crate) struct Shell {
    pub shared: Arc<Shared>,
    pub replier: Replier,
    pub queue: mpsc::UnboundedReceiver<Incoming>,
    /// Requests taken off the queue after an error; their executes are aborted.
    pub aborting: VecDeque<Incoming>,
    /// Owned by the shell task: cells, completion and inspection run on the shell thread.
    pub worksheet: Worksheet,
    pub execution_count: usize,
    pub history: History,
    /// The last run's results, held until the next run has replied: the worksheet then drops
    /// its own copy of the report they replace, and freeing them waits until the reply is
    /// out, off the request's path.
    retired: Option<worksheet_lang::Execution>,
    /// The results the run before it held, to free once the current request has replied.
    to_free: Option<worksheet_lang::Execution>,
}

impl Shell {
    pub fn new(
        shared: Arc<Shared>,
        replier: Replier,
        queue: mpsc::UnboundedReceiver<Incoming>,
    ) -> Self {
        Shell {
            shared,
            replier,
            queue,
            aborting: VecDeque::new(),
            worksheet: Worksheet::new(),
            execution_count: 0,
            history: History::default(),
            retired: None,
            to_free: None,
        }
    }

    pub async fn run(mut self) {
        loop {
            let (req, abort) = match self.aborting.pop_front() {
                Some(r) => (r, true),
                None => match self.queue.recv().await {
                    Some(r) => (r, false),
                    None => return,
                },
            };
            self.dispatch(req, abort).await;
        }
    }

    /// The one dispatch path of the shell channel.
    async fn dispatch(&mut self, req: Incoming, abort: bool) {
        use std::sync::atomic::Ordering;
        self.shared.busy.store(true, Ordering::SeqCst);
        self.dispatch_one(req, abort).await;
        self.shared.busy.store(false, Ordering::SeqCst);
    }

    async fn dispatch_one(&mut self, req: Incoming, abort: bool) {
        let shared = self.shared.clone();
        let known = matches!(
            req.msg_type.as_str(),
            "execute_request"
                | "kernel_info_request"
                | "complete_request"
                | "inspect_request"
                | "is_complete_request"
                | "history_request"
                | "comm_info_request"
                | "shutdown_request"
        );
        if !known {
            // The specification asks kernels not to reply to message types they do not know.
            tracing::warn!("ignoring an unknown message type {:?}", req.msg_type);
            return;
        }
        if req.msg_type == "shutdown_request" {
            return shutdown(&shared, &mut self.replier, &req).await;
        }
        shared.status(&req, true);
        let started = tokio::time::Instant::now();
        let mut metadata = json!({});
        let reply = match req.msg_type.as_str() {
            "execute_request" if abort => json!({"status": "aborted"}),
            "execute_request" => {
                let (reply, evaluation) = self.execute(&req).await;
                if let Some(d) = evaluation {
                    metadata = json!({"headroom": {"evaluation_seconds": d.as_secs_f64()}});
                }
                reply
            }
            "kernel_info_request" => kernel_info(),
            "complete_request" => self.complete(&req),
            "inspect_request" => self.inspect(&req),
            "is_complete_request" => is_complete(&req),
            "history_request" => self.history(&req),
            _ => wire::content(&CommInfoReply::default(), &["comms"]),
        };
        let failed = reply["status"] == "error";
        if failed && req.msg_type == "execute_request" && stops_on_error(&req) {
            self.abort_queued(started).await;
        }
        self.replier
            .send_with_metadata(&shared, &req, &reply_type(&req.msg_type), &metadata, &reply)
            .await;
        shared.status(&req, false);
        // The results the last run replaced are freed now that the reply is out.
        self.to_free = None;
    }

    /// Takes every request waiting behind a failed cell; the executes among them will be
    /// aborted, the rest answered as usual, all in the order they came.
    ///
    /// This happens before the failed cell's reply is sent, so nothing a client sends in
    /// answer to that reply is aborted. A cell can fail faster than the requests sent right
    /// behind it ("run all") arrive, so stragglers get a short window from the moment the
    /// failed cell started. Requests that came while the cell held the thread are still in
    /// the socket: the reader gets a moment to queue them, however long the cell ran.
    async fn abort_queued(&mut self, started: tokio::time::Instant) {
        let now = tokio::time::Instant::now();
        tokio::time::sleep_until((started + ABORT_WINDOW).max(now + READ_BACKLOG)).await;
        while let Ok(r) = self.queue.try_recv() {
            self.aborting.push_back(r);
        }
    }

    /// Runs a cell: the reply's content, and how long `Worksheet::execute` took (None when
    /// it did not run to the end).
    async fn execute(&mut self, req: &Incoming) -> (Value, Option<std::time::Duration>) {
        let content = with_defaults(
            req.content.clone(),
            &[("silent", json!(false)), ("store_history", json!(true))],
        );
        let request: ExecuteRequest = match serde_json::from_value(content) {
            Ok(r) => r,
            Err(e) => return (bad_request(&e), None),
        };
        let silent = request.silent;
        // A silent run never enters the history (the specification ties the two).
        let store_history = request.store_history && !silent;
        if store_history {
            self.execution_count += 1;
            self.history
                .record(self.execution_count as u64, &request.code);
        }
        let count = ExecutionCount::new(self.execution_count);
        // Cleared before execute_input goes out: an interrupt sent by a client that has seen
        // this cell start is never lost.
        let interrupt = self.shared.interrupt.clone();
        interrupt.clear();
        if !silent {
            let input = ExecuteInput {
                code: request.code.clone(),
                execution_count: count,
            };
            self.shared
                .publish("execute_input", req, &wire::content(&input, &[]));
        }

        let cell = cell_key(&req.metadata);
        let deleted = deleted_cells(&req.metadata);
        let code = &request.code;
        // The cell runs on this thread and holds it until it ends. One yield first lets the
        // publisher and the socket's writer tasks (woken by the two messages above, and run
        // before this task resumes) put `busy` and `execute_input` on the wire, so a client
        // sees a long cell start when it starts.
        tokio::task::yield_now().await;
        let run = guarded(&mut self.worksheet, |ws| {
            // Cells deleted in the front end go first: their names are gone, and the cells
            // that used them say so.
            let keys: Vec<&str> = deleted.iter().map(String::as_str).collect();
            let mut gone = ws.forget(&keys, &interrupt).unwrap_or_default();
            // The timer leaves out parsing, as Python's figure leaves out compiling the cell.
            let prepared = worksheet_lang::Prepared::new(code);
            let started = std::time::Instant::now();
            let mut ex = ws.execute_prepared(cell.as_deref(), prepared, &interrupt);
            let evaluation = started.elapsed();
            gone.retain(|u| {
                u.report.cell != ex.report.cell
                    && !ex.updated.iter().any(|x| x.report.cell == u.report.cell)
            });
            ex.updated.splice(0..0, gone);
            (Outcome::of(&ex), Some(evaluation), Some(ex))
        });
        let (outcome, evaluation, ex) = run.unwrap_or_else(|| {
            tracing::error!("the evaluator failed");
            let failed = Outcome::Failed {
                ename: "InternalError".into(),
                evalue: "the evaluator failed; please report this cell".into(),
                traceback: Vec::new(),
            };
            (failed, None, None)
        });
        if let Some(ex) = ex {
            self.to_free = self.retired.replace(ex);
        }

        let reply = match outcome {
            Outcome::Failed {
                ename,
                evalue,
                traceback,
            } => {
                if !silent {
                    let err = ErrorOutput {
                        ename: ename.clone(),
                        evalue: evalue.clone(),
                        traceback: traceback.clone(),
                    };
                    self.shared.publish("error", req, &wire::content(&err, &[]));
                }
                let reply = ExecuteReply {
                    status: ReplyStatus::Error,
                    execution_count: count,
                    payload: Vec::new(),
                    user_expressions: None,
                    error: Some(Box::new(ReplyError {
                        ename,
                        evalue,
                        traceback,
                    })),
                };
                wire::content(&reply, &["user_expressions"])
            }
            Outcome::Done {
                display_id,
                block,
                charts,
                shown,
                stderr,
                updates,
            } => {
                if let (true, Some(text)) = (store_history, shown.as_ref().and_then(plain_text)) {
                    self.history.set_output(self.execution_count as u64, text);
                }
                if !silent {
                    let outputs = Outputs {
                        display_id,
                        block,
                        charts,
                        shown,
                        stderr,
                        updates,
                    };
                    self.publish_outputs(req, count, outputs);
                }
                let reply = ExecuteReply {
                    status: ReplyStatus::Ok,
                    execution_count: count,
                    payload: Vec::new(),
                    user_expressions: Some(unevaluated(request.user_expressions.as_ref())),
                    error: None,
                };
                wire::content(&reply, &["user_expressions"])
            }
        };
        (reply, evaluation)
    }

    fn publish_outputs(&self, req: &Incoming, count: ExecutionCount, o: Outputs) {
        let shared = &self.shared;
        // The bundles are moved into the content: `json!` would serialize them again.
        let display = |msg_type: &str, display_id: &str, data: Map<String, Value>| {
            let mut content = Map::new();
            content.insert("data".into(), Value::Object(data));
            content.insert("metadata".into(), json!({}));
            content.insert("transient".into(), json!({"display_id": display_id}));
            shared.publish(msg_type, req, &Value::Object(content));
        };
        if let Some(data) = o.block {
            display("display_data", &o.display_id, data);
        }
        for c in o.charts {
            display("display_data", &c.display_id, c.bundle);
        }
        if let Some(data) = o.shown {
            let mut content = Map::new();
            content.insert("execution_count".into(), json!(count.value()));
            content.insert("data".into(), Value::Object(data));
            content.insert("metadata".into(), json!({}));
            shared.publish("execute_result", req, &Value::Object(content));
        }
        if let Some(text) = o.stderr {
            let s = StreamContent::stderr(&text);
            shared.publish("stream", req, &wire::content(&s, &[]));
        }
        for u in o.updates {
            display("update_display_data", &u.display_id, u.bundle);
        }
    }

    fn complete(&mut self, req: &Incoming) -> Value {
        let cps = req.content["code"]
            .as_str()
            .map_or(0, |c| c.chars().count());
        let content = with_defaults(req.content.clone(), &[("cursor_pos", json!(cps))]);
        let request: CompleteRequest = match serde_json::from_value(content) {
            Ok(r) => r,
            Err(e) => return bad_request(&e),
        };
        let byte = cursor::byte_of(&request.code, request.cursor_pos);
        let completion =
            guarded(&mut self.worksheet, |ws| ws.complete(&request.code, byte)).unwrap_or_default();
        let (start, end) = if completion.matches.is_empty() {
            (request.cursor_pos, request.cursor_pos)
        } else {
            let start = cursor::code_point_of(&request.code, completion.start);
            let end = cursor::code_point_of(&request.code, completion.end);
            (start.min(end), end)
        };
        let reply = CompleteReply {
            matches: completion.matches,
            cursor_start: start,
            cursor_end: end,
            metadata: Map::new(),
            status: ReplyStatus::Ok,
            error: None,
        };
        wire::content(&reply, &["metadata"])
    }

    fn inspect(&mut self, req: &Incoming) -> Value {
        let cps = req.content["code"]
            .as_str()
            .map_or(0, |c| c.chars().count());
        let content = with_defaults(req.content.clone(), &[("cursor_pos", json!(cps))]);
        let request: InspectRequest = match serde_json::from_value(content) {
            Ok(r) => r,
            Err(e) => return bad_request(&e),
        };
        let byte = cursor::byte_of(&request.code, request.cursor_pos);
        // Inspecting a definition evaluates its cell once more (for the shares of its
        // spread); an interrupt stops that as it stops a cell. One raised before this
        // request was for something that has finished.
        let interrupt = self.shared.interrupt.clone();
        interrupt.clear();
        let found = guarded(&mut self.worksheet, |ws| {
            ws.inspect(&request.code, byte, &interrupt)
        })
        .flatten();
        let reply = match found {
            Some(i) => InspectReply {
                found: true,
                // The text is Markdown-flavoured: front ends that render Markdown show it
                // formatted, consoles show it as it is.
                data: Media::new(vec![
                    MediaType::Plain(i.text.clone()),
                    MediaType::Markdown(i.text),
                ]),
                ..InspectReply::default()
            },
            None => InspectReply::default(),
        };
        wire::content(&reply, &["data", "metadata"])
    }

    fn history(&self, req: &Incoming) -> Value {
        match serde_json::from_value::<history::Query>(req.content.clone()) {
            Ok(q) => json!({"status": "ok", "history": self.history.answer(&q)}),
            Err(e) => bad_request(&e),
        }
    }
}

/// What a successful run publishes, in this order.
struct Outputs {
    display_id: String,
    block: Option<Map<String, Value>>,
    charts: Vec<Update>,
    shown: Option<Map<String, Value>>,
    stderr: Option<String>,
    updates: Vec<Update>,
}

fn is_complete(req: &Incoming) -> Value {
    let request: IsCompleteRequest = match serde_json::from_value(req.content.clone()) {
        Ok(r) => r,
        Err(e) => return bad_request(&e),
    };
    let reply = match worksheet_lang::is_complete(&request.code) {
        Completeness::Complete => IsCompleteReply::complete(),
        Completeness::Incomplete { indent } => IsCompleteReply::incomplete(indent),
        Completeness::Invalid => IsCompleteReply::invalid(),
    };
    let mut v = wire::content(&reply, &[]);
    // `indent` belongs to "incomplete" replies only.
    if reply.status != jupyter_protocol::IsCompleteReplyStatus::Incomplete {
        if let Some(m) = v.as_object_mut() {
            m.remove("indent");
        }
    }
    v
}

/// `stop_on_error` defaults to true; a silent request never aborts the queue.
fn stops_on_error(req: &Incoming) -> bool {
    let c = &req.content;
    c.get("stop_on_error")
        .and_then(Value::as_bool)
        .unwrap_or(true)
        && !c.get("silent").and_then(Value::as_bool).unwrap_or(false)
}

/// The front end's cell id, where it sends one (JupyterLab and Notebook write `cellId`,
/// some front ends `cell_id`).
/// The cells a front end reports deleted (JupyterLab's `deletedCells`).
fn deleted_cells(metadata: &Value) -> Vec<String> {
    metadata
        .get("deletedCells")
        .and_then(Value::as_array)
        .map(|a| {
            a.iter()
                .filter_map(Value::as_str)
                .map(str::to_string)
                .collect()
        })
        .unwrap_or_default()
}

fn cell_key(metadata: &Value) -> Option<String> {
    ["cellId", "cell_id"]
        .iter()
        .find_map(|k| metadata.get(*k).and_then(Value::as_str))
        .filter(|s| !s.is_empty())
        .map(str::to_string)
}

fn plain_text(bundle: &Map<String, Value>) -> Option<String> {
    bundle
        .get("text/plain")
        .and_then(Value::as_str)
        .map(str::to_string)
}

/// Results for the `user_expressions` of a request: the language has no side-effect-free
/// evaluation of a stray expression yet, so each one reports that plainly.
fn unevaluated(exprs: Option<&HashMap<String, String>>) -> HashMap<String, ExpressionResult> {
    exprs
        .into_iter()
        .flatten()
        .map(|(k, _)| {
            (
                k.clone(),
                ExpressionResult::Error {
                    ename: "NotSupported".into(),
                    evalue: "user_expressions are not evaluated by this kernel".into(),
                    traceback: Vec::new(),
                },
            )
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reply_types_follow_request_types() {
        assert_eq!(reply_type("execute_request"), "execute_reply");
        assert_eq!(reply_type("comm_info_request"), "comm_info_reply");
    }

    #[test]
    fn cell_ids_come_from_either_spelling() {
        assert_eq!(cell_key(&json!({"cellId": "a1"})).as_deref(), Some("a1"));
        assert_eq!(cell_key(&json!({"cell_id": "b2"})).as_deref(), Some("b2"));
        assert_eq!(cell_key(&json!({"cellId": ""})), None);
        assert_eq!(cell_key(&json!({})), None);
    }

    #[test]
    fn missing_silent_and_store_history_are_filled_in() {
        let c = with_defaults(
            json!({"code": "x = 1 V"}),
            &[("silent", json!(false)), ("store_history", json!(true))],
        );
        let r: ExecuteRequest = serde_json::from_value(c).expect("parses once filled in");
        assert!(!r.silent && r.store_history && r.stop_on_error);
    }

    #[test]
    fn kernel_info_names_the_language() {
        let k = kernel_info();
        assert_eq!(k["protocol_version"], "5.4");
        assert_eq!(k["language_info"]["file_extension"], ".hrw");
        assert_eq!(k["language_info"]["mimetype"], "text/x-headroom");
        assert_eq!(k["status"], "ok");
    }
}
