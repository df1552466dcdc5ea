//! A real scheduler: a single-node Slurm cluster (slurmctld, slurmd, munged
//! started by `scripts/slurm_local_cluster.sh`) runs a small suite as a
//! 4-task job array submitted by `scripts/slurm_submit.sh`, then the
//! dependent merge job; the merged folder must equal the one-machine run.
//!
//! Ignored by a plain `cargo test` (listed as ignored), because it needs root
//! and installs the Debian packages slurm-wlm and munge when `sbatch` is
//! missing: run it with `cargo test --locked --test slurm -- --ignored`, or
//! everything with the documented `cargo test --locked -- --include-ignored`
//! (what `.ci/run` runs). When it runs it never passes without a merged
//! folder: a scheduler that cannot be installed, does not start or does not
//! finish fails the test with the daemons' and jobs' logs.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command as Proc;
use std::time::{Duration, Instant};

use common::*;

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn sh(cmd: &mut Proc) -> (bool, String) {
    let o = cmd.output().unwrap_or_else(|e| {
        panic!(
            "cannot start {:?} (the Slurm test needs root, apt-get when sbatch is missing, and the Slurm tools): {e}",
            cmd.get_program()
        )
    });
    (
        o.status.success(),
        format!(
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        ),
    )
}

struct Cluster {
    dir: PathBuf,
    conf: PathBuf,
}

impl Cluster {
    fn script() -> PathBuf {
        repo().join("scripts/slurm_local_cluster.sh")
    }
    fn logs(&self, jobs: &Path) -> String {
        let (_, mut s) = sh(Proc::new(Self::script()).args(["logs", self.dir.to_str().unwrap()]));
        for f in files(jobs) {
            s.push_str(&format!("===== job log {f}\n"));
            s.push_str(&std::fs::read_to_string(jobs.join(&f)).unwrap_or_default());
        }
        s
    }
}

impl Drop for Cluster {
    fn drop(&mut self) {
        let _ = sh(Proc::new(Self::script()).args(["stop", self.dir.to_str().unwrap()]));
    }
}

fn ensure_slurm() {
    if Proc::new("sbatch").arg("--version").output().is_ok() {
        return;
    }
    for args in [
        vec!["update", "-q"],
        vec!["install", "-y", "-q", "slurm-wlm", "munge"],
    ] {
        let (ok, out) = sh(Proc::new("apt-get")
            .args(&args)
            .env("DEBIAN_FRONTEND", "noninteractive"));
        assert!(
            ok,
            "apt-get {args:?} failed (the Slurm test needs root):\n{out}"
        );
    }
}

#[test]
#[ignore = "needs root and Slurm (installs slurm-wlm and munge when sbatch is missing); run with `cargo test --locked --test slurm -- --ignored`, or all tests with `cargo test --locked -- --include-ignored` as .ci/run does"]
fn slurm_job_array_and_merge_equal_the_one_machine_run() {
    ensure_slurm();
    let tmp = tempfile::TempDir::new().unwrap();
    let suite = write_suite(tmp.path(), 21, 5, "40, 150, 500");
    let full = tmp.path().join("full");
    run(&suite, &full, &[]);

    let cdir = tmp.path().join("cluster");
    let (ok, out) = sh(Proc::new(Cluster::script()).args(["start", cdir.to_str().unwrap()]));
    let cluster = Cluster {
        conf: cdir.join("slurm.conf"),
        dir: cdir,
    };
    let jobs = tmp.path().join("jobs");
    assert!(
        ok,
        "the Slurm cluster did not start:\n{out}\n{}",
        cluster.logs(&jobs)
    );
    // Wait for the node to register.
    let t0 = Instant::now();
    loop {
        let (ok, s) = sh(Proc::new("sinfo")
            .args(["-h", "-o", "%T"])
            .env("SLURM_CONF", &cluster.conf));
        if ok && s.trim() == "idle" {
            break;
        }
        assert!(
            t0.elapsed() < Duration::from_secs(60),
            "the Slurm node never became idle (sinfo: {s}):\n{}",
            cluster.logs(&jobs)
        );
        std::thread::sleep(Duration::from_millis(500));
    }
    let (ok, out) = sh(Proc::new(repo().join("scripts/slurm_submit.sh"))
        .args([suite.to_str().unwrap(), jobs.to_str().unwrap(), "4"])
        .env("SLURM_CONF", &cluster.conf)
        .env("PLUMBLINE", bin_path())
        .current_dir(tmp.path()));
    assert!(ok, "sbatch failed:\n{out}\n{}", cluster.logs(&jobs));
    let merged = jobs.join("merged");
    let t0 = Instant::now();
    while !merged.join("manifest.json").exists() {
        assert!(
            t0.elapsed() < Duration::from_secs(240),
            "no merged folder after 240 s; squeue:\n{}\n{}",
            sh(Proc::new("squeue").env("SLURM_CONF", &cluster.conf)).1,
            cluster.logs(&jobs)
        );
        std::thread::sleep(Duration::from_millis(500));
    }
    for k in 1..=4 {
        assert!(jobs.join(format!("shard-{k}/manifest.json")).exists());
    }
    assert_same_results(&full, &merged);
}
