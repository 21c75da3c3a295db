//! `absorb` and `weights` terms: read from control blocks, planned without an intercept when
//! effects are absorbed, part of the model id, and refused where they make no sense.

mod common;

use common::{problems, study, HEADER};
use specgrid_study::{plan, Term, WeightKind};

const DECISIONS: &str = "[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n";

#[test]
fn absorbed_effects_and_weights_are_planned() {
    let s = study(&format!(
        "{HEADER}{DECISIONS}[[controls]]\nname = \"effects\"\nrole = \"alternatives\"\ninclude_none = true\noptions = [{{ name = \"village\", terms = [{{ absorb = \"village\" }}] }}, {{ name = \"village and season\", terms = [{{ absorb = \"village\" }}, {{ absorb = \"season\" }}] }}]\n[[controls]]\nname = \"weights\"\nrole = \"optional\"\nterms = [{{ weights = \"area\", kind = \"frequency\" }}]\n"
    ));
    let p = plan(&s).unwrap();
    assert_eq!(p.models.len(), 6);
    for m in &p.models {
        let absorbs = m
            .terms
            .iter()
            .any(|&t| matches!(p.terms[t], Term::Absorbed { .. }));
        assert_eq!(m.intercept, !absorbs, "no intercept exactly when absorbing");
    }
    assert!(p.terms.contains(&Term::Weights {
        column: "area".into(),
        kind: WeightKind::Frequency
    }));
    // Distinct settings give distinct ids.
    let mut ids: Vec<&str> = p.models.iter().map(|m| m.id.as_str()).collect();
    ids.sort_unstable();
    ids.dedup();
    assert_eq!(ids.len(), 6);
}

#[test]
fn misplaced_settings_are_positioned_problems() {
    let text = format!(
        "{HEADER}[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\nalso_track = [{{ absorb = \"g\" }}]\n[[controls]]\nname = \"c\"\nrole = \"optional\"\nterms = [{{ product = [\"x\", {{ weights = \"w\" }}] }}, {{ weights = \"w\", kind = \"often\" }}, {{ categorical = \"g\", kind = \"analytic\" }}]\n"
    );
    let all = problems(&text);
    let find = |needle: &str| {
        all.iter()
            .find(|p| p.message.contains(needle))
            .unwrap_or_else(|| panic!("no problem mentioning {needle:?} in {all:?}"))
    };
    assert_eq!(find("`also_track` lists absorbed").line, 9);
    let product = find("cannot enter a product");
    assert_eq!(product.line, 13);
    let kind = find("unknown weights kind `often`");
    assert!(
        kind.to_string().contains("did you mean `frequency`?")
            || kind.to_string().contains("`analytic`"),
        "{kind}"
    );
    find("`kind` applies only to a `weights` term");
}

#[test]
fn two_weights_in_one_model_are_refused() {
    let s = study(&format!(
        "{HEADER}{DECISIONS}[[controls]]\nname = \"a\"\nrole = \"optional\"\nterms = [{{ weights = \"w1\" }}]\n[[controls]]\nname = \"b\"\nrole = \"optional\"\nterms = [{{ weights = \"w2\" }}]\n"
    ));
    let problems = plan(&s).unwrap_err();
    assert!(
        problems[0].message.contains("two weights columns"),
        "{problems:?}"
    );
}
