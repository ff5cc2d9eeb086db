//! The iopub channel: a ZeroMQ PUB socket of our own over tokio TCP (ZMTP 3.0, NULL
//! mechanism).
//!
//! The `zeromq` crate's PUB socket flushes a subscriber's queue only while a later
//! message is being sent, with a waker that never fires: a message larger than the
//! TCP send buffer (a 50 MB cell echoed in `execute_input`, a 16 MB result) stays
//! half-written until the next send, and that next send is dropped as "queue full" —
//! outputs and the closing `idle` status were lost or arrived a minute late. Here every
//! subscriber has its own writer task that writes each message to the end, in order;
//! a subscriber that stops reading is cut off once [`MAX_QUEUED_BYTES`] are waiting for
//! it (as a ZeroMQ high-water mark would), with a line on standard error.
//!
//! # Protocol
//! ZMTP 3.0 (rfc.zeromq.org/spec/23): a 64-byte greeting (0xFF, 8 padding bytes,
//! 0x7F, version 3.0, mechanism "NULL", as-server, filler), a READY command carrying
//! `Socket-Type = PUB`, then frames: a flags byte (0x01 more, 0x02 long size,
//! 0x04 command), a 1-byte or 8-byte big-endian size, the body. A SUB peer subscribes
//! with a message whose first byte is 1 followed by the topic prefix (0 unsubscribes);
//! the SUBSCRIBE / CANCEL commands of ZMTP 3.1 are understood too. Messages go to the
//! subscribers whose prefix matches the first frame.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};

use bytes::{BufMut, Bytes, BytesMut};
use tokio::io::{AsyncReadExt, AsyncWriteExt};
use tokio::net::{TcpListener, TcpStream};
use tokio::sync::mpsc;

/// Bytes that may wait for one subscriber before it is cut off.
pub const MAX_QUEUED_BYTES: usize = 512 * 1024 * 1024;

struct Subscriber {
    queue: mpsc::UnboundedSender<Bytes>,
    queued: Arc<AtomicUsize>,
    topics: Arc<Mutex<Vec<Vec<u8>>>>,
}

/// A bound PUB socket.
#[derive(Clone)]
pub struct Publisher {
    subscribers: Arc<Mutex<Vec<Subscriber>>>,
}

impl Publisher {
    /// Binds `ip:port` and accepts subscribers in the background.
    pub async fn bind(ip: &str, port: u16) -> std::io::Result<Self> {
        let listener = TcpListener::bind((ip, port)).await?;
        let publisher = Publisher { subscribers: Arc::new(Mutex::new(Vec::new())) };
        let p = publisher.clone();
        tokio::spawn(async move {
            loop {
                match listener.accept().await {
                    Ok((stream, _)) => {
                        let p = p.clone();
                        tokio::spawn(async move {
                            if let Err(e) = p.serve(stream).await {
                                super::log(&format!("iopub subscriber: {e}"));
                            }
                        });
                    }
                    Err(e) => {
                        super::log(&format!("iopub accept failed: {e}"));
                        tokio::time::sleep(std::time::Duration::from_millis(50)).await;
                    }
                }
            }
        });
        Ok(publisher)
    }

    /// Publishes one multipart message to every subscriber whose subscription is a
    /// prefix of the first frame. Never blocks; the writers deliver in order.
    pub fn send(&self, frames: &[Bytes]) {
        let Some(topic) = frames.first() else { return };
        let wire = encode_message(frames);
        let mut subs = match self.subscribers.lock() {
            Ok(g) => g,
            Err(e) => e.into_inner(),
        };
        subs.retain(|s| {
            let wanted = s.topics.lock().map(|t| t.iter().any(|p| topic.starts_with(p))).unwrap_or(false);
            if !wanted {
                return !s.queue.is_closed();
            }
            if s.queued.load(Ordering::Relaxed) + wire.len() > MAX_QUEUED_BYTES {
                super::log("iopub: a subscriber stopped reading (over 512 MiB waiting); it is disconnected");
                return false;
            }
            s.queued.fetch_add(wire.len(), Ordering::Relaxed);
            s.queue.send(wire.clone()).is_ok()
        });
    }

    async fn serve(&self, stream: TcpStream) -> std::io::Result<()> {
        stream.set_nodelay(true)?;
        let (mut rd, mut wr) = stream.into_split();
        wr.write_all(&greeting()).await?;
        let mut peer = [0u8; 64];
        rd.read_exact(&mut peer).await?;
        if peer[0] != 0xFF || peer[9] != 0x7F || peer[10] < 3 {
            return Err(std::io::Error::other("not a ZMTP 3 peer"));
        }
        if &peer[12..16] != b"NULL" {
            return Err(std::io::Error::other("only the NULL security mechanism is supported"));
        }
        wr.write_all(&ready_command()).await?;
        // The peer's READY (its socket type); nothing in it changes what we send.
        let (flags, _) = read_frame(&mut rd).await?;
        if flags & 0x04 == 0 {
            return Err(std::io::Error::other("expected the peer's READY command"));
        }
        let (tx, mut rx) = mpsc::unbounded_channel::<Bytes>();
        let queued = Arc::new(AtomicUsize::new(0));
        let topics = Arc::new(Mutex::new(Vec::new()));
        if let Ok(mut subs) = self.subscribers.lock() {
            subs.push(Subscriber { queue: tx, queued: queued.clone(), topics: topics.clone() });
        }
        let writer = tokio::spawn(async move {
            while let Some(b) = rx.recv().await {
                let n = b.len();
                if wr.write_all(&b).await.is_err() {
                    break;
                }
                queued.fetch_sub(n, Ordering::Relaxed);
            }
        });
        // Subscriptions until the peer goes away.
        let result = loop {
            match read_frame(&mut rd).await {
                Ok((flags, body)) => subscription(flags, &body, &topics),
                Err(e) if e.kind() == std::io::ErrorKind::UnexpectedEof => break Ok(()),
                Err(e) => break Err(e),
            }
        };
        writer.abort();
        result
    }
}

