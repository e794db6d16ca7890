//! The cluster examples of docs/cluster.md, run as written: the Slurm array job
//! (`examples/cluster/slurm-array.sh`) and its merge job (`slurm-merge.sh`), queued by
//! `submit-slurm.sh`, must give the files of one unsharded `check --out` (byte for byte, run id
//! and date aside; common practice, no source: the reference is firemain's own run).
//!
//! - Without a scheduler, the same scripts run as plain processes, one per shard, with the
//!   variables Slurm would set: an ordinary test.
//! - On a real Slurm cluster (`sbatch` and an idle node; `.ci/run` starts a one-node cluster and
//!   sets `FIREMAIN_SLURM_TEST=required`), the scripts are submitted with sbatch. Without Slurm
//!   that test is skipped with a message, unless `FIREMAIN_SLURM_TEST=required`.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

use common::masked_outputs;

const SHARDS: usize = 4;

fn repo(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

/// A generated network (the `synthetic` example, built by `cargo test`) and an unsharded
/// check of it in `dir/full`.
fn network_and_full_run(dir: &Path) -> PathBuf {
    let exe = std::env::current_exe().expect("test binary");
    let synthetic = exe
        .parent()
        .and_then(Path::parent)
        .expect("target/<profile>")
        .join("examples/synthetic");
    let net = dir.join("net");
    let out = Command::new(&synthetic)
        .args(["--junctions", "600", "--seed", "7", "--out"])
        .arg(&net)
        .output()
        .unwrap_or_else(|e| panic!("{}: {e}", synthetic.display()));
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .arg("check")
        .arg(&net)
        .arg("--criteria")
        .arg(repo("criteria/common-practice-us.toml"))
        .arg("--out")
        .arg(dir.join("full"))
        .arg("--quiet")
        .output()
        .expect("run firemain");
    assert!(out.status.code().is_some_and(|c| c <= 1), "{out:?}");
    net
}

/// The variables the scripts read (see their headers).
fn script_env(cmd: &mut Command, dir: &Path, net: &Path) {
    cmd.current_dir(dir)
        .env("NETWORK", net)
        .env("CRITERIA", repo("criteria/common-practice-us.toml"))
        .env("PARTS", dir.join("parts"))
        .env("OUT", dir.join("merged"))
        .env("FIREMAIN", env!("CARGO_BIN_EXE_firemain"));
}

fn assert_merged_is_full(dir: &Path) {
    let full = masked_outputs(&dir.join("full"), "check");
    let merged = masked_outputs(&dir.join("merged"), "check");
    assert_eq!(full.len(), merged.len(), "file count");
    for (name, text) in &full {
        assert!(
            merged.get(name) == Some(text),
            "{name}: merged differs from the unsharded run"
        );
    }
}

#[test]
fn the_slurm_scripts_as_plain_processes_give_the_unsharded_files() {
    let dir = tempfile::tempdir().unwrap();
    let net = network_and_full_run(dir.path());
    for k in 0..SHARDS {
        let mut cmd = Command::new("bash");
        cmd.arg(repo("examples/cluster/slurm-array.sh"))
            .env("SLURM_ARRAY_TASK_ID", k.to_string())
            .env("SLURM_ARRAY_TASK_COUNT", SHARDS.to_string())
            .env("SLURM_CPUS_PER_TASK", "1");
        script_env(&mut cmd, dir.path(), &net);
        let out = cmd.output().expect("bash");
        assert!(out.status.success(), "shard {k}: {out:?}");
    }
    let mut cmd = Command::new("bash");
    cmd.arg(repo("examples/cluster/slurm-merge.sh"));
    script_env(&mut cmd, dir.path(), &net);
    let out = cmd.output().expect("bash");
    assert!(out.status.success(), "merge: {out:?}");
    assert_merged_is_full(dir.path());
}

/// Whether a Slurm cluster answers here: `sinfo` lists an idle node.
fn slurm_available() -> bool {
    Command::new("sinfo")
        .args(["-h", "-o", "%t"])
        .output()
        .is_ok_and(|o| o.status.success() && String::from_utf8_lossy(&o.stdout).contains("idle"))
}

#[test]
fn the_slurm_array_job_and_its_merge_give_the_unsharded_files() {
    let required = std::env::var("FIREMAIN_SLURM_TEST").is_ok_and(|v| v == "required");
    if !slurm_available() {
        assert!(
            !required,
            "FIREMAIN_SLURM_TEST=required, but no Slurm node is idle (sinfo)"
        );
        eprintln!("skipped: no Slurm cluster here (sinfo lists no idle node); .ci/run starts one");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let net = network_and_full_run(dir.path());
    let mut cmd = Command::new("bash");
    cmd.arg(repo("examples/cluster/submit-slurm.sh"))
        .arg(SHARDS.to_string())
        .arg("--wait");
    script_env(&mut cmd, dir.path(), &net);
    let out = cmd.output().expect("bash");
    let logs: String = std::fs::read_dir(dir.path())
        .into_iter()
        .flatten()
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().ends_with(".log"))
        .map(|e| {
            format!(
                "--- {}\n{}",
                e.path().display(),
                std::fs::read_to_string(e.path()).unwrap_or_default()
            )
        })
        .collect();
    assert!(out.status.success(), "sbatch: {out:?}\n{logs}");
    for k in 0..SHARDS {
        let log_count = logs.matches(&format!("shard {k}/{SHARDS}:")).count();
        assert_eq!(log_count, 1, "shard {k} ran once:\n{logs}");
    }
    assert_merged_is_full(dir.path());
}
