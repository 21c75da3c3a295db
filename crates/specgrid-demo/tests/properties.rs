//! Properties of our own generator (not estimation check values): determinism, shapes, ranges
//! and the designed confounding. Invented data never serves as a reference value for the
//! estimator; these tests only confirm the generator does what demo-data/README.md says.

use specgrid_demo::{generate, truth, OrchardConfig, OrchardTable, COLUMN_NAMES};
use std::collections::{HashMap, HashSet};
use std::sync::OnceLock;

fn default_table() -> &'static OrchardTable {
    static TABLE: OnceLock<OrchardTable> = OnceLock::new();
    TABLE.get_or_init(|| generate(&OrchardConfig::default()).expect("default config is valid"))
}

fn csv_bytes(table: &OrchardTable) -> Vec<u8> {
    let mut out = Vec::new();
    table
        .write_csv(&mut out)
        .expect("writing to a Vec cannot fail");
    out
}

#[test]
fn same_seed_same_bytes_and_other_seed_other_bytes() {
    let cfg = OrchardConfig::default();
    let a = csv_bytes(&generate(&cfg).unwrap());
    let b = csv_bytes(&generate(&cfg).unwrap());
    assert_eq!(a, b);
    let other = OrchardConfig {
        seed: cfg.seed + 1,
        ..cfg
    };
    let c = csv_bytes(&generate(&other).unwrap());
    assert_ne!(a, c);
}

#[test]
fn committed_demo_csv_matches_the_generator() {
    // Tripwire: if the process or draw order changes, regenerate demo-data/orchards.csv and
    // update demo-data/README.md (see its "Regenerate" section).
    // The runtime value (set by cargo test) so a test binary built from another checkout that
    // shares the target folder still reads this checkout's file.
    let dir =
        std::env::var("CARGO_MANIFEST_DIR").unwrap_or_else(|_| env!("CARGO_MANIFEST_DIR").into());
    let path = format!("{dir}/../../demo-data/orchards.csv");
    let committed = std::fs::read(&path).expect("demo-data/orchards.csv is committed");
    assert!(
        committed == csv_bytes(default_table()),
        "demo-data/orchards.csv differs from generate(&OrchardConfig::default()); regenerate it"
    );
    assert!(committed.len() < 1_000_000, "demo CSV must stay under 1 MB");
}

#[test]
fn shape_ids_and_levels() {
    let t = default_table();
    assert_eq!(t.len(), 6_000);
    assert_eq!(t.columns().len(), COLUMN_NAMES.len());
    for col in t.columns() {
        let n = match col.values {
            specgrid_demo::ColumnValues::Float(v) => v.len(),
            specgrid_demo::ColumnValues::FloatOpt(v) => v.len(),
            specgrid_demo::ColumnValues::Int(v) => v.len(),
            specgrid_demo::ColumnValues::Text(c) => c.codes.len(),
        };
        assert_eq!(n, 6_000, "column {}", col.name);
    }
    let mut per_plot: HashMap<i64, usize> = HashMap::new();
    for &id in &t.plot_id {
        *per_plot.entry(id).or_default() += 1;
    }
    assert_eq!(per_plot.len(), 3_000);
    assert!(per_plot.values().all(|&n| n == 2));
    let seasons: HashSet<&str> = t.season.iter().collect();
    assert_eq!(seasons, HashSet::from(["2024", "2025"]));
    assert_eq!(t.district.iter().collect::<HashSet<_>>().len(), 8);
    assert_eq!(t.village.iter().collect::<HashSet<_>>().len(), 150);
    assert_eq!(t.variety.iter().collect::<HashSet<_>>().len(), 5);
    // Every village code starts with its own district's name.
    for i in 0..t.len() {
        assert!(t
            .village
            .get(i)
            .starts_with(&format!("{}-", t.district.get(i))));
    }
}

