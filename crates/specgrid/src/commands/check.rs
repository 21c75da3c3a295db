//! `specgrid check`: validate the study file and the data without estimating.

use std::path::Path;

use crate::exit::Failure;

/// Reads the study and the data, builds every design, and reports problems and warnings.
pub fn run(study: &Path) -> Result<(), Failure> {
    let plan = super::load_plan(study)?;
    let (data, assembly) = crate::data_guard::load_and_assemble(&plan)?;
    for warning in &assembly.warnings {
        eprintln!("warning: {warning}");
    }
    for choice in &plan.errors {
        if assembly.covariance(choice).is_none() {
            return Err(Failure::Data(format!(
                "the error choice `{}` names a clustering column the data layer did not load",
                choice.label()
            )));
        }
    }
    println!(
        "{}: ok — {} models over {} design(s) from {} ({} rows read)",
        study.display(),
        super::thousands(plan.models.len() as u128),
        assembly.designs.len(),
        data.path.display(),
        super::thousands(data.n_rows as u128),
    );
    for design in &assembly.designs {
        let a = &design.account;
        println!(
            "  sample `{}`: {} rows in sample, {} used by {} model(s), {} design columns",
            design.sample_name,
            super::thousands(a.rows_in_sample as u128),
            super::thousands(a.rows_kept as u128),
            design.models.len(),
            design.design.x.ncols(),
        );
    }
    Ok(())
}
