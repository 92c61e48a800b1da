//! Jupyter wire messages: the multipart frames, their signature, and the JSON parts.
//!
//! Incoming frames are split and verified by `jupyter_zmq_client::RawMessage::from_multipart`
//! (HMAC-SHA256 checked in constant time by `ring`). We stop there and parse the four JSON
//! parts ourselves: the crate's own conversion to `JupyterMessage` rejects execute requests
//! that omit `silent`/`store_history`, and we echo the request's header as the parent header
//! exactly as the client wrote it rather than re-serialising a parsed copy (which would
//! rewrite its date with nine fractional digits).
//!
//! Outgoing frames are written here: the crate's sending path is private and serialises
//! through `jupyter-protocol`, which writes `null` where the schema wants `{}`, nine
//! fractional digits in dates (Python clients parse six), protocol version 5.3 and the
//! username "runtimelib". Signing uses the same `ring` key the verification uses.

use bytes::Bytes;
use jupyter_zmq_client::RawMessage;
use ring::hmac;
use serde::Serialize;
use serde_json::{Map, Value};
use std::sync::atomic::{AtomicU64, Ordering};
use zeromq::ZmqMessage;

/// The protocol version this kernel speaks.
pub(crate) const PROTOCOL_VERSION: &str = "5.4";

const DELIMITER: &[u8] = b"<IDS|MSG>";

/// A request as received, verified and parsed.
#[derive(Debug, Clone)]
pub(crate) struct Incoming {
    /// Routing frames (the ROUTER socket puts the peer's identity first).
    pub identities: Vec<Bytes>,
    /// The header exactly as sent, byte for byte: it becomes the parent header of every
    /// message we send in response (a re-serialised copy could differ, e.g. in its date).
    pub header_bytes: Bytes,
    pub msg_type: String,
    pub metadata: Value,
    pub content: Value,
}

#[derive(Debug, thiserror::Error)]
pub(crate) enum WireError {
    #[error("bad framing or signature: {0}")]
    Frames(#[from] jupyter_zmq_client::RuntimeError),
    #[error("the {part} part is not a JSON object: {detail}")]
    Json { part: &'static str, detail: String },
    #[error("the header has no msg_type")]
    NoMsgType,
}

/// Splits, verifies and parses one multipart message. A message that fails here must be
/// dropped without being acted on.
pub(crate) fn decode(frames: ZmqMessage, key: &Option<hmac::Key>) -> Result<Incoming, WireError> {
    let raw = RawMessage::from_multipart(frames, key)?;
    let object = |i: usize, part: &'static str| -> Result<Value, WireError> {
        let v: Value = serde_json::from_slice(&raw.jparts[i]).map_err(|e| WireError::Json {
            part,
            detail: e.to_string(),
        })?;
        if v.is_object() {
            Ok(v)
        } else {
            Err(WireError::Json {
                part,
                detail: "not an object".into(),
            })
        }
    };
    let header = object(0, "header")?;
    let metadata = object(2, "metadata")?;
    let content = object(3, "content")?;
    let msg_type = header
        .get("msg_type")
        .and_then(Value::as_str)
        .ok_or(WireError::NoMsgType)?
        .to_string();
    Ok(Incoming {
        identities: raw.zmq_identities,
        header_bytes: raw.jparts[0].clone(),
        msg_type,
        metadata,
        content,
    })
}

/// The kernel's side of a session: its id, its key, and how it writes messages.
pub(crate) struct Session {
    pub id: String,
    key: Option<hmac::Key>,
    /// Messages sent so far: a message's id is the session's id and this count, unique
    /// without asking the system for randomness per message.
    sent: AtomicU64,
}

/// The header of a message we send, serialised straight from its fields.
#[derive(Serialize)]
struct Header<'a> {
    msg_id: &'a str,
    username: &'static str,
    session: &'a str,
    date: &'a str,
    msg_type: &'a str,
    version: &'static str,
}

impl Session {
    pub fn new(key: Option<hmac::Key>) -> Self {
        Session {
            id: uuid::Uuid::new_v4().to_string(),
            key,
            sent: AtomicU64::new(0),
        }
    }

    /// Frames one message. `identities` route a reply back through a ROUTER socket; iopub
    /// messages pass a topic instead.
    pub fn encode(
        &self,
        identities: &[Bytes],
        msg_type: &str,
        parent: Option<&Bytes>,
        content: &Value,
    ) -> ZmqMessage {
        let empty = Value::Object(Map::new());
        self.encode_with_metadata(identities, msg_type, parent, &empty, content)
    }

    /// As `encode`, with the message's metadata (an execute_reply carries the evaluation
    /// time there).
    pub fn encode_with_metadata(
        &self,
        identities: &[Bytes],
        msg_type: &str,
        parent: Option<&Bytes>,
        metadata: &Value,
        content: &Value,
    ) -> ZmqMessage {
        let n = self.sent.fetch_add(1, Ordering::Relaxed);
        let header = Header {
            msg_id: &format!("{}_{n}", self.id),
            username: "headroom",
            session: &self.id,
            date: &now_iso8601(),
            msg_type,
            version: PROTOCOL_VERSION,
        };
        let parts = [
            Bytes::from(serde_json::to_vec(&header).unwrap_or_default()),
            parent.cloned().unwrap_or_else(|| Bytes::from_static(b"{}")),
            to_bytes(metadata),
            to_bytes(content),
        ];
        let signature = self.sign(&parts);
        let mut frames: Vec<Bytes> = identities.to_vec();
        frames.push(Bytes::from_static(DELIMITER));
        frames.push(Bytes::from(signature));
        frames.extend(parts);
        // Never empty: the delimiter is always there.
        ZmqMessage::try_from(frames).unwrap_or_else(|_| ZmqMessage::from(DELIMITER.to_vec()))
    }

