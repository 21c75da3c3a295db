//! Seeded, bounded mutation testing of the study-file reader and planner (the stable-toolchain
//! stand-in for the libFuzzer target in fuzz/, see docs/nightly.md): tens of thousands of
//! byte, line and type mutations of the shipped study files must never panic, and must always
//! give either a plan with models or at least one problem with a position inside the file.
//! Inputs it once broke on are kept below as regression cases.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use specgrid_study::{parse_study, plan};

const PATH: &str = "specs/mutated.toml";

/// A study that uses every section, for mutations to work on.
const EVERY_SECTION: &str = r#"[study]
title = "every section"
data = "plots.csv"
seed = 3
rows = "per-model"
intercept = true

[outcome]
column = "yield"
forms = ["level", "log", { name = "soft", form = "asinh" }]

[focus]
column = "visits"
forms = ["level", "quadratic", { name = "trimmed", winsorized = [0.01, 0.99] }]
also_track = [{ product = ["visits", "irrigated"] }]

[[controls]]
name = "site"
role = "always"
terms = ["slope", { categorical = "soil", reference = "loam" }]

[[controls]]
name = "water"
role = "optional"
terms = ["irrigated", { product = ["visits", "irrigated"] }]

[[controls]]
name = "grouping"
role = "alternatives"
include_none = true
options = [{ name = "district", terms = [{ categorical = "district" }] }]

[[samples]]
name = "all"

[[samples]]
name = "flat"
keep = [{ column = "slope", below = 10 }, { column = "soil", one_of = ["loam", "clay"] }]
drop_above_quantile = [{ column = "area", quantile = 0.99 }]

[errors]
choices = ["classical", "hc1", { cluster = "village" }, { cluster = ["village", "season"] }]
confidence = 0.9

[grid]
mode = "full"
limit = 5000
sample = 40
skip = [{ outcome = "log", focus = "quadratic" }]

[verdict]
errors = "hc1"
min_share_baseline_sign = 0.8
min_share_significant = 0.5
baseline_significant = true
max_sign_flips = 2
"#;

/// Values a type swap puts after an `=`.
const VALUES: &[&str] = &[
    "\"x\"",
    "\"\"",
    "1",
    "0",
    "-1",
    "1e308",
    "-0.0",
    "nan",
    "inf",
    "true",
    "[]",
    "{}",
    "[1, \"a\"]",
    "9223372036854775807",
    "99999999999999999999999",
    "1979-05-27",
    "[[]]",
    "{ cluster = 1 }",
    "{ name = \"a\" }",
    "\"é ü 田\"",
    "0x10",
    "1_000",
];

/// Characters a byte insertion picks from: TOML punctuation, a newline, non-ASCII.
const CHARS: &[char] = &[
    '[', ']', '"', '=', '{', '}', ',', '\n', '#', '\\', '.', '-', '0', 'é', '\'', ' ',
];

fn mutate(text: &str, rng: &mut ChaCha8Rng) -> String {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let mut out = text.to_string();
    for _ in 0..rng.random_range(1..=3) {
        let n = lines.len().max(1);
        match rng.random_range(0..8) {
            0 if !lines.is_empty() => {
                lines.remove(rng.random_range(0..n));
            }
            1 if !lines.is_empty() => {
                let i = rng.random_range(0..n);
                lines.insert(i, lines[i].clone());
            }
            2 if lines.len() > 1 => {
                lines.swap(rng.random_range(0..n), rng.random_range(0..n));
            }
            3 | 4 if !lines.is_empty() => {
                // Type swap: replace what follows the first `=` of a line.
                let i = rng.random_range(0..n);
                if let Some(eq) = lines[i].find('=') {
                    let value = VALUES[rng.random_range(0..VALUES.len())];
                    lines[i] = format!("{}= {value}", &lines[i][..eq]);
                }
            }
            5 if !lines.is_empty() => {
                // Key typo: drop or double one character before the `=`.
                let i = rng.random_range(0..n);
                if let Some(eq) = lines[i].find('=').filter(|&e| e > 1) {
                    let at = rng.random_range(0..eq);
                    if lines[i].is_char_boundary(at) && lines[i].is_char_boundary(at + 1) {
                        let c = lines[i][at..at + 1].to_string();
                        if rng.random_bool(0.5) {
                            lines[i].replace_range(at..at + 1, "");
                        } else {
                            lines[i].insert_str(at, &c);
                        }
                    }
                }
            }
            _ => {
                // Byte-level: insert a character or cut the text short.
                out = lines.join("\n");
                let mut at = rng.random_range(0..=out.len());
                while !out.is_char_boundary(at) {
                    at -= 1;
                }
                if rng.random_bool(0.5) {
                    out.insert(at, CHARS[rng.random_range(0..CHARS.len())]);
                } else {
                    out.truncate(at);
                }
                lines = out.lines().map(str::to_string).collect();
            }
        }
        out = lines.join("\n");
    }
    out
}

