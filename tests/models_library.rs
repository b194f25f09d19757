//! The model library in `models/`: every file passes `agarium check`, opens with a header that
//! names its source, its expected properties and every parameter, and the models added with
//! the library run briefly keeping their densities non-negative and their declared conserved
//! integrals constant.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The files of the library; each must exist (the list guards against a file silently missing).
const LIBRARY: [&str; 11] = [
    "chemotaxis_bistable.rhai",
    "chemotaxis_logistic.rhai",
    "colony_4species.rhai",
    "colony_crowded.rhai",
    "colony_quasi_steady.rhai",
    "fisher_kpp.rhai",
    "keller_segel.rhai",
    "keller_segel_quasi_steady.rhai",
    "nutrient_fronts.rhai",
    "volume_filling.rhai",
    "README.md",
];

fn agarium(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .output()
        .expect("run agarium")
}

fn models_dir() -> PathBuf {
    [env!("CARGO_MANIFEST_DIR"), "models"].iter().collect()
}

/// Every `models/*.rhai`, sorted.
fn model_files() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(models_dir())
        .expect("read models/")
        .map(|e| e.expect("dir entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "rhai"))
        .collect();
    v.sort();
    v
}

/// The opening comment block: the leading lines that start with `//`.
fn header(text: &str) -> String {
    text.lines()
        .take_while(|l| l.trim_start().starts_with("//"))
        .collect::<Vec<_>>()
        .join("\n")
}

/// The declared parameters: the name of every `param("NAME", ...)` call with the text of the
/// call up to its closing `);`.
fn params(text: &str) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let mut rest = text;
    while let Some(i) = rest.find("param(\"") {
        let after = &rest[i + "param(\"".len()..];
        let name_end = after.find('"').expect("closing quote of a parameter name");
        let call_end = after.find(");").expect("end of a param call");
        out.push((after[..name_end].to_string(), after[..call_end].to_string()));
        rest = &after[call_end..];
    }
    out
}

/// Whether `word` occurs in `text` as a whole identifier.
fn has_word(text: &str, word: &str) -> bool {
    let ident = |c: char| c.is_alphanumeric() || c == '_';
    text.match_indices(word).any(|(i, _)| {
        let before = text[..i].chars().next_back();
        let after = text[i + word.len()..].chars().next();
        !before.is_some_and(ident) && !after.is_some_and(ident)
    })
}

#[test]
fn the_library_is_complete() {
    for f in LIBRARY {
        assert!(models_dir().join(f).is_file(), "models/{f} is missing");
    }
    assert!(model_files().len() >= LIBRARY.len() - 1);
}

#[test]
fn every_model_passes_check_without_warnings() {
    let files = model_files();
    assert!(!files.is_empty());
    for m in files {
        let o = agarium(&["check", m.to_str().unwrap()]);
        let out = String::from_utf8_lossy(&o.stdout);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(0), "{}: {out}\n{err}", m.display());
        assert!(out.contains("ok: "), "{}: {out}", m.display());
        assert!(!out.contains("warning:"), "{}: {out}", m.display());
        assert!(out.contains("(0 warning(s))"), "{}: {out}", m.display());
    }
}

/// The header convention of the library: a `Source:` line, an `Expected properties` section,
/// the phrase "invented demo values", and every parameter named in the header and given a
/// unit in its declaration.
#[test]
fn every_model_documents_source_properties_and_parameters() {
    for m in model_files() {
        let text = std::fs::read_to_string(&m).unwrap();
        let head = header(&text);
        let name = m.display();
        assert!(head.lines().count() >= 10, "{name}: header too short");
        assert!(
            head.lines().any(|l| l.contains("Source:")),
            "{name}: no `Source:` line in the header"
        );
        assert!(
            head.contains("Expected properties"),
            "{name}: no `Expected properties` in the header"
        );
        assert!(
            head.contains("invented demo values"),
            "{name}: the header does not say the values are invented demo values"
        );
        let ps = params(&text);
        assert!(!ps.is_empty(), "{name}: no parameters found");
        for (p, call) in ps {
            assert!(
                has_word(&head, &p),
                "{name}: parameter `{p}` not in the header"
            );
            assert!(
                call.contains("unit:"),
                "{name}: parameter `{p}` has no unit"
            );
        }
    }
}

#[test]
fn header_helpers_see_what_they_should() {
    let text = "// a b_0\n// Source: x\nparam(\"b_0\", 1.0, #{ unit: \"1\" });\n// late\n\
                param(\"k\", 2.0);";
    assert_eq!(header(text), "// a b_0\n// Source: x");
    let ps = params(text);
    assert_eq!(ps.len(), 2);
    assert_eq!(ps[0].0, "b_0");
    assert!(ps[0].1.contains("unit:"));
    assert_eq!(ps[1].0, "k");
    assert!(!ps[1].1.contains("unit:"));
    assert!(has_word("x b_0 y", "b_0"));
    assert!(!has_word("x b_00 y", "b_0"));
    assert!(!has_word("kb_0", "b_0"));
}

