//! A study with a `role = "pick"` block, run end to end, gives the same models and the same
//! numbers, to the bit, as the study that lists the same sets by hand as an alternatives block
//! (docs/study-file.md, "Pick blocks": the two are the same grid). The data are invented
//! (smooth functions of the row number) and only ever compared with themselves.

mod common;

use std::collections::HashMap;
use std::fmt::Write;

use common::{floats, read_csv, run_study, strings, text};

const CANDIDATES: usize = 6;

/// 40 rows: outcome y, focus x, an always-in control a, candidates m1…m6 and a row group.
fn write_data(path: &std::path::Path) {
    let mut csv = String::from("y,x,a");
    for j in 1..=CANDIDATES {
        write!(csv, ",m{j}").unwrap();
    }
    csv.push_str(",group\n");
    for i in 0..40 {
        let t = i as f64;
        let x = (0.37 * t).sin() + 0.05 * t;
        let a = (0.91 * t).cos();
        let ms: Vec<f64> = (1..=CANDIDATES)
            .map(|j| (0.13 * t * j as f64 + j as f64).sin() + 0.2 * x)
            .collect();
        let y = 1.5 + 0.8 * x - 0.3 * a + 0.4 * ms[1] - 0.2 * ms[4] + 0.3 * (2.3 * t).sin();
        write!(csv, "{y:.6},{x:.6},{a:.6}").unwrap();
        for m in &ms {
            write!(csv, ",{m:.6}").unwrap();
        }
        writeln!(csv, ",{}", i % 4).unwrap();
    }
    std::fs::write(path, csv).unwrap();
}

/// The study with the given control block text.
fn study(block: &str) -> String {
    format!(
        "[study]\ntitle = \"pick versus alternatives\"\ndata = \"rows.csv\"\n\
         [outcome]\ncolumn = \"y\"\nforms = [\"level\", \"asinh\"]\n[focus]\ncolumn = \"x\"\n\
         [[controls]]\nname = \"always in\"\nrole = \"always\"\nterms = [\"a\"]\n\
         [[controls]]\nname = \"candidates\"\n{block}\n\
         [[samples]]\nname = \"all rows\"\n[[samples]]\nname = \"no group 3\"\n\
         keep = [{{ column = \"group\", not_equals = 3 }}]\n\
         [errors]\nchoices = [\"classical\", \"hc1\", {{ cluster = \"group\" }}]\n"
    )
}

/// Every k-set of m1…m6 in lexicographic order, as (name, quoted terms).
fn sets(k: usize) -> Vec<(String, String)> {
    fn from(start: usize, k: usize) -> Vec<Vec<usize>> {
        if k == 0 {
            return vec![vec![]];
        }
        (start..CANDIDATES)
            .flat_map(|f| {
                from(f + 1, k - 1).into_iter().map(move |rest| {
                    let mut s = vec![f + 1];
                    s.extend(rest);
                    s
                })
            })
            .collect()
    }
    from(0, k)
        .into_iter()
        .map(|s| {
            let names: Vec<String> = s.iter().map(|j| format!("m{j}")).collect();
            let quoted: Vec<String> = names.iter().map(|n| format!("\"{n}\"")).collect();
            (names.join(" + "), quoted.join(", "))
        })
        .collect()
}

/// (model id, errors, term) → (every result column as text) from terms.csv.
fn rows(dir: &std::path::Path) -> HashMap<(String, String, String), Vec<String>> {
    let frame = read_csv(&dir.join("terms.csv"));
    let (ids, errors, terms) = (
        strings(&frame, "model_id"),
        strings(&frame, "errors"),
        strings(&frame, "term"),
    );
    let numbers: Vec<Vec<f64>> = ["estimate", "std_error", "p_value", "r_squared"]
        .iter()
        .map(|c| floats(&frame, c))
        .collect();
    let option = strings(&frame, "candidates");
    (0..ids.len())
        .map(|i| {
            // Bit patterns, so "equal" means equal to the last bit.
            let mut values: Vec<String> = numbers
                .iter()
                .map(|c| format!("{:016x}", c[i].to_bits()))
                .collect();
            values.push(option[i].clone());
            (
                (ids[i].clone(), errors[i].clone(), terms[i].clone()),
                values,
            )
        })
        .collect()
}

#[test]
fn a_pick_block_run_equals_its_alternatives_block_to_the_bit() {
    let work = tempfile::tempdir().unwrap();
    write_data(&work.path().join("rows.csv"));
    let pick = work.path().join("pick.toml");
    let terms: Vec<String> = (1..=CANDIDATES).map(|j| format!("\"m{j}\"")).collect();
    std::fs::write(
        &pick,
        study(&format!(
            "role = \"pick\"\nterms = [{}]\nsizes = [1, 2]\ninclude_none = true",
            terms.join(", ")
        )),
    )
    .unwrap();
    let mut options = vec![];
    for k in [1, 2] {
        for (name, quoted) in sets(k) {
            options.push(format!("{{ name = \"{name}\", terms = [{quoted}] }}"));
        }
    }
    let listed = work.path().join("listed.toml");
    std::fs::write(
        &listed,
        study(&format!(
            "role = \"alternatives\"\ninclude_none = true\noptions = [{}]",
            options.join(", ")
        )),
    )
    .unwrap();
    let (a, b) = (work.path().join("a"), work.path().join("b"));
    let o = run_study(&pick, &a, &["--all-terms"]);
    assert!(o.status.success(), "{}", text(&o));
    let o = run_study(&listed, &b, &["--all-terms"]);
    assert!(o.status.success(), "{}", text(&o));
    let (ra, rb) = (rows(&a), rows(&b));
    // 2 outcomes × (1 + 6 + 15) sets × 2 samples = 88 models; 3 error choices; 2–4 terms each.
    let models: std::collections::HashSet<&String> = ra.keys().map(|k| &k.0).collect();
    assert_eq!(models.len(), 88);
    assert!(ra.len() > 88 * 3 * 2, "{} rows", ra.len());
    assert_eq!(ra, rb);
}
