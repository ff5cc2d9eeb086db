//! Shards and run manifests for `stagna run`: a deterministic share of the inputs for
//! one task of an existing scheduler's array (Slurm job arrays, Kubernetes indexed Jobs),
//! and a manifest per shard in the output folder that `--resume` reads to skip inputs
//! already done.
//!
//! An input belongs to shard ⌊SHA-256(its path relative to the inputs' common folder)⌋ mod
//! N: the same on every machine, independent of the order the inputs are listed in, and an
//! input added later does not move the others. Every shard sees the whole input list, so
//! the output folders are those of one unsharded run.
//!
//! The manifest (`OUT/.stagna/manifest-shard-K-of-N.json`, one per shard so that concurrent
//! shards never write the same file) records the Stagna version, the script's SHA-256, and
//! per input its size, XXH3-128 content hash, output folder and status: `running` when started, then
//! `done` or `failed` with the message. It is rewritten through a temporary file and a
//! rename at most once a second and at the end, so an interrupted shard leaves a whole
//! manifest whose `pending` and `running` entries name the inputs to redo.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

/// Which share of the inputs a task runs: shard `index` (0-based) of `count`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// 0 … count − 1.
    pub index: usize,
    /// Number of shards.
    pub count: usize,
}

/// The environment variables a shard index is read from with `--shard auto/N`, in order:
/// Slurm job arrays (offset by the array's first index when Slurm gives it) and Kubernetes
/// indexed Jobs.
pub const INDEX_VARIABLES: [&str; 2] = ["SLURM_ARRAY_TASK_ID", "JOB_COMPLETION_INDEX"];

impl Shard {
    /// Parses `K/N` (K from 0) or `auto/N` (K from the scheduler's environment).
    pub fn parse(spec: &str, env: impl Fn(&str) -> Option<String>) -> Result<Self, String> {
        let bad = |why: &str| {
            format!(
                "--shard {spec}: {why}; write K/N with 0 ≤ K < N (e.g. 0/4), or auto/N inside a Slurm array or a Kubernetes indexed Job"
            )
        };
        let (k, n) = spec.split_once('/').ok_or_else(|| bad("no '/'"))?;
        let count: usize = n.trim().parse().map_err(|_| bad("N is not a whole number"))?;
        if count == 0 {
            return Err(bad("N must be at least 1"));
        }
        let index: usize = if k.trim() == "auto" {
            let (var, raw) = INDEX_VARIABLES
                .iter()
                .find_map(|v| env(v).map(|x| (*v, x)))
                .ok_or_else(|| bad(&format!("auto needs one of {} set", INDEX_VARIABLES.join(" or "))))?;
            let id: usize = raw.trim().parse().map_err(|_| bad(&format!("{var} = '{raw}' is not a whole number")))?;
            let first = if var == "SLURM_ARRAY_TASK_ID" {
                env("SLURM_ARRAY_TASK_MIN").and_then(|m| m.trim().parse().ok()).unwrap_or(0)
            } else {
                0
            };
            id.checked_sub(first)
                .ok_or_else(|| bad(&format!("{var} = {id} is below SLURM_ARRAY_TASK_MIN = {first}")))?
        } else {
            k.trim().parse().map_err(|_| bad("K is not a whole number or auto"))?
        };
        if index >= count {
            return Err(bad(&format!("K = {index} is out of range for N = {count}")));
        }
        Ok(Self { index, count })
    }

    /// Whether the input with this key (its path relative to the inputs' common folder)
    /// belongs to this shard.
    pub fn owns(&self, key: &str) -> bool {
        let h = Sha256::digest(key.as_bytes());
        let mut first = [0u8; 8];
        first.copy_from_slice(&h[..8]);
        (u64::from_be_bytes(first) % self.count as u64) as usize == self.index
    }
}

/// One input in a manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Entry {
    /// Size in bytes when it was run.
    pub size: u64,
    /// XXH3-128 of its contents, hex: a change check, not a signature (it reads at many
    /// GB/s where SHA-256 read 1.7 GB/s, a third of a large CSV run's time on 2 cores).
    /// Empty until the input has run, and in manifests of earlier versions (whose inputs a
    /// `--resume` then runs again).
    #[serde(default)]
    pub xxh3_128: String,
    /// Its output folder.
    pub output: String,
    /// `running`, `done` or `failed`.
    pub status: String,
    /// The failure's message, if any.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub error: Option<String>,
}

/// A shard's manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// `stagna-run-manifest`.
    pub format: String,
    /// Stagna's version.
    pub stagna: String,
    /// SHA-256 of the script, hex.
    pub script_sha256: String,
    /// The shard, `K/N`.
    pub shard: String,
    /// Inputs by key (path relative to the inputs' common folder).
    pub inputs: BTreeMap<String, Entry>,
}

