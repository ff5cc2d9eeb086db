//! Temporary folders for the library's tests.

use std::path::PathBuf;

/// A fresh, empty folder for one test: `stagna-{module}-{pid}-{name}` under the system's
/// temporary folder (whatever an earlier run left there is removed first).
pub(crate) fn fresh(module: &str, name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("stagna-{module}-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("a temporary folder");
    d
}