    /// Hex HMAC-SHA256 over header, parent header, metadata and content; empty without a key.
    fn sign(&self, parts: &[Bytes; 4]) -> String {
        let Some(key) = &self.key else {
            return String::new();
        };
        let mut ctx = hmac::Context::with_key(key);
        for p in parts {
            ctx.update(p);
        }
        hex(ctx.sign().as_ref())
    }
}

fn to_bytes(v: &Value) -> Bytes {
    // Serialising a `Value` cannot fail (its map keys are strings).
    Bytes::from(serde_json::to_vec(v).unwrap_or_default())
}

fn hex(bytes: &[u8]) -> String {
    const DIGITS: &[u8; 16] = b"0123456789abcdef";
    let mut s = String::with_capacity(bytes.len() * 2);
    for &b in bytes {
        s.push(char::from(DIGITS[usize::from(b >> 4)]));
        s.push(char::from(DIGITS[usize::from(b & 0x0f)]));
    }
    s
}

/// ISO 8601 in UTC with exactly six fractional digits, as Python's `datetime.isoformat`
/// writes and `jupyter_client` reads.
pub(crate) fn now_iso8601() -> String {
    let since = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .unwrap_or_default();
    iso8601(since)
}

fn iso8601(since_epoch: std::time::Duration) -> String {
    let secs = i64::try_from(since_epoch.as_secs()).unwrap_or(0);
    match chrono::DateTime::from_timestamp(secs, since_epoch.subsec_nanos()) {
        // A fixed format (no format string to interpret for every message).
        Some(t) => t.to_rfc3339_opts(chrono::SecondsFormat::Micros, true),
        None => "1970-01-01T00:00:00.000000Z".to_string(),
    }
}

/// Serialises a `jupyter-protocol` content type, then replaces the `null`s it writes for
/// absent optional objects with the `{}` the message schema asks for.
pub(crate) fn content<T: Serialize>(value: &T, objects: &[&str]) -> Value {
    let mut v = serde_json::to_value(value).unwrap_or_else(|_| Value::Object(Map::new()));
    if let Some(map) = v.as_object_mut() {
        for key in objects {
            if map.get(*key).is_none_or(Value::is_null) {
                map.insert((*key).to_string(), Value::Object(Map::new()));
            }
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;
    use std::time::Duration;

    #[test]
    fn dates_have_six_fractional_digits() {
        // 1_700_000_000 s after the epoch is 2023-11-14T22:13:20Z (POSIX time; checked with
        // `date -u -d @1700000000`).
        let t = iso8601(Duration::new(1_700_000_000, 123_456_789));
        assert_eq!(t, "2023-11-14T22:13:20.123456Z");
        let t = iso8601(Duration::new(1_700_000_000, 0));
        assert_eq!(t, "2023-11-14T22:13:20.000000Z");
    }

    #[test]
    fn signature_is_hmac_sha256_of_the_four_parts() {
        // RFC 4231 test case 2: key "Jefe", data "what do ya want for nothing?".
        let s = Session::new(Some(hmac::Key::new(hmac::HMAC_SHA256, b"Jefe")));
        let parts = [
            Bytes::from_static(b"what do "),
            Bytes::from_static(b"ya want "),
            Bytes::from_static(b"for "),
            Bytes::from_static(b"nothing?"),
        ];
        assert_eq!(
            s.sign(&parts),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
        assert_eq!(Session::new(None).sign(&parts), "");
    }

    #[test]
    fn encoded_messages_verify_and_decode() {
        let key = Some(hmac::Key::new(hmac::HMAC_SHA256, b"k"));
        let s = Session::new(key.clone());
        // The parent header goes out byte for byte as the request carried it.
        let parent = Bytes::from_static(br#"{"msg_type":"kernel_info_request", "msg_id": "p1"}"#);
        let id = [Bytes::from_static(b"peer")];
        let frames = s.encode(
            &id,
            "kernel_info_reply",
            Some(&parent),
            &json!({"status": "ok"}),
        );
        assert_eq!(frames.get(4), Some(&parent));
        let m = decode(frames.clone(), &key).expect("our own message verifies");
        assert_eq!(m.msg_type, "kernel_info_reply");
        assert_eq!(m.identities, id.to_vec());
        let header: Value = serde_json::from_slice(&m.header_bytes).expect("a JSON header");
        assert_eq!(header["version"], PROTOCOL_VERSION);
        assert_eq!(header["session"], s.id.as_str());
        assert_eq!(header["username"], "headroom");
        let date = header["date"].as_str().expect("a date");
        assert_eq!(date.len(), "2023-11-14T22:13:20.123456Z".len(), "{date}");
        // Every message has its own id.
        let again = decode(s.encode(&id, "status", None, &json!({})), &key).expect("verifies");
        let again: Value = serde_json::from_slice(&again.header_bytes).expect("a JSON header");
        assert_ne!(again["msg_id"], header["msg_id"]);
        // A different key must not verify.
        let other = Some(hmac::Key::new(hmac::HMAC_SHA256, b"other"));
        assert!(decode(frames, &other).is_err());
    }

    #[test]
    fn null_objects_become_empty_objects() {
        let reply = jupyter_protocol::ExecuteReply::default();
        let v = content(&reply, &["user_expressions"]);
        assert_eq!(v["user_expressions"], json!({}));
        assert_eq!(v["status"], "ok");
    }
}
