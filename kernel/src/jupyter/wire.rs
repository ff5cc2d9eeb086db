//! Wire format of the Jupyter messaging protocol: connection files, multipart frames,
//! HMAC-SHA256 signatures.

use bytes::Bytes;
use hmac::{Hmac, Mac};
use serde_json::{Value, json};
use sha2::Sha256;
use zeromq::ZmqMessage;

const DELIMITER: &[u8] = b"<IDS|MSG>";

/// A connection file.
#[derive(Debug, Clone)]
pub struct Connection {
    /// "tcp".
    pub transport: String,
    /// Address to bind.
    pub ip: String,
    /// Ports.
    pub shell_port: u16,
    /// Ports.
    pub iopub_port: u16,
    /// Ports.
    pub stdin_port: u16,
    /// Ports.
    pub control_port: u16,
    /// Ports.
    pub hb_port: u16,
    /// Signing key (empty: messages are not signed).
    pub key: Vec<u8>,
    /// Signatures of the messages already accepted, shared by every channel: a signed
    /// message sent a second time is a replay and is dropped, as Jupyter's own client
    /// library does with its digest history.
    seen: std::sync::Arc<std::sync::Mutex<Seen>>,
}

/// The most recent accepted signatures (oldest forgotten first past [`SEEN_LIMIT`]).
#[derive(Debug, Default)]
struct Seen {
    set: std::collections::HashSet<Vec<u8>>,
    order: std::collections::VecDeque<Vec<u8>>,
}

/// How many signatures are remembered (jupyter_client keeps 2¹⁶ too).
const SEEN_LIMIT: usize = 1 << 16;

impl Connection {
    /// Reads a connection file's JSON.
    pub fn parse(text: &str) -> Result<Self, String> {
        let v: Value = serde_json::from_str(text).map_err(|e| format!("connection file: {e}"))?;
        let port = |k: &str| -> Result<u16, String> {
            v[k].as_u64()
                .and_then(|p| u16::try_from(p).ok())
                .ok_or_else(|| format!("connection file: '{k}' must be a port number"))
        };
        let scheme = v["signature_scheme"].as_str().unwrap_or("hmac-sha256");
        let key = v["key"].as_str().unwrap_or("").as_bytes().to_vec();
        if !key.is_empty() && scheme != "hmac-sha256" {
            return Err(format!("connection file: signature scheme '{scheme}' is not supported (hmac-sha256 is)"));
        }
        Ok(Connection {
            transport: v["transport"].as_str().unwrap_or("tcp").to_string(),
            ip: v["ip"].as_str().unwrap_or("127.0.0.1").to_string(),
            shell_port: port("shell_port")?,
            iopub_port: port("iopub_port")?,
            stdin_port: port("stdin_port")?,
            control_port: port("control_port")?,
            hb_port: port("hb_port")?,
            key,
            seen: Default::default(),
        })
    }

    /// The hex HMAC-SHA256 of the four JSON parts ("" without a key).
    pub fn sign(&self, parts: &[&[u8]]) -> String {
        if self.key.is_empty() {
            return String::new();
        }
        let Ok(mut mac) = Hmac::<Sha256>::new_from_slice(&self.key) else { return String::new() };
        for p in parts {
            mac.update(p);
        }
        hex::encode(mac.finalize().into_bytes())
    }

    /// Records a verified signature; `false` when it was seen before (a replay).
    fn first_time(&self, sig: &[u8]) -> bool {
        if self.key.is_empty() {
            return true;
        }
        let mut seen = match self.seen.lock() {
            Ok(g) => g,
            Err(e) => e.into_inner(),
        };
        if !seen.set.insert(sig.to_vec()) {
            return false;
        }
        seen.order.push_back(sig.to_vec());
        if seen.order.len() > SEEN_LIMIT
            && let Some(old) = seen.order.pop_front()
        {
            seen.set.remove(&old);
        }
        true
    }

    /// Checks a hex signature in constant time.
    fn verify(&self, sig: &[u8], parts: &[&[u8]]) -> bool {
        if self.key.is_empty() {
            return true;
        }
        let Ok(sig) = hex::decode(sig) else { return false };
        let Ok(mut mac) = Hmac::<Sha256>::new_from_slice(&self.key) else { return false };
        for p in parts {
            mac.update(p);
        }
        mac.verify_slice(&sig).is_ok()
    }
}

/// A fresh message or session id (random hex).
pub fn new_id() -> String {
    use sha2::Digest;
    use std::sync::atomic::{AtomicU64, Ordering};
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let t = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap_or_default().as_nanos();
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let digest = Sha256::digest(format!("{t}:{}:{n}", std::process::id()).as_bytes());
    let s = hex::encode(&digest[..16]);
    format!("{}-{}-{}-{}-{}", &s[..8], &s[8..12], &s[12..16], &s[16..20], &s[20..])
}

