//! `agarium stability`: homogeneous steady states, the dispersion relation, the plate's modes
//! and thresholds, through the binary, against closed forms and published values.

use std::path::Path;
use std::process::{Command, Output};

fn agarium(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .output()
        .expect("run agarium")
}

fn model(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("models")
        .join(name)
        .display()
        .to_string()
}

fn json(args: &[&str]) -> serde_json::Value {
    let mut a = vec!["stability"];
    a.extend_from_slice(args);
    a.push("--json");
    let o = agarium(&a);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).expect("JSON report")
}

fn num(v: &serde_json::Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// The chemotaxis–logistic model at its defaults (unit coefficients, chi = 5): states (0, 0)
/// (a saddle of the ODE) and the lawn (1, 1) (a stable node), the lawn's band between the
/// roots k² = (3 ∓ √5)/2 of (1 + k²)² = 5k², its fastest mode at k² = 5/4 with σ = 1/4
/// (direct computation of det(J − k²(D + T)) = 0 and its extremum, common practice), and
/// the threshold chi = (√(D_u β) + √(r D_v))²/α = 4 (Mimura & Tsujikawa 1996, recalled from
/// memory) bracketed to 1e-6. Band edges hold to 1e-7: growth counts above 1e-9 of the
/// matrix's size, which moves the edges by about that much.
#[test]
fn chemotaxis_logistic_band_fastest_mode_and_threshold() {
    let r = json(&[
        &model("chemotaxis_logistic.rhai"),
        "--plate",
        "circle:15",
        "--size",
        "0.6",
        "--scan",
        "chi=2:6",
    ]);
    let states = r["states"].as_array().unwrap();
    assert_eq!(states.len(), 2, "{r}");
    assert_eq!(states[0]["state"]["class"], "saddle");
    assert_eq!(states[1]["state"]["class"], "stable-node");
    let lawn = &states[1];
    assert!((num(&lawn["state"]["values"][0]) - 1.0).abs() < 1e-10);
    let band = &lawn["band"];
    let s5 = 5f64.sqrt();
    assert!(
        (num(&band["k2_low"]) - (3.0 - s5) / 2.0).abs() < 1e-7,
        "{band}"
    );
    assert!(
        (num(&band["k2_high"]) - (3.0 + s5) / 2.0).abs() < 1e-7,
        "{band}"
    );
    assert!((num(&band["fastest"]["k2"]) - 1.25).abs() < 1e-6, "{band}");
    assert!(
        (num(&band["fastest"]["sigma"]) - 0.25).abs() < 1e-10,
        "{band}"
    );
    assert_eq!(band["oscillatory"], false);
    // The plate's modes compared with the band lie near the fastest k², and all grow.
    let growth = lawn["plate_growth"].as_array().unwrap();
    assert!(!growth.is_empty());
    for g in growth {
        let k2 = num(&g["k2"]);
        assert!(k2 > (3.0 - s5) / 2.0 && k2 < (3.0 + s5) / 2.0, "{g}");
        assert!(num(&g["sigma"]) > 0.0 && num(&g["sigma"]) <= 0.25 + 1e-12);
    }
    let t = &r["threshold"];
    assert_eq!(t["parameter"], "chi");
    assert_eq!(t["unstable_above"], true);
    let (a, b) = (num(&t["bracket"][0]), num(&t["bracket"][1]));
    assert!(a <= 4.0 + 1e-6 && b >= 4.0 - 1e-6 && b - a < 1e-6, "{t}");
}

/// The unit disk's first Neumann eigenvalue j'₁,₁² = 3.3900 (A&S table 9.5: j'₁,₁ =
/// 1.8411838), double, within the mesh error.
#[test]
fn plate_eigenvalues_of_the_unit_disk() {
    let r = json(&[
        &model("chemotaxis_logistic.rhai"),
        "--plate",
        "circle:1",
        "--size",
        "0.04",
        "--modes",
        "4",
    ]);
    let ev: Vec<f64> = r["plate_eigenvalues"]
        .as_array()
        .unwrap()
        .iter()
        .map(num)
        .collect();
    let j11 = 1.841_183_8f64.powi(2);
    assert_eq!(ev[0], 0.0);
    for &v in &ev[1..3] {
        assert!((v / j11 - 1.0).abs() < 3e-3, "{ev:?}");
    }
}

/// The four-species colony model: the homogeneous states are u = c = 0 with any nutrient n
/// (a family; w, read by no term, stays at its initial 0); about (0, 0, n, 0) the cells grow
/// at g(n) − b(n) = r n/(k_n + n) − b_0 k_b/(k_b + n) (Monod growth minus immobilisation:
/// the closed form of the model's reaction terms at u = 0).
#[test]
fn four_species_states_and_their_growth_rates() {
    let r = json(&[
        &model("colony_4species.rhai"),
        "--plate",
        "circle:5",
        "--size",
        "0.5",
        "--modes",
        "0",
    ]);
    let (rr, k_n, b_0, k_b) = (1.2, 0.5, 0.2, 0.4);
    let states = r["states"].as_array().unwrap();
    assert!(states.len() >= 3, "{r}");
    for s in states {
        let v: Vec<f64> = s["state"]["values"]
            .as_array()
            .unwrap()
            .iter()
            .map(num)
            .collect();
        assert_eq!((v[0], v[1], v[3]), (0.0, 0.0, 0.0), "{v:?}");
        assert_eq!(s["state"]["class"], "non-hyperbolic");
        let n = v[2];
        let rate = rr * n / (k_n + n) - b_0 * k_b / (k_b + n);
        let top = num(&s["state"]["eigenvalues"][0][0]);
        let want = rate.max(0.0);
        assert!((top - want).abs() < 1e-9, "n {n}: {top} vs {rate}");
    }
}

#[test]
fn bad_input_is_refused_with_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let source = dir.path().join("source.rhai");
    std::fs::write(
        &source,
        "species(\"u\", #{ kind: \"mobile\", diffusion: \"1.0\", reaction: \"1.0\" });\n",
    )
    .unwrap();
    for (args, why) in [
        (
            vec![
                model("chemotaxis_logistic.rhai"),
                "--plate".into(),
                "circle:5".into(),
                "--scan".into(),
                "zz=1:2".into(),
            ],
            "no parameter `zz`",
        ),
        (
            vec![
                model("chemotaxis_logistic.rhai"),
                "--plate".into(),
                "circle:5".into(),
                "--scan".into(),
                "chi=1".into(),
            ],
            "LOW:HIGH",
        ),
        (
            vec![
                model("chemotaxis_logistic.rhai"),
                "--plate".into(),
                "circle:5".into(),
                "--scan".into(),
                "chi=1:2".into(),
                "--modes".into(),
                "0".into(),
            ],
            "stable at both ends",
        ),
        (
            vec![
                model("chemotaxis_logistic.rhai"),
                "--plate".into(),
                "circle:1".into(),
                "--size".into(),
                "0.5".into(),
                "--modes".into(),
                "400".into(),
            ],
            "refine the mesh",
        ),
        (
            vec![
                source.display().to_string(),
                "--plate".into(),
                "circle:5".into(),
            ],
            "no spatially homogeneous steady state",
        ),
    ] {
        let mut a = vec!["stability"];
        a.extend(args.iter().map(String::as_str));
        let o = agarium(&a);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
        assert!(err.contains(why), "{args:?}: {err}");
    }
}

