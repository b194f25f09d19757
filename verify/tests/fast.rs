//! The fast verification set passes, and checks fail when the discretisation is broken.

use agarium_core::time::Scheme;
use agarium_verify::mms::{bdf_time_order, time_order};
use agarium_verify::{select, Check, Context, Criterion, Faults, Row};

fn check(name: &str) -> Check {
    let found = select(Some(name));
    assert_eq!(found.len(), 1, "no unique check `{name}`");
    found[0]
}

fn table(rows: &[Row]) -> String {
    rows.iter()
        .map(|r| {
            format!(
                "{} | {} | expected {} | obtained {} | tol {} | {}",
                r.check,
                r.source,
                r.expected,
                r.obtained,
                r.tolerance,
                if r.pass { "pass" } else { "FAIL" }
            )
        })
        .collect::<Vec<_>>()
        .join("\n")
}

fn assert_passes(name: &str) {
    let rows = check(name).rows(&Context::fast());
    eprintln!("{}", table(&rows));
    assert!(!rows.is_empty());
    assert!(rows.iter().all(|r| r.pass), "{name}:\n{}", table(&rows));
}

/// Runs `name` with `faults` and insists that some row fails.
fn assert_fails(name: &str, faults: Faults) {
    let ctx = Context {
        faults,
        ..Context::fast()
    };
    let rows = check(name).rows(&ctx);
    eprintln!("{}", table(&rows));
    assert!(
        rows.iter().any(|r| !r.pass),
        "{name} passed with {faults:?}:\n{}",
        table(&rows)
    );
}

fn scaled_diffusion(f: f64) -> Faults {
    Faults {
        diffusion: f,
        ..Faults::default()
    }
}

fn scaled_chemotaxis(f: f64) -> Faults {
    Faults {
        chemotaxis: f,
        ..Faults::default()
    }
}

#[test]
fn every_check_is_registered_once_in_the_fast_tests() {
    let names: Vec<&str> = select(None).iter().map(|c| c.name).collect();
    assert_eq!(
        names,
        [
            "mms-space-square",
            "mms-space-disk",
            "mms-time",
            "eigen-disk",
            "eigen-rectangle",
            "fisher-kpp",
            "instability",
            "critical-mass",
            "nutrient",
            "blowup-data"
        ]
    );
}

#[test]
fn mms_space_square_passes() {
    assert_passes("mms-space-square");
}

#[test]
fn mms_space_disk_passes() {
    assert_passes("mms-space-disk");
}

#[test]
fn mms_time_passes() {
    assert_passes("mms-time");
}

#[test]
fn eigen_disk_passes() {
    assert_passes("eigen-disk");
}

#[test]
fn eigen_rectangle_passes() {
    assert_passes("eigen-rectangle");
}

#[test]
fn fisher_kpp_passes() {
    assert_passes("fisher-kpp");
}

#[test]
fn instability_passes() {
    assert_passes("instability");
}

#[test]
fn critical_mass_passes() {
    assert_passes("critical-mass");
}

#[test]
fn nutrient_passes() {
    assert_passes("nutrient");
}

#[test]
fn blowup_data_passes() {
    assert_passes("blowup-data");
}

// Each check family fails when the solver is handed a wrong coefficient (the expected values
// stay those of the right one).

#[test]
fn a_wrong_diffusion_coefficient_fails_the_manufactured_solutions() {
    assert_fails("mms-space-square", scaled_diffusion(1.1));
    assert_fails("mms-space-disk", scaled_diffusion(0.9));
}

#[test]
fn a_wrong_chemotactic_sensitivity_fails_the_manufactured_solution() {
    assert_fails("mms-space-square", scaled_chemotaxis(1.1));
}

#[test]
fn a_wrong_diffusion_coefficient_fails_the_eigenvalues() {
    assert_fails("eigen-disk", scaled_diffusion(1.02));
    assert_fails("eigen-rectangle", scaled_diffusion(0.98));
}

#[test]
fn a_wrong_diffusion_coefficient_fails_the_front_speed() {
    // Speed 2√(1.1) = 2.098 instead of 2.
    assert_fails("fisher-kpp", scaled_diffusion(1.1));
}

#[test]
fn a_wrong_sensitivity_fails_the_instability_rate() {
    assert_fails("instability", scaled_chemotaxis(1.05));
}

#[test]
fn halving_the_sensitivity_removes_the_blow_up() {
    // 10π/χ with χ/2: the mass is below the critical mass of the solved system.
    assert_fails("critical-mass", scaled_chemotaxis(0.5));
}

#[test]
fn a_wrong_reaction_rate_fails_the_ode_comparison() {
    assert_fails(
        "nutrient",
        Faults {
            reaction: 1.01,
            ..Faults::default()
        },
    );
}

#[test]
fn without_chemotaxis_the_blow_up_data_do_not_concentrate() {
    assert_fails("blowup-data", scaled_chemotaxis(0.0));
}

#[test]
fn bdf_held_at_three_does_not_pass_as_fourth_order() {
    let p = bdf_time_order(&Context::fast(), 3, 0.1, 0.05).expect("runs");
    assert!((p - 4.0).abs() > 0.15, "BDF3 observed {p}");
}

#[test]
fn backward_euler_does_not_pass_as_second_order() {
    let p = time_order(&Context::fast(), Scheme::BackwardEuler, 0.1, 0.05).expect("runs");
    let row = Row::value(
        "BE claimed second order",
        "test",
        Criterion::Abs {
            expected: 2.0,
            tol: 0.15,
        },
        p,
    );
    assert!(!row.pass, "backward Euler measured order {p}");
}