fn now_iso() -> String {
    // RFC 3339 UTC from the system clock (days-from-civil, H. Hinnant's algorithm).
    let d = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap_or_default();
    let secs = d.as_secs() as i64;
    let (days, rem) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = if month <= 2 { y + 1 } else { y };
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}.{:06}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60,
        d.subsec_micros()
    )
}

/// A parsed or outgoing message.
#[derive(Debug, Clone)]
pub struct Message {
    /// Routing identities.
    pub ids: Vec<Bytes>,
    /// Header.
    pub header: Value,
    /// Parent header.
    pub parent: Value,
    /// Metadata.
    pub metadata: Value,
    /// Content.
    pub content: Value,
}

impl Message {
    /// A new message of `msg_type` with the given parent header.
    pub fn new(session: &str, msg_type: &str, parent: Value, content: Value) -> Self {
        let header = json!({
            "msg_id": new_id(),
            "session": session,
            "username": "stagna",
            "date": now_iso(),
            "msg_type": msg_type,
            "version": super::PROTOCOL_VERSION,
        });
        Message { ids: vec![], header, parent, metadata: json!({}), content }
    }

    /// The reply to a request header (`x_request` → `x_reply`).
    pub fn reply(session: &str, request: &Value, content: Value) -> Self {
        let t = request["msg_type"].as_str().unwrap_or("unknown_request");
        let reply_type =
            t.strip_suffix("_request").map(|b| format!("{b}_reply")).unwrap_or_else(|| format!("{t}_reply"));
        Self::new(session, &reply_type, request.clone(), content)
    }

    /// The message type.
    pub fn msg_type(&self) -> &str {
        self.header["msg_type"].as_str().unwrap_or("")
    }

    /// Frames: ids, delimiter, signature, header, parent, metadata, content.
    pub fn encode(&self, conn: &Connection, ids: Vec<Bytes>) -> ZmqMessage {
        let parts: Vec<Vec<u8>> = [&self.header, &self.parent, &self.metadata, &self.content]
            .iter()
            .map(|v| v.to_string().into_bytes())
            .collect();
        let refs: Vec<&[u8]> = parts.iter().map(Vec::as_slice).collect();
        let sig = conn.sign(&refs);
        let mut frames: Vec<Bytes> = ids;
        frames.push(Bytes::from_static(DELIMITER));
        frames.push(Bytes::from(sig));
        frames.extend(parts.into_iter().map(Bytes::from));
        ZmqMessage::try_from(frames).unwrap_or_else(|_| ZmqMessage::from(Bytes::from_static(DELIMITER)))
    }
}

/// What came in.
pub enum Parsed {
    /// A signed, well-formed message.
    Ok(Message),
    /// Missing or wrong signature: drop it.
    BadSignature,
    /// A correctly signed message that was already received once: drop it.
    Replayed,
    /// Signed but not a valid message: reply with an error when the header could be read.
    Malformed {
        /// Routing ids.
        ids: Vec<Bytes>,
        /// The header, if it parsed.
        header: Option<Value>,
        /// What is wrong.
        reason: String,
    },
}

/// Splits, verifies and parses an incoming multipart message.
pub fn parse(conn: &Connection, raw: ZmqMessage) -> Parsed {
    parse_inner(conn, raw, true)
}

/// Parses and verifies a message without recording its signature (for looking ahead at
/// queued requests that will be parsed again when their turn comes).
pub fn peek(conn: &Connection, raw: ZmqMessage) -> Parsed {
    parse_inner(conn, raw, false)
}

