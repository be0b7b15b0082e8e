//! The README's examples run: every shell line between `<!-- readme-test -->` and
//! `<!-- /readme-test -->` is run in an empty temporary folder, in order, with the built
//! `fdtemp` first on the `PATH`, and must exit with 0.

use std::path::Path;
use std::process::Command;

/// The shell lines of the README's tested blocks (code fences and blank lines left out).
fn readme_lines() -> Vec<String> {
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    let mut lines = Vec::new();
    let mut inside = false;
    for line in readme.lines() {
        match line.trim() {
            "<!-- readme-test -->" => inside = true,
            "<!-- /readme-test -->" => inside = false,
            l if inside && !l.is_empty() && !l.starts_with("```") => lines.push(l.to_string()),
            _ => {}
        }
    }
    lines
}

#[test]
fn readme_has_a_tested_block_of_fdtemp_commands() {
    let lines = readme_lines();
    assert!(lines.len() >= 5, "{lines:?}");
    assert!(
        lines
            .iter()
            .all(|l| l.starts_with("fdtemp ") || l.starts_with("sed "))
    );
}

#[test]
fn every_readme_example_runs_on_files_the_demo_and_synth_write() {
    let bin = assert_cmd::cargo::cargo_bin("fdtemp");
    let bin_dir = bin.parent().unwrap();
    let path = std::env::join_paths(std::iter::once(bin_dir.to_path_buf()).chain(
        std::env::split_paths(&std::env::var_os("PATH").unwrap_or_default()),
    ))
    .unwrap();
    let dir = tempfile::tempdir().unwrap();
    for line in readme_lines() {
        let out = Command::new("sh")
            .arg("-c")
            .arg(&line)
            .current_dir(dir.path())
            .env("PATH", &path)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "`{line}` failed ({}):\n{}",
            out.status,
            String::from_utf8_lossy(&out.stderr)
        );
    }
}