#[test]
fn values_are_finite_positive_and_plausible() {
    let t = default_table();
    let all_floats = t
        .yield_t_ha
        .iter()
        .chain(&t.area_ha)
        .chain(&t.tree_age)
        .chain(&t.slope_pct)
        .chain(t.soil_ph.iter().flatten());
    assert!(all_floats.into_iter().all(|x| x.is_finite()));
    assert!(t.yield_t_ha.iter().all(|&y| y > 0.0));
    let plausible = t
        .yield_t_ha
        .iter()
        .filter(|&&y| (5.0..=60.0).contains(&y))
        .count();
    assert!(
        plausible as f64 >= 0.97 * t.len() as f64,
        "{plausible} of 6000 yields in 5..60"
    );
    assert!(t.yield_t_ha.iter().all(|&y| y < 150.0));
    assert!(t
        .area_ha
        .iter()
        .all(|a| (truth::AREA_MIN_HA..=truth::AREA_MAX_HA).contains(a)));
    assert!(t
        .slope_pct
        .iter()
        .all(|&s| (0.0..=truth::SLOPE_MAX_PCT).contains(&s)));
    assert!(t.visits.iter().all(|&v| v >= 0));
    assert!(t.experience_yrs.iter().all(|&e| e >= 0));
    assert!(t
        .irrigated
        .iter()
        .chain(&t.organic)
        .all(|&b| b == 0 || b == 1));
    // Right skew: mean above median (log-normal-like outcome).
    let mut sorted = t.yield_t_ha.clone();
    sorted.sort_by(f64::total_cmp);
    let median = sorted[sorted.len() / 2];
    assert!(mean(&t.yield_t_ha) > median);
}

#[test]
fn about_two_percent_of_soil_ph_missing() {
    let t = default_table();
    let missing = t.soil_ph.iter().filter(|p| p.is_none()).count() as f64 / t.len() as f64;
    assert!((0.01..=0.03).contains(&missing), "missing share {missing}");
}

#[test]
fn many_zero_visits_and_zeros_in_every_village() {
    let t = default_table();
    let zeros = t.visits.iter().filter(|&&v| v == 0).count() as f64 / t.len() as f64;
    // Designed share: 0.35 structural zeros plus Poisson zeros, about 0.47 on this layout.
    assert!((0.35..=0.60).contains(&zeros), "zero share {zeros}");
    let villages_with_zero: HashSet<u32> = (0..t.len())
        .filter(|&i| t.visits[i] == 0)
        .map(|i| t.village.codes[i])
        .collect();
    assert_eq!(villages_with_zero.len(), 150);
}

#[test]
fn visits_go_more_to_irrigated_and_larger_plots() {
    let t = default_table();
    let (irr, dry): (Vec<usize>, Vec<usize>) = (0..t.len()).partition(|&i| t.irrigated[i] == 1);
    let mean_visits =
        |rows: &[usize]| mean(&rows.iter().map(|&i| t.visits[i] as f64).collect::<Vec<_>>());
    assert!(mean_visits(&irr) > 1.3 * mean_visits(&dry));
    let visits: Vec<f64> = t.visits.iter().map(|&v| v as f64).collect();
    assert!(correlation(&visits, &t.area_ha) > 0.1);
}

/// Omitting area and irrigation must overstate the visits effect; including them should land
/// near the true 0.03. Plain normal-equations OLS (common practice), solved by Cholesky.
#[test]
fn leaving_out_area_and_irrigation_biases_visits_up() {
    let t = default_table();
    let y: Vec<f64> = t.yield_t_ha.iter().map(|y| y.ln()).collect();
    let visits: Vec<f64> = t.visits.iter().map(|&v| v as f64).collect();
    let irrigated: Vec<f64> = t.irrigated.iter().map(|&v| v as f64).collect();
    let ones = vec![1.0; t.len()];

    let (short, _) = ols(&[&ones, &visits], &y);
    let (long, long_se) = ols(&[&ones, &visits, &t.area_ha, &irrigated], &y);
    eprintln!(
        "visits coefficient: no controls {:.4}, with area_ha + irrigated {:.4} (se {:.4}); truth {}",
        short[1], long[1], long_se[1], truth::BETA_VISITS
    );
    assert!(
        short[1] > long[1] + 0.02,
        "short {} long {}",
        short[1],
        long[1]
    );
    assert!(
        (long[1] - truth::BETA_VISITS).abs() < 4.0 * long_se[1],
        "controlled estimate {} too far from {}",
        long[1],
        truth::BETA_VISITS
    );
}

