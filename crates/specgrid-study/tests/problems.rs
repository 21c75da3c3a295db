//! Every kind of problem a study file can have is reported with its line and column, a clear
//! message and, where there is one, a hint. Positions are 1-based, columns in characters.

mod common;

use common::{problems, HEADER, PATH};
use specgrid_study::load_study;

const DECISIONS: &str = "[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n";

/// Assert that `text` yields a problem at (line, column) whose message contains `message`
/// and whose hint contains `hint` (when given).
fn expect(text: &str, line: usize, column: usize, message: &str, hint: Option<&str>) {
    let all = problems(text);
    let listing: Vec<String> = all.iter().map(|p| p.to_string()).collect();
    let found = all.iter().find(|p| p.message.contains(message));
    let Some(p) = found else {
        panic!(
            "no problem mentioning {message:?} in:\n{}",
            listing.join("\n")
        );
    };
    assert_eq!((p.line, p.column), (line, column), "{p}");
    assert_eq!(p.path.to_str(), Some(PATH));
    if let Some(h) = hint {
        assert!(p.hint.as_deref().unwrap_or("").contains(h), "hint of {p}");
    }
}

#[test]
fn unknown_top_level_key_suggests_the_right_one() {
    let text = format!("{HEADER}{DECISIONS}[[contols]]\nname = \"a\"\n");
    let all = problems(&text);
    assert_eq!(all.len(), 1);
    assert_eq!(
        all[0].to_string(),
        "specs/test.toml:9:3: unknown key `contols` in the top level; did you mean `controls`?"
    );
}

#[test]
fn unknown_keys_inside_tables_suggest_the_right_one() {
    expect(
        &format!("{HEADER}tittle = 1\n{DECISIONS}"),
        5,
        1,
        "unknown key `tittle` in [study]",
        Some("`title`"),
    );
    expect(
        &format!("{HEADER}{DECISIONS}also_trak = []\n"),
        9,
        1,
        "unknown key `also_trak` in [focus]",
        Some("did you mean `also_track`?"),
    );
    expect(
        &format!(
            "{HEADER}{DECISIONS}[[controls]]\nname = \"a\"\nrole = \"optional\"\nterm = [\"z\"]\n"
        ),
        12,
        1,
        "unknown key `term` in control block",
        Some("`terms`"),
    );
    expect(
        &format!("{HEADER}{DECISIONS}[grid]\nskips = []\n"),
        10,
        1,
        "unknown key `skips` in [grid]",
        Some("`skip`"),
    );
}

#[test]
fn wrong_types_name_the_key_and_both_types() {
    expect(
        &format!("{HEADER}{DECISIONS}").replace("seed = 7", "seed = \"seven\""),
        4,
        8,
        "`seed` in [study] must be an integer, found a string",
        None,
    );
    expect(
        &format!("{HEADER}[outcome]\ncolumn = 3\n[focus]\ncolumn = \"x\"\n"),
        6,
        10,
        "`column` in [outcome] must be a string, found an integer",
        None,
    );
    expect(
        &format!(
            "{HEADER}{DECISIONS}[[controls]]\nname = \"a\"\nrole = \"optional\"\nterms = \"z\"\n"
        ),
        12,
        9,
        "`terms` of control block `a` must be an array, found a string",
        None,
    );
    expect(
        &format!("grid = 5\n{HEADER}{DECISIONS}"),
        1,
        8,
        "[grid] must be a table, found an integer",
        None,
    );
    expect(
        &format!("{HEADER}{DECISIONS}[study.extra]\n"),
        9,
        8,
        "unknown key `extra` in [study]",
        None,
    );
}

#[test]
fn missing_sections_and_keys_are_named() {
    let all = problems(HEADER);
    let messages: Vec<&str> = all.iter().map(|p| p.message.as_str()).collect();
    assert!(
        messages.contains(&"missing section [outcome]"),
        "{messages:?}"
    );
    assert!(
        messages.contains(&"missing section [focus]"),
        "{messages:?}"
    );
    expect(
        &format!("[study]\ntitle = \"t\"\n{DECISIONS}"),
        1,
        1,
        "missing key `data` in [study]",
        Some("add `data = ...`"),
    );
}

#[test]
fn bad_values_say_what_is_allowed() {
    expect(
        &format!("{HEADER}{DECISIONS}").replace("data = \"plots.csv\"", "data = \"plots.xlsx\""),
        3,
        8,
        "must end in .csv or .parquet",
        None,
    );
    expect(
        &format!("{HEADER}rows = \"per_model\"\n{DECISIONS}"),
        5,
        8,
        "unknown row policy `per_model`",
        Some("did you mean `per-model`?"),
    );
    let forms = format!("{HEADER}{DECISIONS}forms = [\"lvl\", {{ polynomial = 12 }}, {{ winsorized = [0.9, 0.1] }}]\n");
    expect(
        &forms,
        9,
        10,
        "unknown form `lvl`",
        Some("did you mean `level`?"),
    );
    expect(&forms, 9, 32, "must be between 2 and 10, found 12", None);
    expect(
        &forms,
        9,
        53,
        "needs 0 ≤ LOW < 0.5 < HIGH ≤ 1",
        Some("[0.01, 0.99]"),
    );
    expect(
        &format!("{HEADER}[outcome]\ncolumn = \"y\"\nforms = [\"level\", \"standardized\"]\n[focus]\ncolumn = \"x\"\n"),
        7,
        19,
        "form `standardized` is not available for the outcome",
        Some("`asinh`"),
    );
    expect(
        &format!("{HEADER}{DECISIONS}forms = [\"log\", {{ form = \"level\", name = \"log\" }}]\n"),
        9,
        17,
        "form name `log` appears twice",
        Some("`name`"),
    );
}

