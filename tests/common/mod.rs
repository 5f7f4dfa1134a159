//! Helpers shared by the integration tests.
#![allow(dead_code)]

/// Rows of a fixture CSV under tests/data/reference/ (comment lines starting with '#' and the header skipped).
pub fn fixture(name: &str) -> Vec<Vec<String>> {
    let path = format!("{}/tests/data/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    text.lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect()
}

/// A path inside the repository.
pub fn repo(rel: &str) -> String {
    format!("{}/{rel}", env!("CARGO_MANIFEST_DIR"))
}

/// A fresh, empty temporary folder for one test.
pub fn temp(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("dipwatch-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}
