//! Records the commit the binary is built from, for `manifest.json`
//! (`git_commit`): `git rev-parse HEAD`, with ` (with uncommitted changes)`
//! when the code that decides the numbers (src/, Cargo files) differs from it.
//! Outside a git checkout, or without git, nothing is recorded and manifests
//! say `null`.

use std::process::Command;

fn git(args: &[&str]) -> Option<String> {
    let out = Command::new("git").args(args).output().ok()?;
    out.status
        .success()
        .then(|| String::from_utf8_lossy(&out.stdout).trim().to_string())
}

fn main() {
    println!("cargo:rerun-if-changed=src");
    println!("cargo:rerun-if-changed=Cargo.toml");
    println!("cargo:rerun-if-changed=Cargo.lock");
    // A new commit moves HEAD or the branch it points at.
    for path in ["HEAD", "packed-refs"] {
        if let Some(p) = git(&["rev-parse", "--git-path", path]) {
            println!("cargo:rerun-if-changed={p}");
        }
    }
    if let Some(branch) = git(&["symbolic-ref", "-q", "HEAD"]) {
        if let Some(p) = git(&["rev-parse", "--git-path", &branch]) {
            println!("cargo:rerun-if-changed={p}");
        }
    }
    let Some(commit) = git(&["rev-parse", "HEAD"]) else {
        return;
    };
    let dirty = git(&[
        "status",
        "--porcelain",
        "--untracked-files=no",
        "--",
        "src",
        "Cargo.toml",
        "Cargo.lock",
    ])
    .is_some_and(|s| !s.is_empty());
    let suffix = if dirty {
        " (with uncommitted changes)"
    } else {
        ""
    };
    println!("cargo:rustc-env=PLUMBLINE_GIT_COMMIT={commit}{suffix}");
}
