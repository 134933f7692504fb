//! run.json: what a run was made from, so it can be reproduced, resumed or compared.

use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use serde::{Deserialize, Serialize};

pub const RUN_FORMAT_VERSION: u32 = 1;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpecFile {
    pub path: String,
    pub sha256: String,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunInfo {
    pub format_version: u32,
    pub tool: String,
    pub tool_version: String,
    /// UTC, RFC 3339.
    pub started_at: String,
    /// UTC, RFC 3339; absent while the run is going or when it was killed.
    pub finished_at: Option<String>,
    /// Every random choice derives from this and the pair id.
    pub seed: u64,
    pub jobs: usize,
    pub manifest_path: String,
    pub manifest: serde_json::Value,
    pub model_path: String,
    pub model_sha256: String,
    pub onnx_runtime_library: String,
    pub specs: Vec<SpecFile>,
    pub n_pairs_planned: usize,
    /// How many times `--resume` continued this run.
    pub n_resumes: u32,
    /// Whether every edit got a placebo control (`--placebo`); false in older run.json files.
    #[serde(default)]
    pub placebo: bool,
}

impl RunInfo {
    /// The fields that must agree for `--resume` to continue a run; `None` when they do.
    pub fn resume_conflict(&self, other: &RunInfo) -> Option<String> {
        if self.model_sha256 != other.model_sha256 {
            return Some("the model file changed since the run started".into());
        }
        if self.manifest != other.manifest {
            return Some("the manifest changed since the run started".into());
        }
        if self.specs != other.specs {
            return Some("the spec files (or their contents) changed since the run started".into());
        }
        if self.placebo != other.placebo {
            let flag = |on: bool| if on { "with" } else { "without" };
            return Some(format!(
                "the run was started {} --placebo, this one is {} it",
                flag(self.placebo),
                flag(other.placebo)
            ));
        }
        if self.seed != other.seed {
            return Some(format!(
                "the run used --seed {}, not {}",
                self.seed, other.seed
            ));
        }
        None
    }
}

pub fn read_run_info(path: &Path) -> Result<RunInfo, String> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| format!("cannot read {}: {e}", path.display()))?;
    serde_json::from_str(&text)
        .map_err(|e| format!("{} is not a twinaudit run.json: {e}", path.display()))
}

/// Writes JSON through a temporary file and a rename, so readers never see half a file.
pub fn write_json_atomic<T: Serialize>(path: &Path, value: &T) -> std::io::Result<()> {
    let tmp: PathBuf = path.with_extension("json.part");
    let mut text = serde_json::to_string_pretty(value).expect("run files always serialise");
    text.push('\n');
    std::fs::write(&tmp, text)?;
    std::fs::rename(&tmp, path)
}

/// Current UTC time as `YYYY-MM-DDTHH:MM:SSZ`.
pub fn now_rfc3339() -> String {
    let secs = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    format_utc(secs)
}

/// Civil date from days since 1970-01-01 (H. Hinnant, "chrono-Compatible Low-Level Date Algorithms").
pub fn format_utc(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + (m <= 2) as i64;
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

#[cfg(test)]
mod tests {
    #[test]
    fn utc_formatting_matches_known_instants() {
        // 2000-03-01 and 2026-12-01 checked against `date -u -d @SECS` (GNU coreutils).
        assert_eq!(super::format_utc(951_868_800), "2000-03-01T00:00:00Z");
        assert_eq!(
            super::format_utc(1_796_083_200 + 3_661),
            "2026-12-01T01:01:01Z"
        );
    }
}
