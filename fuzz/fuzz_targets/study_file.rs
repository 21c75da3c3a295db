//! Any bytes as a study file: parsing and planning must never panic, and must return either a
//! plan or at least one problem that names the file.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let path = Path::new("fuzz/study.toml");
    match specgrid_study::parse_study(path, text.to_string()) {
        Ok(study) => match specgrid_study::plan(&study) {
            Ok(plan) => assert!(!plan.models.is_empty()),
            Err(problems) => assert!(!problems.is_empty()),
        },
        Err(problems) => {
            assert!(!problems.is_empty());
            assert!(problems.iter().all(|p| p.path == path));
        }
    }
});
