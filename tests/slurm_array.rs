//! A sweep as a real Slurm job array: `scripts/slurm-single-node.sh` brings up a one-node
//! cluster (munge, slurmctld, slurmd from Debian's packages), a 3-task array runs the shards
//! (each task takes its slice from Slurm's SLURM_ARRAY_TASK_* variables), `sweep merge`
//! combines them, and the table must equal the unsharded sweep's. When Slurm cannot be
//! installed or started the test fails, saying why; it is never skipped.

use std::path::Path;
use std::process::Command;

fn repo() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// The sweep's options after `agarium sweep` (6 points).
fn sweep_args() -> Vec<String> {
    let model = repo().join("models/keller_segel.rhai");
    [
        model.to_str().unwrap(),
        "--plate",
        "circle:1",
        "--size",
        "0.15",
        "--end",
        "0.02",
        "--axis",
        "chi=1,5",
        "--axis",
        "D_u=0.5,0.75,1",
        "-q",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect()
}

/// The table without its last column (wall seconds).
fn table(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        .lines()
        .map(|l| l.rsplit_once(',').unwrap().0.to_string())
        .collect()
}

#[test]
fn a_slurm_job_array_runs_the_shards_and_merges_to_the_unsharded_table() {
    let up = Command::new("bash")
        .arg(repo().join("scripts/slurm-single-node.sh"))
        .output()
        .expect("run scripts/slurm-single-node.sh");
    assert!(
        up.status.success(),
        "could not bring up Slurm:\n{}",
        String::from_utf8_lossy(&up.stderr)
    );
    let dir = tempfile::tempdir().unwrap();
    let bin = env!("CARGO_BIN_EXE_agarium");

    let reference = dir.path().join("reference");
    let mut a = vec!["sweep".to_string()];
    a.extend(sweep_args());
    a.extend(["-o".into(), reference.to_str().unwrap().into()]);
    let o = Command::new(bin).args(&a).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));

    let cluster = dir.path().join("cluster");
    let quoted: Vec<String> = sweep_args().iter().map(|s| format!("'{s}'")).collect();
    let script = format!(
        "#!/bin/bash\n\
         #SBATCH --job-name=agarium-test\n\
         #SBATCH --array=0-2\n\
         #SBATCH --cpus-per-task=1\n\
         #SBATCH --output={out}/slurm-%A_%a.out\n\
         exec '{bin}' sweep {args} -j 1 -o '{cluster}'\n",
        out = dir.path().display(),
        args = quoted.join(" "),
        cluster = cluster.display(),
    );
    let script_path = dir.path().join("array.sh");
    std::fs::write(&script_path, script).unwrap();
    let submitted = Command::new("timeout")
        .args(["300", "sbatch", "--wait", "--parsable"])
        .arg(format!("--chdir={}", dir.path().display()))
        .arg(&script_path)
        .output()
        .expect("run sbatch");
    // The tasks' own output, for the messages below.
    let logs: String = std::fs::read_dir(dir.path())
        .unwrap()
        .filter_map(|e| {
            let p = e.ok()?.path();
            let name = p.file_name()?.to_str()?.to_string();
            name.starts_with("slurm-").then(|| {
                format!(
                    "{name}:\n{}",
                    std::fs::read_to_string(&p).unwrap_or_default()
                )
            })
        })
        .collect();
    assert!(
        submitted.status.success(),
        "the job array failed ({:?}):\n{}\n{logs}",
        submitted.status,
        String::from_utf8_lossy(&submitted.stderr)
    );
    for k in 1..=3 {
        assert!(
            cluster.join(format!("shard-{k}-of-3.csv")).is_file(),
            "task {k} wrote no shard table\n{logs}"
        );
    }
    let merged = Command::new(bin)
        .args(["sweep", "merge", cluster.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(
        merged.status.success(),
        "{}",
        String::from_utf8_lossy(&merged.stderr)
    );
    assert_eq!(
        table(&cluster.join("summary.csv")),
        table(&reference.join("summary.csv"))
    );
}