/// Applies a subscribe / unsubscribe frame (ZMTP 3.0 message form or 3.1 command).
fn subscription(flags: u8, body: &[u8], topics: &Mutex<Vec<Vec<u8>>>) {
    let (subscribe, topic) = if flags & 0x04 != 0 {
        match body.split_first() {
            Some((&n, rest)) if rest.len() >= n as usize => match &rest[..n as usize] {
                b"SUBSCRIBE" => (true, &rest[n as usize..]),
                b"CANCEL" => (false, &rest[n as usize..]),
                _ => return,
            },
            _ => return,
        }
    } else {
        match body.split_first() {
            Some((1, t)) => (true, t),
            Some((0, t)) => (false, t),
            _ => return,
        }
    };
    if let Ok(mut t) = topics.lock() {
        if subscribe {
            t.push(topic.to_vec());
        } else if let Some(i) = t.iter().position(|x| x == topic) {
            t.remove(i);
        }
    }
}

fn greeting() -> [u8; 64] {
    let mut g = [0u8; 64];
    g[0] = 0xFF;
    g[9] = 0x7F;
    g[10] = 3;
    g[11] = 0;
    g[12..16].copy_from_slice(b"NULL");
    g
}

fn ready_command() -> Bytes {
    let mut body = BytesMut::new();
    body.put_u8(5);
    body.put_slice(b"READY");
    body.put_u8(11);
    body.put_slice(b"Socket-Type");
    body.put_u32(3);
    body.put_slice(b"PUB");
    let mut out = BytesMut::new();
    frame(&mut out, 0x04, &body);
    out.freeze()
}

fn frame(out: &mut BytesMut, flags: u8, body: &[u8]) {
    if body.len() > 255 {
        out.put_u8(flags | 0x02);
        out.put_u64(body.len() as u64);
    } else {
        out.put_u8(flags);
        out.put_u8(body.len() as u8);
    }
    out.put_slice(body);
}

/// A multipart message on the wire: each frame with the MORE flag but the last.
fn encode_message(frames: &[Bytes]) -> Bytes {
    let size: usize = frames.iter().map(|f| f.len() + 9).sum();
    let mut out = BytesMut::with_capacity(size);
    for (i, f) in frames.iter().enumerate() {
        frame(&mut out, if i + 1 < frames.len() { 0x01 } else { 0x00 }, f);
    }
    out.freeze()
}

/// Frames from a subscriber are small (subscriptions); anything larger is refused.
const MAX_INCOMING_FRAME: u64 = 1 << 20;

async fn read_frame(rd: &mut tokio::net::tcp::OwnedReadHalf) -> std::io::Result<(u8, Vec<u8>)> {
    let flags = rd.read_u8().await?;
    let size = if flags & 0x02 != 0 { rd.read_u64().await? } else { u64::from(rd.read_u8().await?) };
    if size > MAX_INCOMING_FRAME {
        return Err(std::io::Error::other(format!("a {size}-byte frame from a subscriber")));
    }
    let mut body = vec![0u8; size as usize];
    rd.read_exact(&mut body).await?;
    Ok((flags, body))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn frames_follow_zmtp_3_0() {
        // Short frame: flags, 1-byte size; long frame: flags | 0x02, 8-byte big-endian size
        // (rfc.zeromq.org/spec/23, "Framing").
        let m = encode_message(&[Bytes::from_static(b"ab"), Bytes::from(vec![7u8; 300])]);
        assert_eq!(&m[..4], &[0x01, 2, b'a', b'b']);
        assert_eq!(m[4], 0x02);
        assert_eq!(u64::from_be_bytes(m[5..13].try_into().unwrap()), 300);
        assert_eq!(m.len(), 4 + 9 + 300);
        let r = ready_command();
        // Body: 1 + 5 ("READY") + 1 + 11 ("Socket-Type") + 4 + 3 ("PUB") = 25 bytes.
        assert_eq!(&r[..2], &[0x04, 25]);
        assert_eq!(&r[2..8], b"\x05READY");
        let g = greeting();
        assert_eq!((g[0], g[9], g[10], &g[12..16]), (0xFF, 0x7F, 3, &b"NULL"[..]));
    }

    #[test]
    fn subscriptions_in_both_forms() {
        let t = Mutex::new(Vec::new());
        subscription(0x00, b"\x01kernel.", &t);
        subscription(0x04, b"\x09SUBSCRIBEab", &t);
        assert_eq!(*t.lock().unwrap(), vec![b"kernel.".to_vec(), b"ab".to_vec()]);
        subscription(0x00, b"\x00kernel.", &t);
        subscription(0x04, b"\x06CANCELab", &t);
        assert!(t.lock().unwrap().is_empty());
    }
}
