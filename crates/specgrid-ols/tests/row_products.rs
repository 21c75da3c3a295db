//! The pass over rows forms its products either as matrix products over every union column or
//! by loops over each model's own columns (`RowProducts`). Both must give every covariance
//! choice, leverage-based ones and two-way clustering included, the same numbers to rounding,
//! on plain, absorbed and weighted designs, and agree with a fresh QR of each model's own
//! columns (`fit_independent`, which shares no code with the pass over rows).

mod support;

use specgrid_ols::{
    fit_independent, CovarianceRoute, FitOptions, ModelError, ModelFit, ModelSpec, RowProducts,
    RowWeights, SharedFactor, WeightKind,
};
use support::{
    all_covariances, compare_fits, random_design, random_models, with_village_effects,
    without_intercept,
};

type Fits = Vec<Result<ModelFit, ModelError>>;

/// Fits `models` on a fresh factor from `make` with the row pass forced to `products`.
fn fit_with<'a>(
    make: impl Fn() -> SharedFactor<'a>,
    products: RowProducts,
    models: &[ModelSpec],
    opts: &FitOptions,
) -> Fits {
    let mut factor = make();
    factor.set_covariance_route(CovarianceRoute::Direct);
    factor.set_row_products(products);
    factor.fit_many(models, opts)
}

/// Dense against own columns, model by model (both fitted or both refused alike); returns how
/// many models were compared.
fn compare(dense: &Fits, own: &Fits, rel: f64) -> usize {
    let mut fitted = 0;
    for (i, (d, o)) in dense.iter().zip(own).enumerate() {
        match (d, o) {
            (Ok(a), Ok(b)) => {
                compare_fits(a, b, rel).unwrap_or_else(|e| panic!("model {i}: {e}"));
                fitted += 1;
            }
            (Err(a), Err(b)) => assert_eq!(a, b, "model {i}"),
            _ => panic!("model {i}: products disagree: {d:?} vs {o:?}"),
        }
    }
    fitted
}

#[test]
fn own_columns_match_dense_products_and_a_fresh_qr_for_every_covariance() {
    // 1,103 rows: three blocks of rows (512 each), the last one with a length that is not a
    // multiple of the dot products' four partial sums.
    let design = random_design(71, 1_103, 6, 4, 23, 9);
    let models = random_models(72, &design, 120, 6, 4);
    let opts = all_covariances();
    let make = || SharedFactor::new(&design).unwrap();
    let dense = fit_with(make, RowProducts::Dense, &models, &opts);
    let own = fit_with(make, RowProducts::OwnColumns, &models, &opts);
    let fitted = compare(&dense, &own, 1e-11);
    assert!(fitted >= 100, "only {fitted} models fitted");
    for (model, o) in models.iter().zip(&own) {
        if let Ok(o) = o {
            let fresh = fit_independent(&design, model, &opts).unwrap();
            compare_fits(o, &fresh, 1e-10).unwrap_or_else(|e| panic!("{model:?}: {e}"));
        }
    }
}

#[test]
fn automatic_choice_matches_both() {
    let design = random_design(73, 300, 6, 4, 23, 9);
    let models = random_models(74, &design, 60, 6, 4);
    let opts = all_covariances();
    let make = || SharedFactor::new(&design).unwrap();
    let auto = fit_with(make, RowProducts::Auto, &models, &opts);
    for forced in [RowProducts::Dense, RowProducts::OwnColumns] {
        compare(&auto, &fit_with(make, forced, &models, &opts), 1e-11);
    }
}

/// An absorbed design (60 village effects) with `weights`, every covariance choice.
fn absorbed_agrees(weights: Option<RowWeights>) {
    let base = random_design(75, 2_000, 4, 3, 30, 20);
    let prepared = with_village_effects(&base, weights.as_ref());
    // The intercept is absorbed; keep the rest.
    let models = without_intercept(random_models(76, &base, 60, 4, 3));
    let opts = all_covariances();
    let make = || SharedFactor::absorbed(&prepared).unwrap();
    let dense = fit_with(make, RowProducts::Dense, &models, &opts);
    let own = fit_with(make, RowProducts::OwnColumns, &models, &opts);
    assert!(compare(&dense, &own, 1e-11) >= 40);
}

#[test]
fn absorbed_designs_agree() {
    absorbed_agrees(None);
}

#[test]
fn frequency_weighted_designs_agree() {
    absorbed_agrees(Some(RowWeights {
        name: "trees_counted".into(),
        kind: WeightKind::Frequency,
        values: (0..2_000).map(|i| (1 + (i * 13) % 5) as f64).collect(),
    }));
}

#[test]
fn analytic_weighted_designs_agree() {
    absorbed_agrees(Some(RowWeights {
        name: "plot_area".into(),
        kind: WeightKind::Analytic,
        values: (0..2_000)
            .map(|i| 0.5 + ((i * 37) % 17) as f64 / 8.0)
            .collect(),
    }));
}