fn parse_inner(conn: &Connection, raw: ZmqMessage, record: bool) -> Parsed {
    let frames = raw.into_vec();
    let Some(d) = frames.iter().position(|f| f.as_ref() == DELIMITER) else {
        return Parsed::Malformed { ids: frames, header: None, reason: "no <IDS|MSG> delimiter".into() };
    };
    let ids = frames[..d].to_vec();
    let rest = &frames[d + 1..];
    if rest.len() < 5 {
        return Parsed::BadSignature;
    }
    let parts: Vec<&[u8]> = rest[1..5].iter().map(|b| b.as_ref()).collect();
    if !conn.verify(rest[0].as_ref(), &parts) {
        return Parsed::BadSignature;
    }
    if record && !conn.first_time(rest[0].as_ref()) {
        return Parsed::Replayed;
    }
    let json = |b: &[u8]| serde_json::from_slice::<Value>(b);
    let header = match json(parts[0]) {
        Ok(h) if h.is_object() && h["msg_type"].is_string() => h,
        Ok(_) => return Parsed::Malformed { ids, header: None, reason: "header without msg_type".into() },
        Err(e) => return Parsed::Malformed { ids, header: None, reason: format!("header is not JSON: {e}") },
    };
    let (parent, metadata, content) = match (json(parts[1]), json(parts[2]), json(parts[3])) {
        (Ok(p), Ok(m), Ok(c)) if c.is_object() => (p, m, c),
        _ => {
            return Parsed::Malformed {
                ids,
                header: Some(header),
                reason: "parent, metadata or content is not a JSON object".into(),
            };
        }
    };
    Parsed::Ok(Message { ids, header, parent, metadata, content })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn conn(key: &str) -> Connection {
        Connection::parse(&format!(
            r#"{{"transport":"tcp","ip":"127.0.0.1","shell_port":1,"iopub_port":2,"stdin_port":3,"control_port":4,"hb_port":5,"key":"{key}","signature_scheme":"hmac-sha256"}}"#
        ))
        .unwrap()
    }

    #[test]
    fn hmac_sha256_matches_rfc_4231_case_2() {
        // RFC 4231 §4.3: key "Jefe", data "what do ya want for nothing?"
        let c = conn("Jefe");
        assert_eq!(
            c.sign(&[b"what do ya want ", b"for nothing?"]),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
    }

    #[test]
    fn signed_messages_round_trip_and_forgeries_are_dropped() {
        let c = conn("secret");
        let m = Message::new("s", "execute_request", json!({}), json!({"code": "1 + 1"}));
        let raw = m.encode(&c, vec![Bytes::from_static(b"client")]);
        match parse(&c, raw.clone()) {
            Parsed::Ok(p) => {
                assert_eq!(p.msg_type(), "execute_request");
                assert_eq!(p.ids.len(), 1);
            }
            _ => panic!("own message must parse"),
        }
        let mut frames = raw.into_vec();
        frames[2] = Bytes::from_static(b"00");
        assert!(matches!(parse(&c, ZmqMessage::try_from(frames).unwrap()), Parsed::BadSignature));
        let other = conn("other");
        let raw = m.encode(&other, vec![]);
        assert!(matches!(parse(&c, raw), Parsed::BadSignature));
    }

    fn fuzz_cases() -> u32 {
        std::env::var("STAGNA_FUZZ_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(2_000)
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig { cases: fuzz_cases(), failure_persistence: None, ..Default::default() })]

        /// Fuzz target: any frames, signed with the right key or not, decode to a
        /// message, a refusal or a malformed-request reply; never a panic.
        #[test]
        fn fuzz_message_decoding(
            frames in proptest::collection::vec(proptest::collection::vec(proptest::prelude::any::<u8>(), 0..64), 0..9),
            json in proptest::collection::vec("[{}\\[\\]\":,a-z0-9 ]{0,40}", 4),
            sign in proptest::prelude::any::<bool>(),
        ) {
            let c = conn("k");
            let _ = parse(&c, ZmqMessage::try_from(frames.iter().cloned().map(Bytes::from).collect::<Vec<_>>()).unwrap_or_else(|_| ZmqMessage::from(Bytes::new())));
            let parts: Vec<&[u8]> = json.iter().map(|s| s.as_bytes()).collect();
            let sig = if sign { c.sign(&parts) } else { "00".into() };
            let mut f = vec![Bytes::from_static(b"id"), Bytes::from_static(DELIMITER), Bytes::from(sig)];
            f.extend(json.iter().map(|s| Bytes::from(s.clone())));
            let _ = parse(&c, ZmqMessage::try_from(f).unwrap());
        }
    }

    #[test]
    fn a_replayed_signed_message_is_dropped() {
        // Regression (issue 16): a signed execute request sent twice ran twice.
        let c = conn("secret");
        let m = Message::new("s", "execute_request", json!({}), json!({"code": "1 + 1"}));
        let raw = m.encode(&c, vec![]);
        assert!(matches!(peek(&c, raw.clone()), Parsed::Ok(_)), "a look ahead does not record");
        assert!(matches!(parse(&c, raw.clone()), Parsed::Ok(_)));
        assert!(matches!(parse(&c, raw.clone()), Parsed::Replayed));
        assert!(c.clone().first_time(b"other"), "a new signature is accepted");
        assert!(matches!(parse(&c.clone(), raw), Parsed::Replayed), "clones share one history");
        let unsigned = conn("");
        let raw = m.encode(&unsigned, vec![]);
        assert!(matches!(parse(&unsigned, raw.clone()), Parsed::Ok(_)));
        assert!(matches!(parse(&unsigned, raw), Parsed::Ok(_)), "without a key there is no signature to track");
    }

    #[test]
    fn signed_garbage_is_malformed_not_silence() {
        let c = conn("k");
        let parts: [&[u8]; 4] = [br#"{"msg_type":"execute_request","msg_id":"1"}"#, b"{}", b"{}", b"not json"];
        let sig = c.sign(&parts);
        let mut frames = vec![Bytes::from_static(DELIMITER), Bytes::from(sig)];
        frames.extend(parts.iter().map(|p| Bytes::copy_from_slice(p)));
        match parse(&c, ZmqMessage::try_from(frames).unwrap()) {
            Parsed::Malformed { header: Some(h), .. } => assert_eq!(h["msg_type"], "execute_request"),
            _ => panic!("expected malformed with header"),
        }
    }

    #[test]
    fn dates_are_rfc3339() {
        let d = now_iso();
        assert_eq!(d.len(), 27);
        assert!(d.starts_with("20") && d.ends_with('Z') && &d[10..11] == "T");
    }
}
