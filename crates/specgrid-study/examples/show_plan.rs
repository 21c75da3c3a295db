//! Print the decisions, grid sizes and first models of a study file (a development aid; the
//! `specgrid plan` command is the user-facing version).

fn main() {
    let Some(path) = std::env::args().nth(1) else {
        eprintln!("usage: show_plan STUDY.toml");
        std::process::exit(2);
    };
    let study = match specgrid_study::load_study(std::path::Path::new(&path)) {
        Ok(s) => s,
        Err(problems) => {
            for p in problems {
                eprintln!("{p}");
            }
            std::process::exit(1);
        }
    };
    let plan = match specgrid_study::plan(&study) {
        Ok(p) => p,
        Err(problems) => {
            for p in problems {
                eprintln!("{p}");
            }
            std::process::exit(1);
        }
    };
    for d in &plan.dimensions {
        println!("{} ({:?}): {}", d.name, d.kind, d.options.join(" | "));
    }
    println!(
        "grid: {} before skip rules, {} after, {} planned, {} factorisations, baseline {:?}",
        plan.size_before_exclusions,
        plan.size_after_exclusions,
        plan.models.len(),
        plan.factorisations,
        plan.baseline
    );
    for m in plan.models.iter().take(5) {
        let terms: Vec<String> = m.terms.iter().map(|&t| plan.terms[t].label()).collect();
        println!("{} {:?}: {}", m.id, plan.choice_names(m), terms.join(", "));
    }
}
