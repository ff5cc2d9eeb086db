//! Taps on the bytes CSV scans read, for a caller that wants a file's content hash without
//! reading the file a second time.
//!
//! The batch runner records an XXH3 hash of every input in its run manifest. For a large
//! CSV input it read the file again on a thread of its own while the script ran; on the
//! 10 M-reading bench CSV (546 MiB, 2 cores) that second read's copy from the page cache
//! was 5–14 % of the run's CPU in `perf` (2026-12-04). A [`ReadTap`] registered for a file
//! with [`tap_reads`] is shown what every CSV scan of that file reads while the returned
//! guard lives: the lines up to the end of the header first, then each run of lines, in
//! file order. The runner hashes those bytes as they are read, and reads the file again
//! only when the scans did not cover it from its first byte to its last.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, MutexGuard, PoisonError};

/// Sees the bytes scans read from one file.
pub trait ReadTap: Send + Sync {
    /// `bytes` were read from the file at `offset`.
    fn read(&self, offset: u64, bytes: &[u8]);
}

struct Entry {
    id: u64,
    path: PathBuf,
    tap: Arc<dyn ReadTap>,
}

static TAPS: Mutex<Vec<Entry>> = Mutex::new(Vec::new());
static NEXT_ID: AtomicU64 = AtomicU64::new(0);

fn taps() -> MutexGuard<'static, Vec<Entry>> {
    // A panic while the list was held leaves whole entries: still usable.
    TAPS.lock().unwrap_or_else(PoisonError::into_inner)
}

/// Keeps a tap registered; dropping it removes the tap.
#[must_use = "the tap is removed when the guard is dropped"]
pub struct TapGuard {
    id: u64,
}

impl Drop for TapGuard {
    fn drop(&mut self) {
        taps().retain(|e| e.id != self.id);
    }
}

/// Shows `tap` what CSV scans of the file at `path` (however it is named: the path is
/// resolved) read, until the guard is dropped. Fails when the path cannot be resolved.
pub fn tap_reads(path: &Path, tap: Arc<dyn ReadTap>) -> std::io::Result<TapGuard> {
    let path = std::fs::canonicalize(path)?;
    let id = NEXT_ID.fetch_add(1, Ordering::Relaxed);
    taps().push(Entry { id, path, tap });
    Ok(TapGuard { id })
}

/// The tap registered for the file at `path`, if any (the first registered when several).
pub(crate) fn tap_for(path: &Path) -> Option<Arc<dyn ReadTap>> {
    let list = taps();
    if list.is_empty() {
        return None; // the usual case: no path to resolve
    }
    let path = std::fs::canonicalize(path).ok()?;
    list.iter().find(|e| e.path == path).map(|e| e.tap.clone())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::scan::TableScan;

    /// Keeps what it is shown.
    #[derive(Default)]
    struct Copy(Mutex<Vec<(u64, Vec<u8>)>>);

    impl ReadTap for Copy {
        fn read(&self, offset: u64, bytes: &[u8]) {
            self.0.lock().unwrap().push((offset, bytes.to_vec()));
        }
    }

    fn tmp(name: &str) -> PathBuf {
        crate::testdir::fresh("tap", name)
    }

    #[test]
    fn a_tap_sees_every_byte_a_csv_scan_reads_in_file_order() {
        let d = tmp("order");
        // A comment line before the header, runs of several MiB, a last line without an end.
        let mut text = String::from("# site: Gorse Hollow test rig\nk,h,t\n");
        for i in 0..400_000 {
            text.push_str(&format!("{},{}.{},{}\n", i / 20, i % 97, i % 7, 15 + i % 5));
        }
        text.push_str("20000,1.5,16");
        let (f, other) = (d.join("r.csv"), d.join("other.csv"));
        std::fs::write(&f, &text).unwrap();
        std::fs::write(&other, "k,h\n1,2\n").unwrap();
        let (tap, elsewhere) = (Arc::new(Copy::default()), Arc::new(Copy::default()));
        // Registered under another spelling of the same path.
        let guard = tap_reads(&d.join(".").join("r.csv"), tap.clone()).unwrap();
        let _g2 = tap_reads(&other, elsewhere.clone()).unwrap();
        let scan = TableScan::open(&f).unwrap();
        let mut rows = 0;
        for b in scan.batches(&["h".into()], 1 << 16).unwrap() {
            rows += b.unwrap().0.height();
        }
        assert_eq!(rows, 400_001);
        let seen = std::mem::take(&mut *tap.0.lock().unwrap());
        assert!(seen.len() > 3, "the header and several runs: {}", seen.len());
        let mut at = 0;
        let mut all = Vec::new();
        for (offset, bytes) in &seen {
            assert_eq!(*offset, at, "in file order, nothing skipped or read twice");
            at += bytes.len() as u64;
            all.extend_from_slice(bytes);
        }
        assert!(all == text.as_bytes(), "every byte of the file");
        assert!(elsewhere.0.lock().unwrap().is_empty(), "a tap sees its own file only");
        // Once the guard is dropped, scans show the tap nothing.
        drop(guard);
        for b in TableScan::open(&f).unwrap().batches(&["h".into()], 1 << 16).unwrap() {
            b.unwrap();
        }
        assert!(tap.0.lock().unwrap().is_empty());
        assert!(tap_reads(&d.join("none.csv"), tap).is_err(), "a path that does not resolve");
    }
}
