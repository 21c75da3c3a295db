//! `role = "pick"` control blocks: every set of the given sizes from the block's terms.
//! Counts follow the handbook formula C(n, k) = n!/(k!(n − k)!) and the product rule of
//! counting (elementary combinatorics); where a count is small the test also lists the sets.

mod common;

use std::collections::HashMap;

use common::{problems, study, HEADER, PATH};
use specgrid_study::{count_grid, plan, DimensionKind, Plan};

/// `n` candidate columns named m01, m02, …
fn measures(n: usize) -> Vec<String> {
    (1..=n).map(|i| format!("m{i:02}")).collect()
}

fn quoted(names: &[String]) -> String {
    names
        .iter()
        .map(|m| format!("\"{m}\""))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A study with two always-in controls, one pick block (`pick` holds its size keys) and the
/// given extra sections.
fn pick_study(n: usize, pick: &str, extra: &str) -> String {
    format!(
        "{HEADER}[outcome]\ncolumn = \"y\"\nforms = [\"level\", \"asinh\"]\n[focus]\ncolumn = \"x\"\n\
         [[controls]]\nname = \"always in\"\nrole = \"always\"\nterms = [\"a\", \"b\"]\n\
         [[controls]]\nname = \"measures\"\nrole = \"pick\"\nterms = [{}]\n{pick}\n{extra}",
        quoted(&measures(n))
    )
}

/// Asserts a problem at (line, column) whose message contains `message`.
fn expect(text: &str, line: usize, column: usize, message: &str, hint: &str) {
    let all = problems(text);
    let listing: Vec<String> = all.iter().map(|p| p.to_string()).collect();
    let Some(p) = all.iter().find(|p| p.message.contains(message)) else {
        panic!(
            "no problem mentioning {message:?} in:\n{}",
            listing.join("\n")
        );
    };
    assert_eq!((p.line, p.column), (line, column), "{p}");
    assert_eq!(p.path.to_str(), Some(PATH));
    assert!(
        p.hint.as_deref().unwrap_or("").contains(hint),
        "hint of {p}"
    );
}

#[test]
fn the_57_choose_3_block_of_the_issue_is_counted_exactly() {
    // C(57, 3) = 57·56·55/(3·2·1) = 29,260 (handbook formula); × 2 outcome forms.
    let s = study(&pick_study(57, "size = 3", "[grid]\nlimit = 100000\n"));
    let count = count_grid(&s).unwrap();
    let d = count
        .dimensions
        .iter()
        .find(|d| d.name == "measures")
        .unwrap();
    assert_eq!(d.kind, DimensionKind::Alternatives);
    assert_eq!(d.options.len(), 29_260);
    assert_eq!(d.options[0], "m01 + m02 + m03");
    assert_eq!(d.options[1], "m01 + m02 + m04");
    assert_eq!(d.options[54], "m01 + m02 + m57");
    assert_eq!(d.options[55], "m01 + m03 + m04");
    assert_eq!(d.options[29_259], "m55 + m56 + m57");
    assert_eq!(count.before_exclusions, 2 * 29_260);
    let p = plan(&s).unwrap();
    assert_eq!(p.models.len(), 58_520);
    // Every model: focus, the two always-in terms and exactly three distinct measures.
    assert!(p.models.iter().all(|m| m.terms.len() == 6));
    let last = p.models.last().unwrap();
    let labels: Vec<String> = last.terms.iter().map(|&t| p.terms[t].label()).collect();
    assert_eq!(labels, ["x", "a", "b", "m55", "m56", "m57"]);
}

#[test]
fn several_sizes_and_none_add_up_and_count_without_listing() {
    // sizes [1, 2, 3] of 10: C(10,1) + C(10,2) + C(10,3) = 10 + 45 + 120 = 175, plus `none`.
    let s = study(&pick_study(
        10,
        "sizes = [3, 1, 2]\ninclude_none = true",
        "",
    ));
    let d = &count_grid(&s).unwrap().dimensions[2];
    assert_eq!(d.options.len(), 176);
    assert_eq!(d.options[0], "none");
    assert_eq!(d.options[1], "m01");
    assert_eq!(d.options[11], "m01 + m02");
    assert_eq!(d.options[56], "m01 + m02 + m03");
    let p = plan(&s).unwrap();
    let sizes: Vec<usize> = p.models.iter().map(|m| m.terms.len() - 3).collect();
    for (k, expected) in [(0, 1), (1, 10), (2, 45), (3, 120)] {
        // Each size appears once per outcome form.
        assert_eq!(
            sizes.iter().filter(|&&s| s == k).count(),
            2 * expected,
            "size {k}"
        );
    }
    // 2,000,000-model grids are counted in closed form: C(57,3) × 2 outcomes × 35 samples.
    let samples: String = (0..35)
        .map(|i| {
            format!(
                "[[samples]]\nname = \"s{i}\"\nkeep = [{{ column = \"r\", not_equals = {i} }}]\n"
            )
        })
        .collect();
    let big = study(&pick_study(
        57,
        "size = 3",
        &format!("{samples}[grid]\nlimit = 3000000\n"),
    ));
    assert_eq!(count_grid(&big).unwrap().after_exclusions, 29_260 * 2 * 35);
}

/// Model ids and terms by choice names.
fn by_choices(p: &Plan) -> HashMap<Vec<String>, (String, Vec<String>)> {
    p.models
        .iter()
        .map(|m| {
            let key = p
                .choice_names(m)
                .iter()
                .map(|(d, o)| format!("{d}={o}"))
                .collect();
            let terms = m.terms.iter().map(|&t| p.terms[t].canonical()).collect();
            (key, (m.id.clone(), terms))
        })
        .collect()
}

#[test]
fn a_pick_block_plans_the_same_models_as_the_alternatives_it_stands_for() {
    let n = 6;
    let names = measures(n);
    let pick = study(&pick_study(n, "sizes = [2, 3]", ""));
    // The same sets written out by hand as an alternatives block, in the documented order.
    let mut options = Vec::new();
    for k in [2, 3] {
        for set in combinations(n, k) {
            let terms: Vec<String> = set.iter().map(|&i| names[i].clone()).collect();
            options.push(format!(
                "{{ name = \"{}\", terms = [{}] }}",
                terms.join(" + "),
                quoted(&terms)
            ));
        }
    }
    let alternatives = pick_study(n, "", "").replace(
        &format!("role = \"pick\"\nterms = [{}]\n", quoted(&names)),
        &format!(
            "role = \"alternatives\"\noptions = [{}]\n",
            options.join(", ")
        ),
    );
    let (a, b) = (plan(&pick).unwrap(), plan(&study(&alternatives)).unwrap());
    // The same decisions; only the pick block records its candidate terms (for the report).
    let mut picked = a.dimensions.clone();
    assert_eq!(
        picked[2].candidates,
        ["m01", "m02", "m03", "m04", "m05", "m06"]
    );
    picked[2].candidates.clear();
    assert_eq!(picked, b.dimensions);
    assert_eq!(a.models.len(), 2 * (15 + 20));
    assert_eq!(by_choices(&a), by_choices(&b));
    assert_eq!(a.terms, b.terms);
    assert_eq!(a.factorisations, b.factorisations);
}

/// Every k-subset of 0..n in lexicographic order, by plain recursion (independent of the
/// planner's walk and unranking).
fn combinations(n: usize, k: usize) -> Vec<Vec<usize>> {
    fn from(start: usize, n: usize, k: usize) -> Vec<Vec<usize>> {
        if k == 0 {
            return vec![vec![]];
        }
        (start..n)
            .flat_map(|first| {
                from(first + 1, n, k - 1).into_iter().map(move |rest| {
                    let mut set = vec![first];
                    set.extend(rest);
                    set
                })
            })
            .collect()
    }
    from(0, n, k)
}

#[test]
fn skip_rules_and_random_samples_work_on_pick_options() {
    // Skip two of the C(8,3) = 56 sets under the asinh outcome: 2·56 − 2 = 110 kept.
    let skip = "[grid]\nskip = [{ outcome = \"asinh\", measures = [\"m01 + m02 + m03\", \"m06 + m07 + m08\"] }]\n";
    let s = study(&pick_study(8, "size = 3", skip));
    let p = plan(&s).unwrap();
    assert_eq!(p.size_before_exclusions, 112);
    assert_eq!(p.size_after_exclusions, 110);
    let skipped = |p: &Plan| {
        p.models.iter().any(|m| {
            let names = p.choice_names(m);
            names[0].1 == "asinh"
                && (names[2].1 == "m01 + m02 + m03" || names[2].1 == "m06 + m07 + m08")
        })
    };
    assert!(!skipped(&p));
    // A random draw of 40 of the 110 kept models never contains a skipped one and is repeatable.
    let drawn = study(&pick_study(
        8,
        "size = 3",
        &skip.replace("[grid]\n", "[grid]\nsample = 40\n"),
    ));
    let (d1, d2) = (plan(&drawn).unwrap(), plan(&drawn).unwrap());
    assert_eq!(d1.models.len(), 40);
    assert_eq!(d1.random_sample, Some(40));
    assert!(!skipped(&d1));
    assert_eq!(d1.models, d2.models);
    // Every drawn model is one of the full plan's, with the same id.
    let full: HashMap<Vec<usize>, String> = p
        .models
        .iter()
        .map(|m| (m.choices.clone(), m.id.clone()))
        .collect();
    assert!(d1
        .models
        .iter()
        .all(|m| full.get(&m.choices) == Some(&m.id)));
}

#[test]
fn nested_mode_keeps_a_pick_block_as_its_own_decision() {
    let extra = "[[controls]]\nname = \"soil\"\nrole = \"optional\"\nterms = [\"ph\"]\n\
                 [[controls]]\nname = \"water\"\nrole = \"optional\"\nterms = [\"rain\"]\n\
                 [grid]\nmode = \"nested\"\n";
    let s = study(&pick_study(5, "size = 2", extra));
    let p = plan(&s).unwrap();
    let names: Vec<&str> = p.dimensions.iter().map(|d| d.name.as_str()).collect();
    assert_eq!(
        names,
        ["outcome", "focus", "controls", "measures", "sample"]
    );
    // 2 outcomes × 3 nested steps × C(5,2) = 10 sets.
    assert_eq!(p.models.len(), 2 * 3 * 10);
}

#[test]
fn the_reader_places_every_pick_problem() {
    // Line 10 is `[[controls]]` of the pick block; its keys follow on lines 11–14.
    let base = |pick: &str| pick_study(4, pick, "");
    expect(
        &base("size = 0"),
        18,
        8,
        "a set needs at least one term",
        "include_none = true",
    );
    expect(
        &base("size = 5"),
        18,
        8,
        "more than the 4 terms of the block",
        "between 1 and 4",
    );
    expect(
        &base("sizes = [1, 2, 2]"),
        18,
        16,
        "repeats size 2",
        "each size once",
    );
    expect(
        &base("sizes = []"),
        18,
        9,
        "`sizes` of control block `measures` is empty",
        "e.g.",
    );
    expect(
        &base("size = 2\nsizes = [1]"),
        19,
        9,
        "has both `size` and `sizes`",
        "keep one",
    );
    expect(&base(""), 14, 1, "needs `size` (or `sizes`)", "size = 3");
    expect(&base("size = \"two\""), 18, 8, "must be an integer", "");
    expect(
        &base("size = 4"),
        17,
        9,
        "gives only one choice",
        "include_none",
    );
    expect(
        &base("size = 2\noptions = []"),
        19,
        11,
        "`options` does not apply",
        "`terms`",
    );
    let repeated = base("size = 2").replace("\"m04\"]", "\"m04\", \"m02\"]");
    expect(
        &repeated,
        17,
        38,
        "term 5 of `terms` of control block `measures` repeats term 2",
        "once",
    );
    let polynomial =
        base("size = 2").replace("\"m04\"]", "{ column = \"m05\", form = \"quadratic\" }]");
    expect(
        &polynomial,
        17,
        31,
        "term 4 of `terms` of control block `measures` makes 2 terms",
        "one-term form",
    );
    let misspelt = base("size = 2").replace("role = \"pick\"", "role = \"pik\"");
    expect(
        &misspelt,
        16,
        8,
        "unknown role `pik`",
        "did you mean `pick`?",
    );
    let on_optional = format!(
        "{}[[controls]]\nname = \"o\"\nrole = \"optional\"\nterms = [\"z\"]\nsize = 1\n",
        base("size = 2")
    );
    expect(
        &on_optional,
        23,
        8,
        "`size` does not apply to a block with role `optional`",
        "role = \"pick\"",
    );
}

#[test]
fn too_many_sets_and_unknown_options_are_refused_with_short_hints() {
    // C(100, 5) = 75,287,520 sets is past the 5,000,000 a block may offer.
    expect(
        &pick_study(100, "size = 5", ""),
        17,
        9,
        "makes 75287520 sets",
        "smaller sizes",
    );
    // A misspelt option among 29,260 gets a suggestion, not the whole list.
    let text = pick_study(
        57,
        "size = 3",
        "[grid]\nskip = [{ measures = \"m01 + m02 + m3\" }]\n",
    );
    let all = problems(&text);
    let p = all
        .iter()
        .find(|p| {
            p.message
                .contains("is not an option of decision `measures`")
        })
        .unwrap();
    assert_eq!(p.hint.as_deref(), Some("did you mean `m01 + m02 + m03`?"));
    let far = pick_study(
        57,
        "size = 3",
        "[grid]\nskip = [{ measures = \"nothing like it\" }]\n",
    );
    let all = problems(&far);
    let hint = all[0].hint.clone().unwrap();
    assert!(hint.contains("29260 in all") && hint.len() < 400, "{hint}");
}

/// The example of docs/study-file.md ("Pick blocks") plans the options the page says it does.
#[test]
fn the_documented_example_is_exact() {
    let docs = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../docs/study-file.md"
    ))
    .unwrap();
    let section = &docs[docs.find("### Pick blocks").expect("the section exists")..];
    let start = section.find("```toml\n").unwrap() + 8;
    let block = &section[start..start + section[start..].find("```").unwrap()];
    let text = format!("{HEADER}[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n{block}");
    let p = plan(&study(&text)).unwrap();
    let options = &p
        .dimensions
        .iter()
        .find(|d| d.name == "measures")
        .unwrap()
        .options;
    let listed: Vec<String> = options.iter().map(|o| format!("`{o}`")).collect();
    let prose = section[..section.find("With 57").unwrap()].replace('\n', " ");
    assert!(
        prose.contains(&format!(
            "{}, {}, {} and {}",
            listed[0], listed[1], listed[2], listed[3]
        )),
        "{prose}"
    );
    assert_eq!(options.len(), 4);
}