/// With `-o`, the report, the σ(k²) plot and the fastest plate modes as pictures and .vtu.
#[test]
fn files_of_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("st");
    let o = agarium(&[
        "stability",
        &model("chemotaxis_logistic.rhai"),
        "--plate",
        "circle:12",
        "--size",
        "0.6",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("stationary (Turing-type)"), "{text}");
    for f in [
        "stability.json",
        "dispersion_state1.png",
        "state1_modes.vtu",
    ] {
        assert!(out.join(f).exists(), "{f} missing");
    }
    let pictures = std::fs::read_dir(&out)
        .unwrap()
        .filter(|e| {
            let n = e
                .as_ref()
                .unwrap()
                .file_name()
                .to_string_lossy()
                .to_string();
            n.starts_with("state1_mode") && n.ends_with(".png")
        })
        .count();
    assert!(pictures >= 1);
}

/// A predicted growth rate against the growth `agarium run` measures on the same plate: the
/// lawn of the chemotaxis–logistic model on a 12 × 6 tray, perturbed along the plate mode
/// cos(4π(x + 6)/12) (k² = (π/3)², a Neumann mode of the rectangle) with the eigenvector's
/// ratio v̂/û = 1/(1 + k² + σ), so that only this mode is excited. The amplitude (u_max − 1)
/// between t = 2 and 10 grows at the rate `stability` predicts for that plate mode, within
/// 1 % (measured 0.3 %: BDF2 at dt 0.05 and the mesh's k² error).
#[test]
fn predicted_growth_matches_a_run_on_the_same_plate() {
    let plate = ["--plate", "rect:12,6", "--size", "0.4"];
    let mut args = vec![model("chemotaxis_logistic.rhai")];
    args.extend(plate.iter().map(|s| s.to_string()));
    args.extend(["--modes", "16"].iter().map(|s| s.to_string()));
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    let r = json(&refs);
    let k2 = (std::f64::consts::PI / 3.0).powi(2);
    let lawn = &r["states"][1];
    let predicted = lawn["plate_growth"]
        .as_array()
        .unwrap()
        .iter()
        .find(|g| (num(&g["k2"]) / k2 - 1.0).abs() < 0.02)
        .map(|g| num(&g["sigma"]))
        .unwrap_or_else(|| panic!("no plate mode near k² = {k2}: {}", lawn["plate_growth"]));
    let ratio = 1.0 / (1.0 + k2 + predicted);
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let mode = "cos(4*3.141592653589793*(x+6)/12)";
    let u0 = format!("u=1+1e-5*{mode}");
    let v0 = format!("v=1+{ratio}*1e-5*{mode}");
    let mut run = vec!["run".to_string(), model("chemotaxis_logistic.rhai")];
    run.extend(plate.iter().map(|s| s.to_string()));
    run.extend(
        [
            "--initial",
            &u0,
            "--initial",
            &v0,
            "--end",
            "10",
            "--every",
            "5",
            "--fixed-step",
            "--dt",
            "0.05",
            "-q",
            "-o",
        ]
        .iter()
        .map(|s| s.to_string()),
    );
    run.push(out.display().to_string());
    let refs: Vec<&str> = run.iter().map(String::as_str).collect();
    let o = agarium(&refs);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let table = std::fs::read_to_string(out.join("chemotaxis_logistic_diagnostics.csv")).unwrap();
    let mut lines = table.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let (ti, ui) = (
        head.iter().position(|h| *h == "t").unwrap(),
        head.iter().position(|h| *h == "u_max").unwrap(),
    );
    let rows: Vec<(f64, f64)> = lines
        .map(|l| {
            let c: Vec<&str> = l.split(',').collect();
            (c[ti].parse().unwrap(), c[ui].parse().unwrap())
        })
        .collect();
    let at = |t: f64| {
        rows.iter()
            .min_by(|a, b| (a.0 - t).abs().total_cmp(&(b.0 - t).abs()))
            .map(|&(s, u)| (s, u - 1.0))
            .unwrap()
    };
    let ((t1, a1), (t2, a2)) = (at(2.0), at(10.0));
    let measured = (a2 / a1).ln() / (t2 - t1);
    assert!(
        (measured / predicted - 1.0).abs() < 0.01,
        "measured {measured}, predicted {predicted}"
    );
}
