//! Finding and loading the ONNX Runtime shared library.
//!
//! Invariant: only model/ touches ONNX Runtime, and every ort call goes through the one
//! [`Environment`] made here, so a missing or too-old library is one clear error, never a panic.

use std::path::{Path, PathBuf};
use std::sync::{Mutex, OnceLock};

use ort::environment::Environment;

/// Environment variable naming the library file; checked first.
pub const DYLIB_ENV: &str = "ORT_DYLIB_PATH";
/// Folder (relative to the project) where `tools/setup-runtime.sh` unpacks the library.
pub const LOCAL_DIR: &str = ".ort";
/// Oldest ONNX Runtime whose C API our `ort` build uses (api-31).
pub const MIN_VERSION: &str = "1.31";

#[derive(Debug, thiserror::Error)]
pub enum RuntimeError {
    #[error(
        "ONNX Runtime library not found (looked at ${DYLIB_ENV} and {searched}); run `tools/setup-runtime.sh` \
         to fetch it from PyPI, or set {DYLIB_ENV} to a libonnxruntime.so of version {MIN_VERSION} or newer"
    )]
    NotFound { searched: String },
    #[error("cannot load ONNX Runtime from {path}: {message}; install version {MIN_VERSION} or newer with `tools/setup-runtime.sh`, or point {DYLIB_ENV} at one")]
    Load { path: PathBuf, message: String },
}

static ENVIRONMENT: OnceLock<Environment> = OnceLock::new();
static INIT: Mutex<()> = Mutex::new(());

/// The process-wide ONNX Runtime environment, loaded on first use.
pub fn environment() -> Result<&'static Environment, RuntimeError> {
    if let Some(env) = ENVIRONMENT.get() {
        return Ok(env);
    }
    let _guard = INIT.lock().unwrap_or_else(|e| e.into_inner());
    if let Some(env) = ENVIRONMENT.get() {
        return Ok(env);
    }
    let path = locate_library()?;
    let load_err = |message: String| RuntimeError::Load {
        path: path.clone(),
        message,
    };
    let builder = ort::init_from(&path).map_err(|e| load_err(e.to_string()))?;
    let env = builder
        .with_name("twinaudit")
        .build()
        .map_err(|e| load_err(e.to_string()))?;
    Ok(ENVIRONMENT.get_or_init(|| env))
}

/// The library file to load: `$ORT_DYLIB_PATH`, else the newest `libonnxruntime.so.*` in a
/// `.ort/` folder of the working directory, the executable's folders, or the source tree.
pub fn locate_library() -> Result<PathBuf, RuntimeError> {
    if let Some(p) = std::env::var_os(DYLIB_ENV).filter(|p| !p.is_empty()) {
        let p = PathBuf::from(p);
        if p.is_file() {
            return Ok(p);
        }
        return Err(RuntimeError::Load {
            path: p,
            message: format!("${DYLIB_ENV} names no file"),
        });
    }
    let mut roots: Vec<PathBuf> = Vec::new();
    if let Ok(cwd) = std::env::current_dir() {
        roots.extend(cwd.ancestors().map(Path::to_path_buf));
    }
    if let Ok(exe) = std::env::current_exe() {
        roots.extend(exe.ancestors().skip(1).map(Path::to_path_buf));
    }
    roots.push(PathBuf::from(env!("CARGO_MANIFEST_DIR")));
    for root in &roots {
        if let Some(lib) = newest_library(&root.join(LOCAL_DIR)) {
            return Ok(lib);
        }
    }
    Err(RuntimeError::NotFound {
        searched: format!(
            "{LOCAL_DIR}/ in the working directory, the executable's folders and {}",
            env!("CARGO_MANIFEST_DIR")
        ),
    })
}

fn newest_library(dir: &Path) -> Option<PathBuf> {
    let mut found: Vec<(Vec<u32>, PathBuf)> = std::fs::read_dir(dir)
        .ok()?
        .filter_map(|e| e.ok())
        .filter_map(|e| {
            let name = e.file_name().to_string_lossy().into_owned();
            let version = name.strip_prefix("libonnxruntime.so")?;
            let parts = version
                .trim_start_matches('.')
                .split('.')
                .filter_map(|s| s.parse().ok())
                .collect();
            Some((parts, e.path()))
        })
        .collect();
    found.sort();
    found.pop().map(|(_, p)| p)
}