#[test]
fn control_block_problems() {
    let block = |body: &str| format!("{HEADER}{DECISIONS}[[controls]]\nname = \"a\"\n{body}");
    expect(
        &block("role = \"sometimes\"\nterms = [\"z\"]\n"),
        11,
        8,
        "unknown role `sometimes`",
        Some("`always`"),
    );
    expect(
        &block("role = \"optional\"\n"),
        9,
        1,
        "missing key `terms` in control block `a`",
        None,
    );
    expect(
        &block("role = \"optional\"\nterms = [\"z\"]\ninclude_none = true\n"),
        13,
        16,
        "`include_none` does not apply to a block with role `optional`",
        None,
    );
    expect(
        &block("role = \"alternatives\"\noptions = [{ name = \"p\", terms = [\"p\"] }]\n"),
        12,
        11,
        "gives fewer than two choices",
        Some("include_none"),
    );
    expect(
        &block("role = \"alternatives\"\ninclude_none = true\noptions = [{ name = \"none\", terms = [\"p\"] }]\n"),
        13,
        12,
        "option name `none` is used twice",
        None,
    );
    expect(
        &block("role = \"always\"\nterms = [{ product = [{ column = \"x\", form = \"quadratic\" }, \"z\"] }]\n"),
        12,
        23,
        "a product side must be a single term",
        None,
    );
    expect(
        &block("role = \"always\"\nterms = [{ column = \"x\", categorical = \"x\" }]\n"),
        12,
        10,
        "must have exactly one of `column`, `categorical`, `product`",
        None,
    );
    expect(
        &block("role = \"always\"\nterms = [{ column = \"x\", reference = \"n\" }]\n"),
        12,
        38,
        "`reference` applies only to a categorical term",
        None,
    );
    let twice = format!(
        "{HEADER}{DECISIONS}[[controls]]\nname = \"a\"\nrole = \"optional\"\nterms = [\"z\"]\n[[controls]]\nname = \"a\"\nrole = \"optional\"\nterms = [\"w\"]\n"
    );
    expect(&twice, 13, 1, "control block name `a` is used twice", None);
    let reserved = format!("{HEADER}{DECISIONS}[[controls]]\nname = \"sample\"\nrole = \"optional\"\nterms = [\"z\"]\n");
    expect(
        &reserved,
        9,
        1,
        "control block name `sample` is reserved",
        Some("rename"),
    );
}

#[test]
fn sample_problems() {
    let sample = |body: &str| format!("{HEADER}{DECISIONS}[[samples]]\nname = \"s\"\n{body}");
    expect(
        &sample("keep = [{ column = \"v\", at_most = \"ten\" }]\n"),
        11,
        35,
        "`at_most` of condition 1 of `keep` of sample `s` must be a number, found a string",
        None,
    );
    expect(
        &sample("keep = [{ column = \"v\", at_most = 1, above = 0 }]\n"),
        11,
        9,
        "must have exactly one comparison, found 2",
        Some("`at_least`"),
    );
    expect(
        &sample("keep = [{ column = \"v\", less_than = 3 }]\n"),
        11,
        25,
        "unknown key `less_than` in condition 1",
        None,
    );
    expect(
        &sample("drop_above_quantile = [{ column = \"v\", quantile = 99 }]\n"),
        11,
        51,
        "must be strictly between 0 and 1, found 99",
        None,
    );
    let twice =
        format!("{HEADER}{DECISIONS}[[samples]]\nname = \"s\"\n[[samples]]\nname = \"s\"\n");
    expect(&twice, 11, 1, "sample name `s` is used twice", None);
}

#[test]
fn error_and_grid_setting_problems() {
    let errors = format!(
        "{HEADER}{DECISIONS}[errors]\nchoices = [\"hc4\", {{ cluster = [\"a\", \"b\", \"c\"] }}, \"cluster\"]\nconfidence = 95\n"
    );
    expect(
        &errors,
        10,
        12,
        "unknown error choice `hc4`",
        Some("did you mean"),
    );
    expect(&errors, 10, 31, "lists 3 columns", None);
    expect(
        &errors,
        10,
        50,
        "unknown error choice `cluster`",
        Some("{ cluster = \"COLUMN\" }"),
    );
    expect(
        &errors,
        11,
        14,
        "must be strictly between 0 and 1, found 95",
        Some("0.95"),
    );
    let grid = format!("{HEADER}{DECISIONS}[grid]\nmode = \"nestd\"\nlimit = 0\nsample = -3\n");
    expect(
        &grid,
        10,
        8,
        "unknown grid mode `nestd`",
        Some("did you mean `nested`?"),
    );
    expect(
        &grid,
        11,
        9,
        "`limit` in [grid] must be between 1 and",
        None,
    );
    expect(
        &grid,
        12,
        10,
        "`sample` in [grid] must be between 1 and",
        None,
    );
}

