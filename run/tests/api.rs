//! The run API end to end: a specification is started, advanced, cancelled and resumed as a
//! value, without the command line.

use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::mesh::MeshOptions;
use agarium_run::{Ended, ErrorKind, Observer, Run, RunSpec, Silent};

fn spec(end: f64) -> RunSpec {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../models/keller_segel.rhai");
    let text = std::fs::read_to_string(&root).unwrap();
    let plate = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 1.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    let mesh = MeshOptions {
        size: 0.12,
        ..MeshOptions::default()
    };
    let mut s = RunSpec::new(root.display().to_string(), text, plate, mesh, end);
    s.every = end / 2.0;
    s.stem = "ks".into();
    s
}

/// Sets the cancellation flag after `after` accepted steps.
struct CancelAfter<'a> {
    flag: &'a AtomicBool,
    after: usize,
    steps: usize,
}

impl Observer for CancelAfter<'_> {
    fn step(&mut self, _t: f64, _dt: f64) {
        self.steps += 1;
        if self.steps == self.after {
            self.flag.store(true, Ordering::SeqCst);
        }
    }
}

#[test]
fn a_run_starts_advances_and_reports_its_outcome() {
    let dir = tempfile::tempdir().unwrap();
    let run = Run::start(spec(0.05), dir.path()).unwrap();
    assert!(run.mesh().num_nodes() > 100);
    let done = run.advance(&AtomicBool::new(false), &mut Silent).unwrap();
    assert!(matches!(done.ended, Ended::Reached), "{:?}", done.ended);
    assert_eq!(done.time, 0.05);
    assert!(done.stats.steps > 0);
    // Keller–Segel with no-flux boundaries conserves the cell mass exactly (the flux form of
    // the equation; common practice), and the scheme does so to round-off.
    let last = done.last.as_ref().unwrap();
    let (u0, u1) = (done.start.species[0].integral, last.species[0].integral);
    assert!((u1 - u0).abs() <= 1e-10 * u0, "{u0} -> {u1}");
    assert!(done.summary.contains("reached t = 5.000000e-2"));
    for f in [
        "run.json",
        "checkpoint.bin",
        "ks_0000.vtu",
        "ks_0002.vtu",
        "ks.pvd",
    ] {
        assert!(dir.path().join(f).is_file(), "{f}");
    }
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("run.json")).unwrap())
            .unwrap();
    assert_eq!(m["exit"], "reached");
}

#[test]
fn a_cancelled_run_resumes_to_the_uninterrupted_result_bit_for_bit() {
    let whole = tempfile::tempdir().unwrap();
    let done = Run::start(spec(0.05), whole.path())
        .unwrap()
        .advance(&AtomicBool::new(false), &mut Silent)
        .unwrap();
    assert!(matches!(done.ended, Ended::Reached));

    let parts = tempfile::tempdir().unwrap();
    let flag = AtomicBool::new(false);
    let mut observer = CancelAfter {
        flag: &flag,
        after: 3,
        steps: 0,
    };
    let first = Run::start(spec(0.05), parts.path())
        .unwrap()
        .advance(&flag, &mut observer)
        .unwrap();
    assert!(
        matches!(first.ended, Ended::Interrupted),
        "{:?}",
        first.ended
    );
    assert!(first.time < 0.05);
    let rest = Run::resume(parts.path())
        .unwrap()
        .advance(&AtomicBool::new(false), &mut Silent)
        .unwrap();
    assert!(matches!(rest.ended, Ended::Reached));
    let a = std::fs::read(whole.path().join("ks_0002.vtu")).unwrap();
    let b = std::fs::read(parts.path().join("ks_0002.vtu")).unwrap();
    assert!(a == b, "the resumed run's last state differs");
}

#[test]
fn a_bad_specification_is_refused_before_anything_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let target = dir.path().join("never");
    let mut s = spec(0.05);
    s.set = vec!["no_such_parameter=1".into()];
    let err = Run::start(s, &target).err().unwrap();
    assert_eq!(err.kind, ErrorKind::Input);
    assert!(err.message.contains("no_such_parameter"), "{}", err.message);
    let mut s = spec(0.05);
    s.every = -1.0;
    assert_eq!(Run::start(s, &target).err().unwrap().kind, ErrorKind::Input);
    assert!(!target.exists());
}