/// Size and XXH3-128 of a file's contents, hex (a small file read whole, a large one a
/// MiB at a time).
pub fn file_hash(path: &Path) -> std::io::Result<(u64, String)> {
    use std::io::Read;
    let mut f = std::fs::File::open(path)?;
    if f.metadata()?.len() <= 8 << 20 {
        let mut bytes = Vec::new();
        f.read_to_end(&mut bytes)?;
        return Ok((bytes.len() as u64, format!("{:032x}", xxhash_rust::xxh3::xxh3_128(&bytes))));
    }
    let mut h = xxhash_rust::xxh3::Xxh3Default::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut size = 0u64;
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            break;
        }
        size += n as u64;
        h.update(&buf[..n]);
    }
    Ok((size, format!("{:032x}", h.digest128())))
}

/// An input's size and XXH3-128 built from the bytes the script's CSV scans read (see
/// `stagna::io::tap`), so that a large CSV input is not read a second time for the
/// manifest.
pub struct ContentTap {
    /// The file's size when the run began.
    size: u64,
    state: Mutex<TapState>,
}

struct TapState {
    /// The offset the next read must start at to continue the hash.
    next: u64,
    hasher: xxhash_rust::xxh3::Xxh3Default,
    /// A read out of order since the last start from the first byte.
    broken: bool,
}

impl ContentTap {
    /// A tap for a file of `size` bytes.
    pub fn new(size: u64) -> Self {
        Self { size, state: Mutex::new(TapState { next: 0, hasher: Default::default(), broken: false }) }
    }

    fn state(&self) -> std::sync::MutexGuard<'_, TapState> {
        self.state.lock().unwrap_or_else(std::sync::PoisonError::into_inner)
    }

    /// Size and hash as [`file_hash`] gives them, when reads covered the file from its
    /// first byte to its last in order and the file still has its first size; else `None`
    /// (the caller then reads the file).
    pub fn digest(&self, path: &Path) -> Option<(u64, String)> {
        let s = self.state();
        let whole = !s.broken && s.next == self.size && std::fs::metadata(path).is_ok_and(|m| m.len() == self.size);
        whole.then(|| (self.size, format!("{:032x}", s.hasher.digest128())))
    }
}

impl stagna::io::tap::ReadTap for ContentTap {
    fn read(&self, offset: u64, bytes: &[u8]) {
        let mut s = self.state();
        if s.next == self.size && !s.broken {
            return; // whole already: a later scan of the same file adds nothing
        }
        if offset == 0 {
            // A scan starting over (an earlier one stopped part way).
            s.hasher.reset();
            s.next = 0;
            s.broken = false;
        }
        if offset != s.next || s.next + bytes.len() as u64 > self.size {
            s.broken = true;
            return;
        }
        s.hasher.update(bytes);
        s.next += bytes.len() as u64;
    }
}

impl Manifest {
    /// A new manifest for a script and shard.
    pub fn new(script: &str, shard: Shard) -> Self {
        Self {
            format: "stagna-run-manifest".into(),
            stagna: env!("CARGO_PKG_VERSION").into(),
            script_sha256: hex::encode(Sha256::digest(script.as_bytes())),
            shard: format!("{}/{}", shard.index, shard.count),
            inputs: BTreeMap::new(),
        }
    }

    /// Where a shard's manifest lives.
    pub fn path(out: &Path, shard: Shard) -> PathBuf {
        out.join(".stagna").join(format!("manifest-shard-{}-of-{}.json", shard.index, shard.count))
    }

    /// Reads a manifest; a missing file is `None`, a malformed one an error naming it.
    pub fn read(path: &Path) -> Result<Option<Self>, String> {
        match std::fs::read_to_string(path) {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
            Err(e) => Err(format!("{}: cannot read the run manifest: {e}", path.display())),
            Ok(s) => serde_json::from_str(&s)
                .map(Some)
                .map_err(|e| format!("{}: not a run manifest ({e}); remove it to start afresh", path.display())),
        }
    }

