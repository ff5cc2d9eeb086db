//! `stagna kernel install` / `uninstall`: the kernelspec (kernel.json and a logo of our
//! own design: a pitot tube's L-shaped head in a flow of dots) in the Jupyter data folder.

use std::path::{Path, PathBuf};

/// Where to install.
#[derive(Debug, Clone)]
pub enum Target {
    /// The user's Jupyter data folder (`JUPYTER_DATA_DIR`, else `~/.local/share/jupyter`).
    User,
    /// The active Python environment (`VIRTUAL_ENV`, `CONDA_PREFIX`, else `python3`'s `sys.prefix`).
    SysPrefix,
    /// `DIR/share/jupyter`.
    Prefix(PathBuf),
}

/// Kernel name.
pub const NAME: &str = "stagna";

fn data_dir(t: &Target) -> Result<PathBuf, String> {
    match t {
        Target::User => {
            if let Ok(d) = std::env::var("JUPYTER_DATA_DIR") {
                return Ok(PathBuf::from(d));
            }
            let home = std::env::var("HOME").map_err(|_| "HOME is not set; use --prefix DIR")?;
            if cfg!(target_os = "macos") {
                Ok(PathBuf::from(home).join("Library/Jupyter"))
            } else {
                Ok(PathBuf::from(home).join(".local/share/jupyter"))
            }
        }
        Target::SysPrefix => {
            let prefix = std::env::var("VIRTUAL_ENV").or_else(|_| std::env::var("CONDA_PREFIX")).or_else(|_| {
                std::process::Command::new("python3")
                    .args(["-c", "import sys; print(sys.prefix)"])
                    .output()
                    .map_err(|e| e.to_string())
                    .and_then(|o| String::from_utf8(o.stdout).map_err(|e| e.to_string()))
                    .map(|s| s.trim().to_string())
            })?;
            Ok(PathBuf::from(prefix).join("share/jupyter"))
        }
        Target::Prefix(d) => Ok(d.join("share/jupyter")),
    }
}

/// The kernelspec JSON for this executable.
pub fn kernel_json(exe: &Path) -> String {
    let v = serde_json::json!({
        "argv": [exe.display().to_string(), "kernel", "--connection-file", "{connection_file}"],
        "display_name": "Stagna (flow measurement)",
        "language": "rhai",
        "interrupt_mode": "message",
        "metadata": {"debugger": false},
    });
    serde_json::to_string_pretty(&v).unwrap_or_default()
}

/// The logo as PNG bytes.
pub fn logo_png(size: u32) -> stagna::Result<Vec<u8>> {
    use plotters::prelude::*;
    stagna::io::plot::png((size, size), |root| {
        let e = |m: String| stagna::Error::Inconsistent { context: "logo", message: m };
        let s = f64::from(size);
        root.fill(&RGBColor(18, 62, 110)).map_err(|x| e(x.to_string()))?;
        let p = |x: f64, y: f64| ((x * s) as i32, (y * s) as i32);
        let w = ((0.09 * s) as u32).max(2);
        let tube = ShapeStyle { color: RGBColor(240, 200, 80).to_rgba(), filled: true, stroke_width: w };
        root.draw(&PathElement::new(vec![p(0.68, 0.12), p(0.68, 0.66), p(0.22, 0.66)], tube))
            .map_err(|x| e(x.to_string()))?;
        let dot = ShapeStyle { color: RGBColor(170, 215, 255).to_rgba(), filled: true, stroke_width: 1 };
        for (x, y) in [
            (0.12, 0.36),
            (0.30, 0.36),
            (0.48, 0.36),
            (0.12, 0.84),
            (0.30, 0.84),
            (0.48, 0.84),
            (0.66, 0.84),
            (0.84, 0.84),
        ] {
            root.draw(&Circle::new(p(x, y), ((0.045 * s) as u32).max(1), dot)).map_err(|x| e(x.to_string()))?;
        }
        Ok(())
    })
}

/// Installs the kernelspec; returns its folder.
pub fn install(t: &Target) -> Result<PathBuf, Box<dyn std::error::Error>> {
    let exe = std::env::current_exe()?;
    let dir = data_dir(t)?.join("kernels").join(NAME);
    std::fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    stagna::io::table::write_atomically(&dir.join("kernel.json"), |f| {
        std::io::Write::write_all(f, kernel_json(&exe).as_bytes())
    })?;
    for size in [32, 64] {
        let png = logo_png(size)?;
        stagna::io::table::write_atomically(&dir.join(format!("logo-{size}x{size}.png")), |f| {
            std::io::Write::write_all(f, &png)
        })?;
    }
    Ok(dir)
}

/// Removes the kernelspec; returns the folder removed.
pub fn uninstall(t: &Target) -> Result<PathBuf, Box<dyn std::error::Error>> {
    let dir = data_dir(t)?.join("kernels").join(NAME);
    if !dir.join("kernel.json").is_file() {
        return Err(format!("no stagna kernelspec in {}", dir.display()).into());
    }
    std::fs::remove_dir_all(&dir)?;
    Ok(dir)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kernelspec_and_logo() {
        let j: serde_json::Value = serde_json::from_str(&kernel_json(Path::new("/opt/stagna"))).unwrap();
        assert_eq!(j["argv"][3], "{connection_file}");
        assert_eq!(j["interrupt_mode"], "message");
        let png = logo_png(64).unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n"); // PNG signature (ISO/IEC 15948 §5.2)
        let dir = std::env::temp_dir().join(format!("stagna-ks-{}", std::process::id()));
        let t = Target::Prefix(dir.clone());
        let d = install(&t).unwrap();
        assert!(d.join("kernel.json").is_file() && d.join("logo-64x64.png").is_file());
        uninstall(&t).unwrap();
        assert!(!d.exists());
    }
}