/// The diagnostics table of a run: column name to values.
fn diagnostics(dir: &Path, stem: &str) -> BTreeMap<String, Vec<f64>> {
    let path = dir.join(format!("{stem}_diagnostics.csv"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path:?}: {e}"));
    let mut lines = text.lines();
    let names: Vec<String> = lines
        .next()
        .expect("header row")
        .split(',')
        .map(str::to_string)
        .collect();
    let mut cols: BTreeMap<String, Vec<f64>> =
        names.iter().map(|n| (n.clone(), Vec::new())).collect();
    for line in lines {
        let vals: Vec<&str> = line.split(',').collect();
        assert_eq!(vals.len(), names.len(), "{path:?}: ragged row {line}");
        for (n, v) in names.iter().zip(vals) {
            cols.get_mut(n).unwrap().push(v.parse().expect("a number"));
        }
    }
    cols
}

/// Runs `model` briefly on a small disc and checks the diagnostics: every species' minimum
/// stays above −1e-9 × its maximum, and the drift of each conserved integral stays below 1e-8.
fn short_run(
    model: &str,
    species: &[&str],
    conserved: &[&str],
    extra: &[&str],
) -> BTreeMap<String, Vec<f64>> {
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join("out");
    let path = models_dir().join(model);
    let mut args = vec![
        "run",
        path.to_str().unwrap(),
        "--plate",
        "circle:4",
        "--size",
        "0.4",
        "--every",
        "1",
        "-q",
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = agarium(&args);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{model}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let stem = model.trim_end_matches(".rhai");
    let cols = diagnostics(&out, stem);
    assert!(
        cols["t"].len() > 5,
        "{model}: only {} rows",
        cols["t"].len()
    );
    for s in species {
        let min = &cols[&format!("{s}_min")];
        let max = &cols[&format!("{s}_max")];
        let top = max.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let low = min.iter().fold(f64::INFINITY, |m, v| m.min(*v));
        assert!(top > 0.0, "{model}: {s} is identically zero");
        assert!(
            low >= -1e-9 * top,
            "{model}: {s} min {low:.3e}, max {top:.3e}"
        );
    }
    let drifts: Vec<&String> = cols.keys().filter(|k| k.ends_with("_drift")).collect();
    assert_eq!(
        drifts.len(),
        conserved.len(),
        "{model}: drift columns {drifts:?}"
    );
    for c in conserved {
        let d = &cols[&format!("{c}_drift")];
        let worst = d.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        assert!(worst < 1e-8, "{model}: {c} drift {worst:.3e}");
    }
    cols
}

#[test]
fn keller_segel_runs_positive_and_conservative() {
    short_run(
        "keller_segel.rhai",
        &["u", "c"],
        &["cells"],
        &["--end", "1"],
    );
}

#[test]
fn keller_segel_quasi_steady_runs_positive_and_conservative() {
    short_run(
        "keller_segel_quasi_steady.rhai",
        &["u", "c"],
        &["cells"],
        &["--end", "1"],
    );
}

/// Above the critical mass 8π D_u D_c / (chi alpha) (25.1 with the defaults) a concentrated
/// spot collapses: the run ends with the blow-up verdict (exit 3); the default mass 10 (below
/// 4π) reached its end time in the test above.
#[test]
fn keller_segel_quasi_steady_blows_up_above_the_critical_mass() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = models_dir().join("keller_segel_quasi_steady.rhai");
    let out = dir.path().join("out");
    let o = agarium(&[
        "run",
        path.to_str().unwrap(),
        "--plate",
        "circle:4",
        "--size",
        "0.4",
        "--set",
        "mass=40",
        "--set",
        "width=0.3",
        "--end",
        "2",
        "-q",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(
        o.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
}

#[test]
fn chemotaxis_logistic_runs_positive() {
    short_run(
        "chemotaxis_logistic.rhai",
        &["u", "v"],
        &[],
        &["--end", "5", "--set", "noise=0.2"],
    );
}

#[test]
fn chemotaxis_bistable_runs_positive() {
    short_run(
        "chemotaxis_bistable.rhai",
        &["u", "v"],
        &[],
        &["--end", "3", "--set", "radius=2"],
    );
}

/// The crowded colony keeps 0 ≤ u ≤ u_pack (= 1) even with chemotaxis strong enough to
/// gather the inoculum into an aggregate: growth and the chemotactic flux vanish at u_pack.
#[test]
fn colony_crowded_stays_below_the_packing_density() {
    let cols = short_run(
        "colony_crowded.rhai",
        &["u", "c", "n", "w"],
        &["biomass_and_food"],
        &["--end", "4", "--set", "chi_0=15"],
    );
    let top = cols["u_max"].iter().fold(0.0f64, |m, v| m.max(*v));
    assert!(top > 0.5, "u never gathered: max {top}");
    assert!(top <= 1.0 + 1e-9, "u above the packing density: {top}");
}

#[test]
fn fisher_kpp_runs_positive() {
    short_run("fisher_kpp.rhai", &["u"], &[], &["--end", "3"]);
}

#[test]
fn nutrient_fronts_runs_positive_and_conservative() {
    short_run(
        "nutrient_fronts.rhai",
        &["u", "n"],
        &["biomass_and_food"],
        &["--end", "3"],
    );
}

/// The alternative sensitivities of the four-species models run as well.
#[test]
fn four_species_alternative_sensitivities_run() {
    short_run(
        "colony_4species.rhai",
        &["u", "c", "n", "w"],
        &["biomass_and_food"],
        &["--end", "2", "--set", "sensitivity=1"],
    );
    short_run(
        "colony_quasi_steady.rhai",
        &["u", "c", "n", "w"],
        &["conserved_mix"],
        &["--end", "2", "--set", "sensitivity=0"],
    );
}
