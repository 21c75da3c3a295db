//! Stable model ids: the same content gives the same id on every run and machine.

mod common;

use std::collections::{HashMap, HashSet};

use common::{study, HEADER};
use specgrid_study::{plan, Plan};

const BODY: &str = r#"
[outcome]
column = "y"
forms = ["level", "log"]
[focus]
column = "x"
forms = ["level", { winsorized = [0.05, 0.95] }]
[[controls]]
name = "first"
role = "optional"
terms = ["a", { product = [{ column = "x" }, { categorical = "g", reference = "north" }] }]
[[controls]]
name = "second"
role = "alternatives"
options = [{ name = "p", terms = ["p"] }, { name = "q", terms = [{ column = "q", form = "log1p" }] }]
[[samples]]
name = "all"
[[samples]]
name = "some"
keep = [{ column = "g", one_of = ["north", "east"] }]
"#;

/// Ids keyed by the model's choice names, which survive reordering of the dimensions.
fn ids_by_choice(p: &Plan) -> HashMap<Vec<(String, String)>, String> {
    p.models
        .iter()
        .map(|m| {
            let mut key: Vec<(String, String)> = p
                .choice_names(m)
                .into_iter()
                .map(|(d, o)| (d.to_string(), o.to_string()))
                .collect();
            key.sort();
            (key, m.id.clone())
        })
        .collect()
}

#[test]
fn ids_are_twelve_hex_digits_unique_and_repeatable() {
    let text = format!("{HEADER}{BODY}");
    let a = plan(&study(&text)).unwrap();
    let b = plan(&study(&text)).unwrap();
    assert_eq!(a.models.len(), 2 * 2 * 2 * 2 * 2);
    let ids: HashSet<&str> = a.models.iter().map(|m| m.id.as_str()).collect();
    assert_eq!(ids.len(), a.models.len());
    for id in &ids {
        assert_eq!(id.len(), 12);
        assert!(id
            .chars()
            .all(|c| c.is_ascii_hexdigit() && !c.is_ascii_uppercase()));
    }
    assert_eq!(ids_by_choice(&a), ids_by_choice(&b));
}

#[test]
fn reordering_blocks_keeps_ids() {
    let text = format!("{HEADER}{BODY}");
    // Swap the two control blocks and the two forms of the outcome.
    let first = "[[controls]]\nname = \"first\"\nrole = \"optional\"\nterms = [\"a\", { product = [{ column = \"x\" }, { categorical = \"g\", reference = \"north\" }] }]\n";
    let second = "[[controls]]\nname = \"second\"\nrole = \"alternatives\"\noptions = [{ name = \"p\", terms = [\"p\"] }, { name = \"q\", terms = [{ column = \"q\", form = \"log1p\" }] }]\n";
    assert!(text.contains(first) && text.contains(second));
    let swapped = text
        .replace(first, "@FIRST@")
        .replace(second, first)
        .replace("@FIRST@", second)
        .replace(
            "forms = [\"level\", \"log\"]",
            "forms = [\"log\", \"level\"]",
        );
    let a = plan(&study(&text)).unwrap();
    let b = plan(&study(&swapped)).unwrap();
    assert_ne!(a.dimensions, b.dimensions, "the reordering took effect");
    assert_eq!(ids_by_choice(&a), ids_by_choice(&b));
}

#[test]
fn product_side_order_does_not_change_the_id() {
    let text = format!("{HEADER}{BODY}");
    let flipped = text.replace(
        "{ product = [{ column = \"x\" }, { categorical = \"g\", reference = \"north\" }] }",
        "{ product = [{ categorical = \"g\", reference = \"north\" }, { column = \"x\" }] }",
    );
    assert_ne!(text, flipped);
    assert_eq!(
        ids_by_choice(&plan(&study(&text)).unwrap()),
        ids_by_choice(&plan(&study(&flipped)).unwrap())
    );
}

#[test]
fn changing_content_changes_the_id() {
    let text = format!("{HEADER}{BODY}");
    let a = ids_by_choice(&plan(&study(&text)).unwrap());
    let changed = ids_by_choice(
        &plan(&study(
            &text.replace("[\"north\", \"east\"]", "[\"north\"]"),
        ))
        .unwrap(),
    );
    let differs = a.iter().filter(|(k, v)| changed[*k] != **v).count();
    // Only the 16 models on sample `some` change.
    assert_eq!(differs, 16);
}

#[test]
fn the_id_is_the_sha256_of_the_documented_canonical_text() {
    // Reference: SHA-256 from Python's standard-library hashlib, run by hand, gave
    // sha256("specgrid-model-v1\noutcome=num(\"y\",level)\nterms=num(\"x\",level);num(\"x\",pow2);
    // num(\"x\",pow3);num(\"x\",pow4);num(\"x\",pow5)\ntracked=<same>\nsample=\"all rows\":\n
    // intercept=true\n")[:12] = 423d072005e0 (see docs/study-file.md, "Model ids").
    let text = format!("{HEADER}[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\nforms = [{{ polynomial = 5 }}]\n");
    let p = plan(&study(&text)).unwrap();
    assert_eq!(p.models.len(), 1);
    assert_eq!(p.models[0].id, "423d072005e0");
}

#[test]
fn choices_that_give_the_same_model_are_refused() {
    // Focus `level` is x; the optional block also adds x, so focus=level with the block in and
    // out are the same regression.
    let text = format!(
        "{HEADER}[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\nforms = [\"level\", \"log\"]\n[[controls]]\nname = \"dup\"\nrole = \"optional\"\nterms = [\"x\"]\n"
    );
    let s = study(&text);
    let problems = plan(&s).unwrap_err();
    assert!(
        problems[0].message.contains("same model"),
        "{}",
        problems[0]
    );
    assert!(
        problems[0].message.contains("focus=level"),
        "{}",
        problems[0]
    );
}
