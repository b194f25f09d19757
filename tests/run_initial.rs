//! Initial-condition overrides: `[initial]` and `[[inoculum]]` in run files, `--initial` and
//! `--inoculum` on the command line. The amount of cells placed is checked against the
//! integrals of the spot profiles, and mistakes are reported where they were written.

mod common;

use std::f64::consts::PI;
use std::path::Path;

use common::{agarium, diagnostics, manifest};

const MODEL: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");

fn write(dir: &Path, text: &str) -> String {
    let path = dir.join("spots.toml");
    std::fs::write(&path, format!("model = \"{MODEL}\"\n{text}")).unwrap();
    path.display().to_string()
}

/// The t = 0 row of the diagnostics table as (column, value) pairs.
fn first_row(out: &Path) -> Vec<(String, f64)> {
    let (header, rows) = diagnostics(out);
    header.into_iter().zip(rows[0].iter().copied()).collect()
}

fn column(row: &[(String, f64)], name: &str) -> f64 {
    row.iter().find(|(n, _)| n == name).unwrap().1
}

const PLATE: &str = r#"end = 0.1
every = 0.1
out = "spots"

[plate]
outer = { shape = "circle", radius = 6.0 }

[mesh]
size = 0.5
grading = 0.05
"#;

#[test]
fn run_file_spots_replace_the_models_initial_condition() {
    let dir = tempfile::tempdir().unwrap();
    let file = write(
        dir.path(),
        &format!(
            r#"{PLATE}
[initial]
n = "0.5 + 0.0 * x"

[[inoculum]]
species = "u"
at = [-2.0, 0.0]
radius = 0.4
level = 0.8
profile = "gaussian"

[[inoculum]]
species = "u"
at = [2.5, 1.0]
radius = 0.3
level = 2.0
profile = "gaussian"
"#
        ),
    );
    let o = agarium(&["run", "--run-file", &file, "-q"], dir.path());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = dir.path().join("spots");
    let row = first_row(&out);
    // ∫ A·exp(−r²/2σ²) over the plane is 2πσ²A (common practice); the spots lie well
    // inside the plate, so the plate's share is exact to e^{−(distance to rim)²/2σ²}. The
    // mesh is refined to σ/5 at each spot and graded slowly (0.05), so h ≈ 0.25σ where the
    // mass lies (r ≈ σ). The nodal quadrature error then measured 0.35 % for the σ = 0.4
    // spot alone (2.4 % and 0.77 % with gradings 0.25 and 0.1: second order in h).
    let want_u = 2.0 * PI * (0.4f64.powi(2) * 0.8 + 0.3f64.powi(2) * 2.0);
    let got_u = column(&row, "u_integral");
    assert!(
        (got_u - want_u).abs() < 0.01 * want_u,
        "∫u = {got_u}, expected {want_u}"
    );
    // The constant nutrient integrates exactly (lumped mass sums to the mesh area, which is
    // within 1e-3 of π·6² at this boundary resolution).
    let want_n = 0.5 * PI * 36.0;
    let got_n = column(&row, "n_integral");
    assert!((got_n - want_n).abs() < 2e-3 * want_n, "∫n = {got_n}");
    assert_eq!(column(&row, "n_min"), 0.5);
    let m = manifest(&out);
    assert!(m["initial"]["u"].as_str().unwrap().contains("bump"), "{m}");
    assert_eq!(m["initial"]["n"], "(0.5 + 0.0 * x)");
    // A refinement spot was added at each inoculum (size σ/5).
    let spots = m["mesh"]["spots"].as_array().unwrap();
    assert_eq!(spots.len(), 2, "{spots:?}");
    assert!((spots[0]["size"].as_f64().unwrap() - 0.08).abs() < 1e-12);
}

