//! End-to-end tests of `agarium run` through the built binary.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn agarium(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .output()
        .expect("run agarium")
}

fn model_path(name: &str) -> String {
    let p: PathBuf = [env!("CARGO_MANIFEST_DIR"), "models", name]
        .iter()
        .collect();
    p.display().to_string()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .map(|r| {
            r.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

#[test]
fn a_run_writes_one_file_per_output_time_and_a_summary() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("colony");
    let o = agarium(&[
        "run",
        &model_path("colony_4species.rhai"),
        "--plate",
        "circle:5",
        "--size",
        "0.4",
        "--spot",
        "0,0,0.1",
        "--end",
        "1",
        "--every",
        "0.25",
        "-o",
        out.to_str().unwrap(),
    ]);
    let err = stderr(&o);
    assert!(o.status.success(), "{err}");
    let names: Vec<String> = files(&out)
        .into_iter()
        .filter(|f| f.ends_with(".vtu"))
        .collect();
    let expected: Vec<String> = (0..=4)
        .map(|k| format!("colony_4species_{k:04}.vtu"))
        .collect();
    assert_eq!(names, expected);
    // The series index lists the five files at their times.
    let pvd = std::fs::read_to_string(out.join("colony_4species.pvd")).unwrap();
    assert_eq!(pvd.matches("<DataSet").count(), 5, "{pvd}");
    assert!(
        pvd.contains(r#"timestep="1e0" group="" part="0" file="colony_4species_0004.vtu""#),
        "{pvd}"
    );
    // The diagnostics table: a header and one row per accepted step plus the start.
    let csv = std::fs::read_to_string(out.join("colony_4species_diagnostics.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(
        &header[..4],
        &["t", "dt", "newton_iterations", "rejections"]
    );
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    assert!(rows.iter().all(|r| r.len() == header.len()));
    assert_eq!(rows.last().unwrap()[0], 1.0);
    let drift_col = header
        .iter()
        .position(|h| *h == "biomass_and_food_drift")
        .expect("drift column");
    assert!(rows.iter().all(|r| r[drift_col] < 1e-12));
    assert!(err.contains("reached t = 1.000000e0"), "{err}");
    // The conserved combination is reported with its drift, at round-off level.
    let line = err
        .lines()
        .find(|l| l.contains("biomass_and_food"))
        .expect("conserved integral in the summary");
    let drift: f64 = line
        .rsplit("drift ")
        .next()
        .and_then(|s| s.trim_end_matches(')').parse().ok())
        .expect("a drift figure");
    assert!(drift < 1e-12, "{line}");
    // Every species and the declared field are in the files.
    let text = std::fs::read_to_string(out.join("colony_4species_0004.vtu")).unwrap();
    for name in ["\"u\"", "\"c\"", "\"n\"", "\"w\"", "\"all_cells\""] {
        assert!(text.contains(name), "{name} missing");
    }
}

const CRITICAL: &str = r#"
// Parabolic–elliptic Keller–Segel with mass 10π (a Gaussian of width 0.1) at the centre.
species("u", #{ kind: "mobile", diffusion: 1.0, initial: "1000.0 * exp(-(x * x + y * y) / 0.01)" });
species("c", #{ kind: "quasi-steady", diffusion: 1.0, reaction: "u - c" });
chemotaxis(#{ cells: "u", signal: "c", potential: "c" });
"#;

/// Mass 10π > 8π concentrated at an interior point blows up (Jäger & Luckhaus 1992; Nagai
/// 1995): the run stops with a report and exit status 3, distinct from success and errors.
#[test]
fn a_suspected_blow_up_stops_the_run_with_its_own_exit_status() {
    let dir = tempfile::tempdir().unwrap();
    let model = dir.path().join("critical.rhai");
    std::fs::write(&model, CRITICAL).unwrap();
    let out = dir.path().join("out");
    let o = agarium(&[
        "run",
        model.to_str().unwrap(),
        "--plate",
        "circle:1",
        "--size",
        "0.06",
        "--end",
        "0.5",
        "-o",
        out.to_str().unwrap(),
    ]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(err.contains("suspected blow-up of `u`"), "{err}");
    assert!(err.contains("refine near the peak"), "{err}");
    // The state at the stop was written (first file plus the one at the stop).
    assert!(files(&out).len() >= 2, "{:?}", files(&out));
}

#[test]
fn bad_options_exit_2_and_write_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("never");
    let o_str = out.to_str().unwrap();
    let model = model_path("colony_4species.rhai");
    let cases: Vec<Vec<&str>> = vec![
        vec![
            "run", &model, "--plate", "circle:5", "--end", "-1", "-o", o_str,
        ],
        vec![
            "run", &model, "--plate", "circle:5", "--end", "1", "--every", "0", "-o", o_str,
        ],
        vec![
            "run", &model, "--plate", "circle:5", "--end", "1", "--rtol", "nan", "-o", o_str,
        ],
        vec![
            "run", &model, "--plate", "circle:5", "--end", "1", "--set", "nope=1", "-o", o_str,
        ],
        vec![
            "run",
            "missing.rhai",
            "--plate",
            "circle:5",
            "--end",
            "1",
            "-o",
            o_str,
        ],
        vec![
            "run",
            &model,
            "--plate",
            "circle:-5",
            "--end",
            "1",
            "-o",
            o_str,
        ],
    ];
    for args in cases {
        let o = agarium(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr(&o));
        assert!(
            stderr(&o).starts_with("error: "),
            "{args:?}: {}",
            stderr(&o)
        );
        assert!(!out.exists(), "{args:?} created the output folder");
    }
}

/// Pictures of chosen fields at every output time and plots of the diagnostics; the PNG
/// files decode (reference: the `png` crate's decoder) with the size the tool draws.
#[test]
fn pictures_and_plots_are_written_and_decode() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("p");
    let o = agarium(&[
        "run",
        &model_path("colony_4species.rhai"),
        "--plate",
        "circle:4",
        "--size",
        "0.4",
        "--spot",
        "0,0,0.1",
        "--end",
        "0.5",
        "--every",
        "0.25",
        "--picture",
        "u",
        "--picture",
        "all_cells",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    for f in [
        "colony_4species_u_0000.png",
        "colony_4species_u_0002.png",
        "colony_4species_all_cells_0002.png",
        "colony_4species_integrals.png",
        "colony_4species_sup.png",
        "colony_4species_dt.png",
    ] {
        let file = std::fs::File::open(out.join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
        let decoder = png::Decoder::new(std::io::BufReader::new(file));
        let reader = decoder.read_info().unwrap();
        let info = reader.info();
        assert!(info.width == 900, "{f}: width {}", info.width);
        assert!(info.height >= 300, "{f}: height {}", info.height);
    }
    // An unknown field is refused before anything is written.
    let never = dir.path().join("never");
    let o = agarium(&[
        "run",
        &model_path("colony_4species.rhai"),
        "--plate",
        "circle:4",
        "--end",
        "0.5",
        "--picture",
        "nope",
        "-o",
        never.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--picture nope"), "{}", stderr(&o));
    assert!(!never.exists());
}

/// The most frequent colour of a picture other than white and near-black (text and outline):
/// the plate's fill when the field is nearly uniform.
fn dominant_colour(path: &Path) -> [u8; 3] {
    let file = std::fs::File::open(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut reader = png::Decoder::new(std::io::BufReader::new(file))
        .read_info()
        .unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    let step = info.color_type.samples();
    let mut counts = std::collections::HashMap::new();
    for px in buf[..info.buffer_size()].chunks(step) {
        let c = [px[0], px[1], px[2]];
        if c.iter().all(|&v| v > 240) || c.iter().all(|&v| v < 40) {
            continue;
        }
        *counts.entry(c).or_insert(0usize) += 1;
    }
    counts.into_iter().max_by_key(|&(_, n)| n).unwrap().0
}

/// `--range` fixes a field's colour scale across the series and `--log-scale` draws it on
/// decades (zeros take the first colour instead of failing); bad ranges are refused before
/// anything is written. The nutrient starts uniform at 1 and barely moves in 0.5 h: on the
/// range 0..10 it is the dark end of the viridis map, on 0..1.05 its yellow end (the map's
/// ends: common practice).
#[test]
fn fixed_and_log_colour_scales() {
    let dir = tempfile::tempdir().unwrap();
    let run = |name: &str, extra: &[&str]| {
        let out = dir.path().join(name);
        let mut args = vec![
            "run".to_string(),
            model_path("colony_4species.rhai"),
            "--plate".into(),
            "circle:4".into(),
            "--size".into(),
            "0.4".into(),
            "--end".into(),
            "0.5".into(),
            "--every".into(),
            "0.25".into(),
            "--picture".into(),
            "n".into(),
            "--picture".into(),
            "u".into(),
            "-o".into(),
            out.to_str().unwrap().into(),
        ];
        args.extend(extra.iter().map(|s| s.to_string()));
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        (agarium(&refs), out)
    };
    let (o, wide) = run("wide", &["--range", "n=0:10", "--log-scale", "u"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let (o, tight) = run("tight", &["--range", "n=0:1.05"]);
    assert!(o.status.success(), "{}", stderr(&o));
    for k in ["0000", "0002"] {
        let dark = dominant_colour(&wide.join(format!("colony_4species_n_{k}.png")));
        let bright = dominant_colour(&tight.join(format!("colony_4species_n_{k}.png")));
        assert!(dark[1] < 90 && dark[2] > 90, "n on 0..10 at {k}: {dark:?}");
        assert!(
            bright[0] > 150 && bright[1] > 180,
            "n on 0..1.05 at {k}: {bright:?}"
        );
    }
    assert!(wide.join("colony_4species_u_0002.png").exists());
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(wide.join("run.json")).unwrap()).unwrap();
    assert_eq!(m["picture_ranges"]["n"], serde_json::json!([0.0, 10.0]));
    assert_eq!(m["picture_log"], serde_json::json!(["u"]));
    for (bad, why) in [
        (&["--range", "n=2:1"][..], "increasing"),
        (&["--range", "n=0"][..], "FIELD=LOW:HIGH"),
        (&["--range", "n=a:1"][..], "not a number"),
        (&["--range", "c=0:1"][..], "not drawn"),
        (
            &["--range", "n=0:1", "--log-scale", "n"][..],
            "positive range",
        ),
        (&["--log-scale", "w"][..], "not drawn"),
    ] {
        let (o, out) = run("bad", bad);
        assert_eq!(o.status.code(), Some(2), "{bad:?}: {}", stderr(&o));
        assert!(stderr(&o).contains(why), "{bad:?}: {}", stderr(&o));
        assert!(!out.exists(), "{bad:?} wrote {}", out.display());
    }
}

/// u_t = Δu + u² from u = 1 blows up everywhere at once at t = 1 (the ODE u' = u², whose
/// solution 1/(1 − t) diffusion leaves alone: common practice). The report says it is a
/// uniform blow-up, not a concentration, and stops before t = 1.
#[test]
fn a_uniform_blow_up_is_told_apart_from_a_concentration() {
    let dir = tempfile::tempdir().unwrap();
    let model = dir.path().join("square_growth.rhai");
    std::fs::write(
        &model,
        "param(\"D\", 1.0, #{ unit: \"1\", about: \"diffusivity\", min: 0.0 });\n\
         species(\"u\", #{ kind: \"mobile\", diffusion: \"D\", reaction: \"u * u\", initial: \"1.0\" });\n",
    )
    .unwrap();
    let out = dir.path().join("o");
    let o = agarium(&[
        "run",
        model.to_str().unwrap(),
        "--plate",
        "circle:1",
        "--size",
        "0.3",
        "--end",
        "2",
        "-q",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(err.contains("spatially uniform blow-up"), "{err}");
    assert!(!err.contains("of the mass"), "{err}");
    let t: f64 = err
        .split("at t = ")
        .nth(1)
        .and_then(|s| s.split(':').next())
        .and_then(|s| s.trim().parse().ok())
        .unwrap_or_else(|| panic!("no time in {err}"));
    assert!((0.95..1.0).contains(&t), "blow-up reported at t = {t}");
}

/// A second run into a folder that holds a run is refused (exit 2, nothing touched); with
/// `--overwrite` the old run's files go (also stale higher-numbered states and another
/// model's files), a file of the user's stays; a refused overwrite (bad initial data) leaves
/// the old run as it was.
#[test]
fn a_non_empty_folder_is_refused_unless_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o");
    let base = |model: &str, end: &str, extra: &[&str]| -> Output {
        let mut args = vec![
            "run".to_string(),
            model_path(model),
            "--plate".into(),
            "circle:3".into(),
            "--size".into(),
            "0.5".into(),
            "--end".into(),
            end.into(),
            "--every".into(),
            "0.25".into(),
            "-q".into(),
            "-o".into(),
            out.display().to_string(),
        ];
        args.extend(extra.iter().map(|s| s.to_string()));
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        agarium(&refs)
    };
    let o = base("fisher_kpp.rhai", "1", &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    std::fs::write(out.join("notes.txt"), "mine").unwrap();
    let before = std::fs::read(out.join("run.json")).unwrap();
    let o = base("fisher_kpp.rhai", "0.5", &[]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("--overwrite"), "{}", stderr(&o));
    assert_eq!(std::fs::read(out.join("run.json")).unwrap(), before);
    // A refused run with --overwrite (negative initial data) leaves the old files.
    let o = base(
        "fisher_kpp.rhai",
        "0.5",
        &["--overwrite", "--initial", "u=-1"],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert_eq!(std::fs::read(out.join("run.json")).unwrap(), before);
    // A shorter run of another model replaces everything of the first.
    let o = base("nutrient_fronts.rhai", "0.5", &["--overwrite"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let names = files(&out);
    assert!(
        names.iter().all(|n| !n.starts_with("fisher_kpp")),
        "{names:?}"
    );
    assert!(
        names.contains(&"nutrient_fronts_0002.vtu".to_string()),
        "{names:?}"
    );
    assert!(
        !names.contains(&"nutrient_fronts_0003.vtu".to_string()),
        "{names:?}"
    );
    assert_eq!(
        std::fs::read_to_string(out.join("notes.txt")).unwrap(),
        "mine"
    );
}
