//! Helpers shared by the integration tests.
#![allow(dead_code)] // each test crate uses a different subset

use assert_cmd::Command;
use std::path::Path;

/// The `rillnet` binary under test.
pub fn rillnet() -> Command {
    Command::cargo_bin("rillnet").unwrap()
}

/// `rillnet solve --format json FILE`, parsed; panics with stderr when it fails.
pub fn json_of(path: &Path) -> serde_json::Value {
    let out = rillnet()
        .args(["solve", "--format", "json"])
        .arg(path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// A channel's flow [m³/s] from a solve report.
pub fn channel_flow(report: &serde_json::Value, name: &str) -> f64 {
    report["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap()["flow_m3_per_s"]
        .as_f64()
        .unwrap()
}