#[test]
fn command_line_spots_override_the_file_and_discs_hold_their_amount() {
    let dir = tempfile::tempdir().unwrap();
    let file = write(
        dir.path(),
        &format!("{PLATE}\n[[inoculum]]\nspecies = \"u\"\nat = [0.0, 0.0]\nradius = 1.0\n"),
    );
    let o = agarium(
        &[
            "run",
            "--run-file",
            &file,
            "--inoculum",
            "u@-1.5,0.5,1.0,0.6",
            "--initial",
            "n=1.5",
            "-q",
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = dir.path().join("spots");
    let row = first_row(&out);
    // A disc of radius R with a tanh edge of width ε = R/5: by the Sommerfeld expansion of
    // ∫2πρ·½(1 − tanh((ρ − R)/ε))dρ its integral is πR²(1 + π²ε²/(12R²)) up to
    // exponentially small terms (common practice); ×0.6. Nodal quadrature with h = R/5
    // across an edge of width R/5 is good to about 2 %.
    let want = 0.6 * PI * (1.0 + PI * PI / 300.0);
    let got = column(&row, "u_integral");
    assert!(
        (got - want).abs() < 0.02 * want,
        "∫u = {got}, expected {want}"
    );
    // The command line's spot replaced the file's: the file's (level 1 at the origin)
    // would have made the maximum 1.
    assert!(column(&row, "u_max") <= 0.6 && column(&row, "u_max") > 0.59);
    assert_eq!(column(&row, "n_max"), 1.5);
    let m = manifest(&out);
    let u = m["initial"]["u"].as_str().unwrap();
    assert!(
        u.contains("soft_disc") && !u.contains("(0.00000000000000000e0)"),
        "{u}"
    );
}

#[test]
fn mistakes_in_initial_overrides_are_reported_where_they_were_written() {
    let dir = tempfile::tempdir().unwrap();
    let cases: [(&str, &[&str], &str); 6] = [
        (
            "[initial]\nu = \"bump(x, y, 0.0)\"\n",
            &[],
            "spots.toml:14:5",
        ),
        (
            "[initial]\nbacteria = \"1.0\"\n",
            &[],
            "unknown species `bacteria`",
        ),
        (
            "[[inoculum]]\nspecies = \"u\"\nat = [40.0, 0.0]\nradius = 1.0\n",
            &[],
            "spots.toml:13:1: the inoculum of `u` at (40, 0) lies outside the plate",
        ),
        (
            "[[inoculum]]\nspecies = \"u\"\nat = [0.0, 0.0]\nradius = 0.0\n",
            &[],
            "spots.toml:13:1: the radius must be a positive number",
        ),
        ("", &["--inoculum", "u@0,0"], "expected SPECIES@X,Y,RADIUS"),
        ("", &["--initial", "u=exp(", "-q"], "--initial u"),
    ];
    for (extra, cli, expect) in cases {
        let file = write(dir.path(), &format!("{PLATE}\n{extra}"));
        let mut args = vec!["run", "--run-file", &file];
        args.extend_from_slice(cli);
        let o = agarium(&args, dir.path());
        let err = String::from_utf8_lossy(&o.stderr).into_owned();
        assert_eq!(o.status.code(), Some(2), "{extra} {cli:?}: {err}");
        assert!(err.contains(expect), "{extra} {cli:?}: {err}");
        assert!(
            !dir.path().join("spots").exists(),
            "{extra}: output written"
        );
    }
}

#[test]
fn pictures_at_chosen_times_only() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("p");
    let o = agarium(
        &[
            "run",
            MODEL,
            "--plate",
            "circle:4",
            "--size",
            "0.5",
            "--end",
            "1",
            "--every",
            "0.5",
            "--picture",
            "u",
            "--picture-at",
            "0.25,1",
            "-q",
            "-o",
            out.to_str().unwrap(),
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut pngs: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with("colony_4species_u_"))
        .collect();
    pngs.sort();
    assert_eq!(
        pngs,
        ["colony_4species_u_0000.png", "colony_4species_u_0001.png"]
    );
    // The states still follow --every (0, 0.5, 1), and the picture stop at 0.25 adds none.
    let pvd = std::fs::read_to_string(out.join("colony_4species.pvd")).unwrap();
    assert_eq!(pvd.matches("<DataSet").count(), 3, "{pvd}");
    assert!(!out.join("colony_4species_0003.vtu").exists());
    let m = manifest(&out);
    assert_eq!(m["picture_times"], serde_json::json!([0.25, 1.0]));
    // The CSV has a row at exactly t = 0.25 (the run stopped there to draw).
    let csv = std::fs::read_to_string(out.join("colony_4species_diagnostics.csv")).unwrap();
    assert!(csv
        .lines()
        .skip(1)
        .any(|l| l.split(',').next().unwrap().parse::<f64>().unwrap() == 0.25));

    for (bad, expect) in [
        (
            vec!["--picture", "u", "--picture-at", "2"],
            "between 0 and the end time",
        ),
        (vec!["--picture-at", "0.5"], "no field to draw"),
    ] {
        let mut args = vec![
            "run", MODEL, "--plate", "circle:4", "--size", "0.5", "--end", "1", "-o", "bad",
        ];
        args.extend(bad);
        let o = agarium(&args, dir.path());
        let err = String::from_utf8_lossy(&o.stderr).into_owned();
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains(expect), "{err}");
        assert!(!dir.path().join("bad").exists());
    }
}