    /// Writes it through a temporary file and a rename.
    pub fn write(&self, path: &Path) -> Result<(), String> {
        if let Some(dir) = path.parent() {
            std::fs::create_dir_all(dir).map_err(|e| format!("{}: cannot create: {e}", dir.display()))?;
        }
        let text = serde_json::to_string_pretty(self).map_err(|e| e.to_string())?;
        stagna::io::table::write_atomically(path, |f| std::io::Write::write_all(f, text.as_bytes()))
            .map_err(|e| format!("{}: the run manifest could not be written: {e}", path.display()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_parse_from_the_option_or_the_scheduler() {
        let none = |_: &str| None;
        assert_eq!(Shard::parse("1/4", none), Ok(Shard { index: 1, count: 4 }));
        for bad in ["4/4", "1", "x/4", "0/0", "-1/3"] {
            assert!(Shard::parse(bad, none).is_err(), "{bad}");
        }
        assert!(Shard::parse("4/4", none).unwrap_err().contains("out of range"));
        let slurm = |v: &str| match v {
            "SLURM_ARRAY_TASK_ID" => Some("3".to_string()),
            "SLURM_ARRAY_TASK_MIN" => Some("1".to_string()),
            _ => None,
        };
        assert_eq!(Shard::parse("auto/4", slurm), Ok(Shard { index: 2, count: 4 }));
        let k8s = |v: &str| (v == "JOB_COMPLETION_INDEX").then(|| "0".to_string());
        assert_eq!(Shard::parse("auto/2", k8s), Ok(Shard { index: 0, count: 2 }));
        assert!(Shard::parse("auto/2", none).unwrap_err().contains("SLURM_ARRAY_TASK_ID"));
    }

    #[test]
    fn a_content_tap_hashes_reads_that_cover_the_file_in_order_and_nothing_else() {
        use stagna::io::tap::ReadTap;
        let dir = std::env::temp_dir().join(format!("stagna-content-tap-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let f = dir.join("in.csv");
        let bytes: Vec<u8> = (0..3_000_000u32).map(|i| b"0123456789,.\n"[(i * 7 % 13) as usize]).collect();
        std::fs::write(&f, &bytes).unwrap();
        // The oracle: XXH3-128 of the whole file in one call (the crate's one-shot code,
        // not the streaming state the tap and `file_hash` use).
        let whole = (bytes.len() as u64, format!("{:032x}", xxhash_rust::xxh3::xxh3_128(&bytes)));
        assert_eq!(file_hash(&f).unwrap(), whole);
        let n = bytes.len() as u64;
        let feed = |tap: &ContentTap, cuts: &[usize]| {
            let mut at = 0;
            for &c in cuts.iter().chain([bytes.len()].iter()) {
                tap.read(at as u64, &bytes[at..c]);
                at = c;
            }
        };
        // In order, in uneven pieces (a header line, then runs).
        let tap = ContentTap::new(n);
        feed(&tap, &[37, 1 << 20, 2_500_001]);
        assert_eq!(tap.digest(&f), Some(whole.clone()));
        // A second scan of the same file changes nothing, even one that stops part way.
        tap.read(0, &bytes[..100]);
        assert_eq!(tap.digest(&f), Some(whole.clone()));
        // A scan that stopped part way and one that started over from the first byte.
        let tap = ContentTap::new(n);
        feed(&tap, &[37, 1 << 20]);
        tap.read(0, &bytes[..37]);
        tap.read(37, &bytes[37..]);
        assert_eq!(tap.digest(&f), Some(whole.clone()));
        // Not whole: part of the file, a gap, a range read twice, more than the file held.
        let part = ContentTap::new(n);
        part.read(0, &bytes[..1000]);
        assert_eq!(part.digest(&f), None);
        let gap = ContentTap::new(n);
        gap.read(0, &bytes[..1000]);
        gap.read(2000, &bytes[2000..]);
        assert_eq!(gap.digest(&f), None);
        let twice = ContentTap::new(n);
        twice.read(0, &bytes[..1000]);
        twice.read(500, &bytes[500..]);
        assert_eq!(twice.digest(&f), None);
        let grown = ContentTap::new(n - 10);
        grown.read(0, &bytes);
        assert_eq!(grown.digest(&f), None);
        // Read whole, but the file's size changed since: the caller reads it again.
        let tap = ContentTap::new(n);
        feed(&tap, &[]);
        std::fs::write(&f, &bytes[..1000]).unwrap();
        assert_eq!(tap.digest(&f), None);
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn every_input_belongs_to_exactly_one_shard() {
        let keys: Vec<String> = (0..200).map(|i| format!("site{}/run-{i}.csv", i % 7)).collect();
        for n in [1, 2, 3, 8] {
            let shards: Vec<Shard> = (0..n).map(|k| Shard { index: k, count: n }).collect();
            for k in &keys {
                assert_eq!(shards.iter().filter(|s| s.owns(k)).count(), 1, "{k}");
            }
            if n > 1 {
                // Roughly even: no shard is empty on 200 inputs.
                assert!(shards.iter().all(|s| keys.iter().any(|k| s.owns(k))));
            }
        }
    }
}
