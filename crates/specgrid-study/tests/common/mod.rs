//! Helpers shared by the study tests.
#![allow(dead_code)]

use std::path::Path;

use specgrid_study::{parse_study, Study, StudyProblem};

/// The path problems are reported against.
pub const PATH: &str = "specs/test.toml";

/// A minimal valid header; tests append the sections they exercise.
pub const HEADER: &str = r#"[study]
title = "test"
data = "plots.csv"
seed = 7
"#;

/// Parse study text, failing the test with every problem if it is not valid.
pub fn study(text: &str) -> Study {
    match parse_study(Path::new(PATH), text.to_string()) {
        Ok(s) => s,
        Err(problems) => {
            let all: Vec<String> = problems.iter().map(|p| p.to_string()).collect();
            panic!("expected a valid study, got:\n{}", all.join("\n"))
        }
    }
}

/// Parse study text that must be invalid; returns its problems.
pub fn problems(text: &str) -> Vec<StudyProblem> {
    match parse_study(Path::new(PATH), text.to_string()) {
        Ok(_) => panic!("expected problems, the study was accepted"),
        Err(p) => p,
    }
}

/// `n` optional blocks named b0, b1, … each with one term.
pub fn optional_blocks(n: usize) -> String {
    (0..n)
        .map(|i| {
            format!("[[controls]]\nname = \"b{i}\"\nrole = \"optional\"\nterms = [\"c{i}\"]\n")
        })
        .collect()
}