#[test]
fn skip_rules_must_name_real_decisions_and_options() {
    let text = format!(
        "{HEADER}[outcome]\ncolumn = \"y\"\nforms = [\"level\", \"log\"]\n[focus]\ncolumn = \"x\"\n[grid]\nskip = [{{ outcom = \"log\" }}, {{ outcome = \"logg\" }}]\n"
    );
    expect(
        &text,
        11,
        11,
        "skip rule names `outcom`",
        Some("did you mean `outcome`?"),
    );
    expect(
        &text,
        11,
        41,
        "`logg` is not an option of decision `outcome`",
        Some("`level`, `log`"),
    );
}

#[test]
fn every_problem_is_reported_at_once_in_file_order() {
    let text = format!(
        "{HEADER}rows = \"sometimes\"\n[outcome]\ncolumn = 1\n[focus]\ncolumn = \"x\"\nforms = [\"cubed\"]\n[errors]\nconfidence = 2\n"
    );
    let all = problems(&text);
    assert_eq!(all.len(), 4, "{all:?}");
    let lines: Vec<usize> = all.iter().map(|p| p.line).collect();
    assert_eq!(lines, [5, 7, 10, 12]);
}

#[test]
fn toml_syntax_errors_carry_a_position() {
    let text = "[study]\ntitle = \"t\"\ndata = \"p.csv\"\n[outcome\ncolumn = \"y\"\n";
    let all = problems(text);
    assert_eq!((all[0].line, all[0].column), (4, 9), "{}", all[0]);
    assert!(all[0].message.starts_with("not valid TOML"), "{}", all[0]);
    // A duplicate key is also a syntax problem.
    let dup = format!("{HEADER}seed = 8\n{DECISIONS}");
    let all = problems(&dup);
    assert_eq!(all[0].line, 5, "{}", all[0]);
}

#[test]
fn an_unreadable_file_is_a_problem_not_a_panic() {
    let missing = std::path::Path::new("/nonexistent/specgrid/study.toml");
    let all = load_study(missing).unwrap_err();
    assert_eq!(all.len(), 1);
    assert_eq!((all[0].line, all[0].column), (0, 0));
    assert!(all[0]
        .to_string()
        .starts_with("/nonexistent/specgrid/study.toml: cannot read the study file"));
}

#[test]
fn arbitrary_garbage_never_panics() {
    // Every prefix of a valid study, and some byte-level mutations, must give Ok or problems.
    let dir =
        std::env::var("CARGO_MANIFEST_DIR").unwrap_or_else(|_| env!("CARGO_MANIFEST_DIR").into());
    let valid = std::fs::read_to_string(format!("{dir}/../../specs/orchards.toml")).unwrap();
    let chars: Vec<char> = valid.chars().collect();
    for cut in (0..chars.len()).step_by(7) {
        let prefix: String = chars[..cut].iter().collect();
        let _ = specgrid_study::parse_study(std::path::Path::new(PATH), prefix);
    }
    for (i, c) in valid.char_indices().step_by(13) {
        for replacement in ["\"", "]", "=", "0", "\n", "{"] {
            let mut mutated = valid.clone();
            mutated.replace_range(i..i + c.len_utf8(), replacement);
            if let Ok(study) = specgrid_study::parse_study(std::path::Path::new(PATH), mutated) {
                let _ = specgrid_study::count_grid(&study);
            }
        }
    }
}

#[test]
fn the_outcome_may_not_be_a_regressor() {
    let text = format!(
        "{HEADER}[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n[[controls]]\nname = \"a\"\nrole = \"always\"\nterms = [{{ column = \"y\", form = \"log\" }}]\n"
    );
    expect(
        &text,
        5,
        1,
        "the outcome column `y` is also used as a regressor (in `log(y)`)",
        None,
    );
}

#[test]
fn a_tracked_term_no_model_can_contain_is_refused() {
    let text = format!(
        "{HEADER}[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\nalso_track = [{{ product = [\"x\", \"z\"] }}]\n[[controls]]\nname = \"a\"\nrole = \"optional\"\nterms = [{{ product = [\"x\", \"w\"] }}]\n"
    );
    expect(
        &text,
        9,
        14,
        "`also_track` lists `x × z`, which no focus form or control block contains",
        Some("add the term"),
    );
}

#[test]
fn a_single_bracket_list_section_gets_a_hint() {
    let text = format!("{HEADER}{DECISIONS}[samples]\nname = \"s\"\n");
    expect(
        &text,
        9,
        1,
        "[[samples]] must be a list of tables, found a table",
        Some("double brackets"),
    );
}