/// Parse and plan: `Ok(true)` for a plan, `Ok(false)` for well-placed problems, `Err` for a
/// broken promise (a panic, or a result without content).
fn check(text: &str) -> Result<bool, String> {
    let outcome = catch_unwind(AssertUnwindSafe(|| {
        match parse_study(Path::new(PATH), text.to_string()) {
            Ok(study) => match plan(&study) {
                Ok(p) if p.models.is_empty() => Err("a plan without models".to_string()),
                Ok(_) => Ok(true),
                Err(problems) => positioned(text, &problems),
            },
            Err(problems) => positioned(text, &problems),
        }
    }));
    outcome.unwrap_or_else(|_| Err("panicked".into()))
}

fn positioned(text: &str, problems: &[specgrid_study::StudyProblem]) -> Result<bool, String> {
    if problems.is_empty() {
        return Err("refused without a problem".into());
    }
    let lines = text.lines().count() + 1;
    for p in problems {
        if p.path != Path::new(PATH) || p.line > lines || p.message.is_empty() {
            return Err(format!("badly placed problem: {p}"));
        }
    }
    Ok(false)
}

#[test]
fn mutated_study_files_never_panic_and_always_explain_themselves() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    let seeds = [
        EVERY_SECTION.to_string(),
        // The demo with a random sample of 25 of its 2,556 models: planning all of them would
        // make each case 50 times slower and test nothing more.
        std::fs::read_to_string(root.join("specs/orchards.toml"))
            .unwrap()
            .replacen("[grid]\n", "[grid]\nsample = 25\n", 1),
        std::fs::read_to_string(root.join("specs/nist-wampler1.toml")).unwrap(),
    ];
    for seed in &seeds {
        if let Err(problems) = parse_study(Path::new(PATH), seed.clone()) {
            let all: Vec<String> = problems.iter().map(|p| p.to_string()).collect();
            panic!("the unmutated seed must read:\n{}", all.join("\n"));
        }
        assert_eq!(check(seed), Ok(true), "the unmutated seed must plan");
    }
    let cases: usize = std::env::var("SPECGRID_MUTATION_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20_000);
    let rng_seed: u64 = std::env::var("SPECGRID_MUTATION_SEED")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20261201);
    let mut rng = ChaCha8Rng::seed_from_u64(rng_seed);
    let mut failures = Vec::new();
    let mut planned = 0;
    for case in 0..cases {
        let seed = &seeds[case % seeds.len()];
        let text = mutate(seed, &mut rng);
        match check(&text) {
            Ok(true) => planned += 1,
            Ok(false) => {}
            Err(why) => failures.push(format!("case {case}: {why}\n{text}")),
        }
        if failures.len() >= 3 {
            break;
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n-----\n"));
    // The mutations must leave some files valid, or the planner is never reached.
    assert!(
        planned > cases / 50,
        "only {planned} of {cases} mutated files were valid"
    );
}