#[test]
fn bad_settings_are_rejected_with_a_message() {
    let base = OrchardConfig::default();
    let cases = [
        (
            OrchardConfig {
                plots: 0,
                ..base.clone()
            },
            "plots is 0",
        ),
        (
            OrchardConfig {
                districts: 9,
                ..base.clone()
            },
            "give 1 to 8",
        ),
        (
            OrchardConfig {
                villages: 4,
                ..base.clone()
            },
            "at least one village per district",
        ),
        (
            OrchardConfig {
                plots: 100,
                ..base.clone()
            },
            "at least one plot per village",
        ),
        (
            OrchardConfig {
                seasons: usize::MAX,
                ..base.clone()
            },
            "too large",
        ),
    ];
    for (cfg, expected) in cases {
        let message = generate(&cfg).unwrap_err().to_string();
        assert!(message.contains(expected), "{message:?} lacks {expected:?}");
    }
}

#[test]
fn small_and_odd_shapes_work() {
    let cfg = OrchardConfig {
        plots: 7,
        seasons: 3,
        villages: 7,
        districts: 3,
        seed: 1,
    };
    let t = generate(&cfg).unwrap();
    assert_eq!(t.len(), 21);
    assert_eq!(t.season.levels, ["2024", "2025", "2026"]);
    assert_eq!(t.district.iter().collect::<HashSet<_>>().len(), 3);
    // Tree age and experience grow by one per season within a plot.
    assert_eq!(t.experience_yrs[1] - t.experience_yrs[0], 1);
    assert!((t.tree_age[2] - t.tree_age[0] - 2.0).abs() < 1e-9);
}

fn mean(x: &[f64]) -> f64 {
    x.iter().sum::<f64>() / x.len() as f64
}

fn correlation(x: &[f64], y: &[f64]) -> f64 {
    let (mx, my) = (mean(x), mean(y));
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
    let syy: f64 = y.iter().map(|b| (b - my).powi(2)).sum();
    sxy / (sxx * syy).sqrt()
}

/// OLS by the normal equations with classical standard errors: b = (X'X)⁻¹X'y,
/// se = sqrt(diag((X'X)⁻¹)·RSS/(n−k)) (textbook formulas, common practice).
fn ols(columns: &[&[f64]], y: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let k = columns.len();
    let n = y.len();
    let mut xtx = vec![vec![0.0; k]; k];
    let mut xty = vec![0.0; k];
    for a in 0..k {
        xty[a] = columns[a].iter().zip(y).map(|(x, y)| x * y).sum();
        for b in 0..k {
            xtx[a][b] = columns[a].iter().zip(columns[b]).map(|(p, q)| p * q).sum();
        }
    }
    let inverse = invert_spd(&xtx);
    let beta: Vec<f64> = (0..k)
        .map(|a| (0..k).map(|b| inverse[a][b] * xty[b]).sum())
        .collect();
    let rss: f64 = (0..n)
        .map(|i| y[i] - (0..k).map(|a| beta[a] * columns[a][i]).sum::<f64>())
        .map(|r| r * r)
        .sum();
    let sigma2 = rss / (n - k) as f64;
    let se = (0..k).map(|a| (inverse[a][a] * sigma2).sqrt()).collect();
    (beta, se)
}

/// Inverse of a small symmetric positive-definite matrix by Gauss–Jordan elimination.
fn invert_spd(m: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = m.len();
    let mut a: Vec<Vec<f64>> = m
        .iter()
        .enumerate()
        .map(|(i, row)| {
            let mut r = row.clone();
            r.extend((0..k).map(|j| if i == j { 1.0 } else { 0.0 }));
            r
        })
        .collect();
    for col in 0..k {
        let pivot = a[col][col];
        assert!(pivot.abs() > 1e-12, "singular design in test helper");
        for v in a[col].iter_mut() {
            *v /= pivot;
        }
        for row in 0..k {
            if row != col {
                let factor = a[row][col];
                let pivot_row = a[col].clone();
                for (v, p) in a[row].iter_mut().zip(pivot_row) {
                    *v -= factor * p;
                }
            }
        }
    }
    a.into_iter().map(|r| r[k..].to_vec()).collect()
}
