//! Every way a model file can be wrong gives a typed error with its position.

#![allow(clippy::result_large_err)]

use agarium_scripting::lower::LowerError;
use agarium_scripting::{Model, ModelError, OverrideError, Overrides};

fn load(src: &str) -> Result<Model, ModelError> {
    Model::load("m.rhai", src, &Overrides::new())
}

fn compile(src: &str) -> ModelError {
    match load(src) {
        Ok(m) => match m.compile() {
            Ok(_) => panic!("model compiled but should not"),
            Err(e) => e,
        },
        Err(e) => e,
    }
}

const OK: &str = r#"
param("r", 1.0, #{ min: 0.0, max: 5.0 });
species("u", #{ kind: "mobile", diffusion: 0.1, reaction: "r * u * (1.0 - u)" });
"#;

#[test]
fn valid_model_loads() {
    let m = load(OK).unwrap();
    m.compile().unwrap();
    assert_eq!(m.decl.params[0].value, 1.0);
}

#[test]
fn syntax_error_has_position() {
    let e = load("param(\"r\", 1.0);\nlet x = (1 + ;\n").unwrap_err();
    let ModelError::Syntax { at, .. } = &e else {
        panic!("{e:?}")
    };
    assert_eq!((at.file.as_str(), at.line), ("m.rhai", 2));
    assert!(at.column > 0);
    assert!(e.to_string().starts_with("m.rhai:2:"), "{e}");
}

#[test]
fn unknown_species_or_parameter() {
    let e = compile(r#"species("u", #{ kind: "mobile", diffusion: 0.1, reaction: "k * u" });"#);
    assert!(
        matches!(&e, ModelError::Compile { source: LowerError::UnknownName { name, .. }, .. } if name == "k"),
        "{e}"
    );
    let e = compile(
        "fn f(u, v) { u * v }\nspecies(\"u\", #{ kind: \"mobile\", diffusion: 0.1, reaction: Fn(\"f\") });",
    );
    assert!(
        matches!(&e, ModelError::Compile { source: LowerError::UnknownName { name, .. }, .. } if name == "v"),
        "{e}"
    );
    let e = compile(
        r#"species("u", #{ kind: "mobile", diffusion: 0.1 });
           chemotaxis(#{ cells: "u", signal: "q", potential: "q" });"#,
    );
    assert!(e.to_string().contains("unknown species `q`"), "{e}");
}

#[test]
fn duplicate_names() {
    let e = load("param(\"a\", 1.0);\nparam(\"a\", 2.0);").unwrap_err();
    assert!(
        matches!(&e, ModelError::Duplicate { name, first_line: 1, at } if name == "a" && at.line == 2),
        "{e}"
    );
    let e = load("param(\"u\", 1.0);\nspecies(\"u\", #{ kind: \"immobile\" });").unwrap_err();
    assert!(matches!(&e, ModelError::Duplicate { .. }), "{e}");
    let e = load("species(\"x\", #{ kind: \"immobile\" });").unwrap_err();
    assert!(
        matches!(&e, ModelError::Duplicate { first_line: 0, .. }),
        "{e}"
    );
}

#[test]
fn species_without_kind() {
    let e = load("\n species(\"u\", #{ diffusion: 1.0 });").unwrap_err();
    assert!(
        matches!(&e, ModelError::MissingKind { species, at } if species == "u" && at.line == 2),
        "{e}"
    );
    let e = load("species(\"u\", #{ kind: \"swimming\", diffusion: 1.0 });").unwrap_err();
    assert!(e.to_string().contains("unknown kind"), "{e}");
    let e = load("species(\"u\", #{ kind: \"mobile\", difusion: 1.0 });").unwrap_err();
    assert!(e.to_string().contains("unknown key `difusion`"), "{e}");
}

#[test]
fn negative_diffusion() {
    let e = compile(
        "param(\"d\", -0.5);\nspecies(\"u\", #{ kind: \"mobile\", diffusion: \"d * 2.0\" });",
    );
    assert!(
        matches!(&e, ModelError::BadDiffusion { value, .. } if *value == -1.0),
        "{e}"
    );
    let e = compile("species(\"u\", #{ kind: \"mobile\", diffusion: \"u\" });");
    assert!(e.to_string().contains("unknown name `u`"), "{e}");
}

#[test]
fn unsupported_construct_with_position_and_name() {
    let src = "fn f(u) {\n  let s = 0.0;\n  for i in 0..3 { s += u; }\n  s\n}\nspecies(\"u\", #{ kind: \"mobile\", diffusion: 0.1, reaction: Fn(\"f\") });";
    let e = compile(src);
    let ModelError::Compile {
        at,
        source: LowerError::Unsupported(u),
        ..
    } = &e
    else {
        panic!("{e:?}")
    };
    assert_eq!(u.construct, "for loop");
    assert_eq!((at.line, at.column), (3, 3));
    assert!(e.to_string().starts_with("m.rhai:3:3:"), "{e}");
    for (body, name) in [
        ("let a = [u]; a[0]", "array"),
        ("let s = \"x\"; u", "string"),
        ("let m = #{a: u}; u", "object map"),
        ("while u > 0.0 { }; u", "while/loop"),
        ("u.abs()", "method call"),
    ] {
        let src = format!(
            "fn f(u) {{ {body} }}\nspecies(\"u\", #{{ kind: \"mobile\", diffusion: 0.1, reaction: Fn(\"f\") }});"
        );
        let e = compile(&src);
        assert!(e.to_string().contains(name), "{body}: {e}");
        assert!(e.to_string().starts_with("m.rhai:1:"), "{body}: {e}");
    }
}

#[test]
fn helper_with_loop_is_fine_when_only_top_level_uses_it() {
    let src = "fn total(n) { let s = 0; for i in 0..n { s += i; } s }\nparam(\"k\", total(4));\nspecies(\"u\", #{ kind: \"mobile\", diffusion: 0.1, reaction: \"k * u\" });";
    let m = load(src).unwrap();
    assert_eq!(m.decl.params[0].value, 6.0);
    m.compile().unwrap();
}

#[test]
fn recursion_is_rejected() {
    let src = "fn f(u) { if u > 1.0 { f(u - 1.0) } else { u } }\nspecies(\"u\", #{ kind: \"mobile\", diffusion: 0.1, reaction: Fn(\"f\") });";
    let e = compile(src);
    assert!(
        matches!(&e, ModelError::Compile { source: LowerError::Recursion { function, .. }, .. } if function == "f"),
        "{e}"
    );
    let src = "fn a(u) { b(u) }\nfn b(u) { a(u) * 2.0 }\nspecies(\"u\", #{ kind: \"mobile\", diffusion: 0.1, reaction: Fn(\"a\") });";
    let e = compile(src);
    assert!(e.to_string().contains("a -> b -> a"), "{e}");
}

#[test]
fn runaway_top_level_loop_stops() {
    let e = load("let i = 0;\nloop { i += 1; }").unwrap_err();
    assert!(
        matches!(&e, ModelError::Limit { at, .. } if at.line == 2),
        "{e}"
    );
    assert!(e.to_string().contains("operations"), "{e}");
    let e = load("fn f(n) { f(n + 1) }\nf(0);").unwrap_err();
    assert!(matches!(&e, ModelError::Limit { .. }), "{e}");
    let e = load("let s = \"ab\";\nloop { s += s; }").unwrap_err();
    assert!(matches!(&e, ModelError::Limit { .. }), "{e}");
}

#[test]
fn no_file_access() {
    let e = load("import \"other\" as o;").unwrap_err();
    assert!(
        matches!(e, ModelError::Script { .. } | ModelError::Syntax { .. }),
        "{e}"
    );
    let e = load("eval(\"1\");").unwrap_err();
    assert!(
        matches!(e, ModelError::Script { .. } | ModelError::Syntax { .. }),
        "{e}"
    );
}

#[test]
fn bad_overrides() {
    let unknown = Overrides::parse(&["q=1"]).unwrap();
    let e = Model::load("m.rhai", OK, &unknown).err().unwrap();
    assert!(
        matches!(&e, ModelError::Override(OverrideError::UnknownName { name, .. }) if name == "q"),
        "{e}"
    );
    assert!(matches!(
        Overrides::parse(&["r=fast"]),
        Err(OverrideError::NotANumber { .. })
    ));
    let out = Overrides::parse(&["r=7"]).unwrap();
    let e = Model::load("m.rhai", OK, &out).err().unwrap();
    assert!(
        matches!(&e, ModelError::OutOfBounds { value, max, .. } if *value == 7.0 && *max == 5.0),
        "{e}"
    );
    let fine = Overrides::parse(&["r=2.5"]).unwrap();
    let m = Model::load("m.rhai", OK, &fine).unwrap();
    assert_eq!(m.decl.params[0].value, 2.5);
    assert_eq!(m.decl.params[0].default, 1.0);
}

#[test]
fn type_errors_are_clear() {
    let e = compile(r#"species("u", #{ kind: "mobile", diffusion: 0.1, reaction: "u > 1.0" });"#);
    assert!(e.to_string().contains("boolean"), "{e}");
    let e =
        compile(r#"species("u", #{ kind: "mobile", diffusion: 0.1, reaction: "u * (1 / 0)" });"#);
    assert!(e.to_string().contains("division by zero"), "{e}");
}

/// Motile cells are declared with the biological word; the earlier `mobile` still works and
/// means the same.
#[test]
fn motile_and_its_earlier_spelling_mobile_are_one_kind() {
    for kind in ["motile", "mobile"] {
        let m = load(&format!(
            "species(\"u\", #{{ kind: \"{kind}\", diffusion: 0.5, reaction: \"u\" }});"
        ))
        .unwrap_or_else(|e| panic!("{kind}: {e}"));
        let p = m.compile().unwrap().to_problem();
        assert_eq!(
            p.species[0].kind,
            agarium_core::kernel::SpeciesKind::Mobile { diffusion: 0.5 }
        );
    }
    let e = load("species(\"u\", #{ kind: \"swimming\", diffusion: 1.0 });").unwrap_err();
    assert!(e.to_string().contains("\"motile\""), "{e}");
}

/// Evaluates the compiled reaction of a one-species model at u = 0.5, x = y = 0, t = 0.
fn reaction_at_half(src: &str) -> f64 {
    use agarium_core::kernel::{BatchKernel, KernelInput, Scratch};
    let c = load(src).unwrap().compile().unwrap();
    let u = [0.5];
    let refs: Vec<&[f64]> = vec![&u];
    let input = KernelInput {
        species: &refs,
        x: &[0.0],
        y: &[0.0],
        t: 0.0,
    };
    let mut out = vec![0.0; c.reactions.n_outputs()];
    c.reactions
        .eval(&input, &mut out, &mut Scratch::new())
        .unwrap();
    out[0]
}

/// Users write `sqrt(6)`: an integer where a float is meant is that float (the script
/// engine alone would refuse it), with the same value as `sqrt(6.0)`.
#[test]
fn integer_arguments_of_float_functions_are_floats() {
    let int = reaction_at_half(
        r#"species("u", #{ kind: "motile", diffusion: 0.1, reaction: "sqrt(6) * exp(2) * u" });"#,
    );
    let float = reaction_at_half(
        r#"species("u", #{ kind: "motile", diffusion: 0.1, reaction: "sqrt(6.0) * exp(2.0) * u" });"#,
    );
    assert_eq!(int.to_bits(), float.to_bits());
    assert_eq!(int, 6f64.sqrt() * 2f64.exp() * 0.5);
}

/// A byte-order mark at the start of a file is not an invisible character error.
#[test]
fn a_byte_order_mark_is_accepted() {
    let m = load(&format!("\u{feff}{OK}")).unwrap();
    m.compile().unwrap();
    // Positions on the first line still count from the first visible character.
    let e =
        load("\u{feff}species(\"u\", #{ kind: \"motile\", diffusion: 1.0, bad: 1 });").unwrap_err();
    assert!(e.to_string().starts_with("m.rhai:1:1:"), "{e}");
}

/// Bounds the wrong way round are named as such, not as a value outside them.
#[test]
fn min_above_max_is_named() {
    let e = load(r#"param("k", 1.0, #{ min: 1.0, max: 0.0 });"#).unwrap_err();
    let text = e.to_string();
    assert!(text.contains("min 1 is above max 0"), "{text}");
    assert!(!text.contains("outside"), "{text}");
}

/// The unknown-name message says which names that kind of term may use, so it never lists
/// the very name it refuses.
#[test]
fn unknown_names_say_what_the_term_may_use() {
    let e = compile(r#"species("u", #{ kind: "motile", diffusion: "1.0 + t" });"#);
    let text = e.to_string();
    assert!(text.contains("unknown name `t`"), "{text}");
    assert!(
        text.contains("a diffusion coefficient is a constant"),
        "{text}"
    );
    assert!(text.contains("not species, x, y or t"), "{text}");
    let e = compile(r#"species("u", #{ kind: "motile", diffusion: 1.0, initial: "u + x" });"#);
    assert!(e.to_string().contains("an initial value may use"), "{e}");
    let e = compile(r#"species("u", #{ kind: "motile", diffusion: 1.0, reaction: "q * u" });"#);
    assert!(
        e.to_string().contains("species, parameters, x, y and t"),
        "{e}"
    );
}
