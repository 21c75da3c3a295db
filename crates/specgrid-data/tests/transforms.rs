//! Each transform against its textbook formula, computed independently in the test.

mod common;

use approx::assert_relative_eq;
use common::*;
use specgrid_data::{assemble, load};
use specgrid_study::Transform;

const CSV: &str = "yield_t,area_ha,visits\n\
3.1,1.5,0\n\
4.2,2.0,3\n\
2.7,0.8,1\n\
5.9,3.2,7\n\
4.4,2.5,2\n\
3.8,1.1,4\n\
6.3,4.0,9\n\
2.2,0.6,5\n\
5.0,2.9,6\n\
4.9,3.5,8\n";

const AREA: [f64; 10] = [1.5, 2.0, 0.8, 3.2, 2.5, 1.1, 4.0, 0.6, 2.9, 3.5];
const VISITS: [f64; 10] = [0.0, 3.0, 1.0, 7.0, 2.0, 4.0, 9.0, 5.0, 6.0, 8.0];

fn design_column(transform: Transform, column: &str) -> (String, Vec<f64>) {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let plan = simple_plan(&path, "yield_t", vec![num(column, transform)]);
    let data = load(&plan).unwrap();
    let assembly = assemble(&plan, &data).unwrap();
    let d = &assembly.designs[0].design;
    (d.x_names[1].clone(), x_col(d, 1))
}

#[test]
fn natural_log() {
    // Natural logarithm, ln(x), textbook definition.
    let (name, got) = design_column(Transform::Log, "area_ha");
    assert_eq!(name, "log(area_ha)");
    for (g, a) in got.iter().zip(AREA) {
        assert_relative_eq!(*g, a.ln(), max_relative = 1e-15);
    }
}

#[test]
fn log1p_is_log_of_one_plus_x() {
    // ln(1 + x); at x = 0 it is exactly 0.
    let (name, got) = design_column(Transform::Log1p, "visits");
    assert_eq!(name, "log1p(visits)");
    assert_eq!(got[0], 0.0);
    for (g, v) in got.iter().zip(VISITS) {
        assert_relative_eq!(*g, (1.0 + v).ln(), max_relative = 1e-14);
    }
}

#[test]
fn asinh_matches_log_formula() {
    // Inverse hyperbolic sine: asinh(x) = ln(x + √(x² + 1)).
    let (name, got) = design_column(Transform::Asinh, "visits");
    assert_eq!(name, "asinh(visits)");
    for (g, v) in got.iter().zip(VISITS) {
        assert_relative_eq!(*g, (v + (v * v + 1.0).sqrt()).ln(), max_relative = 1e-14);
    }
}

#[test]
fn power_is_repeated_product() {
    let (name, got) = design_column(Transform::Power(3), "area_ha");
    assert_eq!(name, "area_ha^3");
    for (g, a) in got.iter().zip(AREA) {
        assert_relative_eq!(*g, a * a * a, max_relative = 1e-15);
    }
}

#[test]
fn standardize_is_z_score_with_sample_sd() {
    // z-score: (x − mean) / s with s the sample standard deviation (n − 1 denominator).
    let (name, got) = design_column(Transform::Standardize, "area_ha");
    assert_eq!(name, "standardized(area_ha)");
    let n = AREA.len() as f64;
    let mean = AREA.iter().sum::<f64>() / n;
    let s = (AREA.iter().map(|a| (a - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    for (g, a) in got.iter().zip(AREA) {
        assert_relative_eq!(*g, (a - mean) / s, max_relative = 1e-13);
    }
}

#[test]
fn winsorize_clamps_at_type7_quantiles() {
    // Hyndman & Fan (1996) definition 7: h = (n − 1)p, Q = x₍⌊h⌋₎ + (h − ⌊h⌋)(x₍⌊h⌋+1₎ − x₍⌊h⌋₎),
    // 0-based order statistics. Sorted visits are 0..=9, n = 10:
    // p = 0.1 → h = 0.9 → 0 + 0.9·1 = 0.9;  p = 0.8 → h = 7.2 → 7 + 0.2·1 = 7.2.
    let (name, got) = design_column(
        Transform::Winsorize {
            lower: 0.1,
            upper: 0.8,
        },
        "visits",
    );
    assert_eq!(name, "winsorized(visits, 0.1–0.8)");
    for (g, v) in got.iter().zip(VISITS) {
        let want = v.clamp(0.9, 7.2);
        assert_relative_eq!(*g, want, max_relative = 1e-14);
    }
}

#[test]
fn type7_quantile_hand_values() {
    // Hand-worked with definition 7 of Hyndman & Fan (1996) on {1, 2, 3, 4, 10}:
    // p = 0.5 → h = 2 → 3; p = 0.9 → h = 3.6 → 4 + 0.6·6 = 7.6; p = 0 → 1; p = 1 → 10.
    use specgrid_data::transform::quantile_type7;
    let x = [1.0, 2.0, 3.0, 4.0, 10.0];
    assert_eq!(quantile_type7(&x, 0.5), 3.0);
    assert_relative_eq!(quantile_type7(&x, 0.9), 7.6, max_relative = 1e-15);
    assert_eq!(quantile_type7(&x, 0.0), 1.0);
    assert_eq!(quantile_type7(&x, 1.0), 10.0);
}

#[test]
fn outcome_forms_are_transformed() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    plan.outcomes.push(outcome("yield_t", Transform::Log));
    let data = load(&plan).unwrap();
    let assembly = assemble(&plan, &data).unwrap();
    let d = &assembly.designs[0];
    assert_eq!(d.design.y_names, vec!["yield_t", "log(yield_t)"]);
    assert_eq!(d.outcome_columns, vec![Some(0), Some(1)]);
    let y = y_col(&d.design, 1);
    assert_relative_eq!(y[0], 3.1f64.ln(), max_relative = 1e-15);
    assert_relative_eq!(y[9], 4.9f64.ln(), max_relative = 1e-15);
}
