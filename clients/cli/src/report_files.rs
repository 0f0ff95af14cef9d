//! Writing the daemon's report pages (`report.render`) to files, one per sample; shared by
//! `mobilis report` and `mobilis demo --reports`.

use anyhow::{bail, Context};
use mobilis_client::Client;
use serde_json::json;
use std::path::{Path, PathBuf};

/// A sample name made safe as a file name: anything but letters, digits, `-`, `_` and `.` becomes `_`.
pub fn file_stem(sample: &str) -> String {
    let stem: String = sample
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || "-_.".contains(c) {
                c
            } else {
                '_'
            }
        })
        .collect();
    if stem.is_empty() || stem.starts_with('.') {
        format!("sample{stem}")
    } else {
        stem
    }
}

/// Writes `<out>/<sample>.html` for each of `samples` (every sample with data when empty)
/// and prints one line per page.
pub async fn write_reports(client: &Client, out: &Path, samples: &[String]) -> anyhow::Result<Vec<PathBuf>> {
    let samples: Vec<String> = if samples.is_empty() {
        let known = client.call("report.samples", json!({})).await?;
        known
            .as_array()
            .into_iter()
            .flatten()
            .filter_map(|s| s["sample"].as_str().map(str::to_owned))
            .collect()
    } else {
        samples.to_vec()
    };
    if samples.is_empty() {
        bail!("no stored dataset has a `sample` column; import data first (mobilis import, mobilis pipeline)");
    }
    std::fs::create_dir_all(out).with_context(|| format!("cannot create {}", out.display()))?;
    let mut written = Vec::with_capacity(samples.len());
    for sample in &samples {
        let page = client.call("report.render", json!({ "sample": sample })).await?;
        let path = out.join(format!("{}.html", file_stem(sample)));
        std::fs::write(&path, page["html"].as_str().unwrap_or(""))
            .with_context(|| format!("cannot write {}", path.display()))?;
        println!(
            "wrote {} ({} datasets, {} figures)",
            path.display(),
            page["datasets"].as_array().map_or(0, Vec::len),
            page["figures"]
        );
        written.push(path);
    }
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sample_names_become_safe_file_names() {
        assert_eq!(file_stem("SiRef-centre"), "SiRef-centre");
        assert_eq!(file_stem("wafer 7/die 3"), "wafer_7_die_3");
        assert_eq!(file_stem("../x"), "sample.._x");
        assert_eq!(file_stem(""), "sample");
    }
}
