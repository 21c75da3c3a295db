//! Absorbed fixed effects against explicit indicator columns (Frisch–Waugh–Lovell theorem:
//! Frisch & Waugh 1933, Econometrica 1:387; Lovell 1963, JASA 58:993): the slope estimates, the
//! residuals and hence every covariance built from them agree with the regression that carries
//! one indicator column per level, once the degrees-of-freedom rule of docs/methods.md is applied.
//! The explicit side is an ordinary engine fit on the expanded design (checked against
//! statsmodels in reference.rs and absorb_reference.rs). Designs are seeded and invented; they
//! are inputs, never check values.

mod support;

use faer::Mat;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use specgrid_ols::{
    absorb, AbsorbError, AbsorbOptions, AbsorbedDesign, ClusterIds, Covariance, Design, FitOptions,
    ModelError, ModelFit, ModelSpec, RowWeights, SharedFactor, WeightKind,
};
use support::close;

/// Relative agreement demanded between absorbed and explicit fits.
const RTOL: f64 = 1e-9;

/// An unbalanced two-way panel: units × periods, each cell kept with probability 0.8 and
/// doubled with probability 0.1. With `islands`, units of the first half are seen only in the
/// first half of the periods and the others only in the second: the unit–period level graph has
/// two connected components.
struct Panel {
    unit: Vec<u32>,
    period: Vec<u32>,
    units: usize,
    periods: usize,
    x1: Vec<f64>,
    x2: Vec<f64>,
    y: Vec<f64>,
    /// Region = unit / 5 (nests the unit effect).
    region: Vec<u32>,
    /// Two random groupings that nest nothing.
    g1: Vec<u32>,
    g2: Vec<u32>,
    /// Positive analytic weights and whole-number frequency weights.
    w_analytic: Vec<f64>,
    w_freq: Vec<f64>,
}

fn panel(seed: u64, units: usize, periods: usize, islands: bool) -> Panel {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let normal = |rng: &mut ChaCha8Rng| -> f64 { StandardNormal.sample(rng) };
    let ue: Vec<f64> = (0..units).map(|_| normal(&mut rng)).collect();
    let pe: Vec<f64> = (0..periods).map(|_| normal(&mut rng)).collect();
    let mut p = Panel {
        unit: vec![],
        period: vec![],
        units,
        periods,
        x1: vec![],
        x2: vec![],
        y: vec![],
        region: vec![],
        g1: vec![],
        g2: vec![],
        w_analytic: vec![],
        w_freq: vec![],
    };
    for (u, &u_effect) in ue.iter().enumerate() {
        for (t, &t_effect) in pe.iter().enumerate() {
            if islands && ((u < units / 2) != (t < periods / 2)) {
                continue;
            }
            if !rng.random_bool(0.8) {
                continue;
            }
            let copies = if rng.random_bool(0.1) { 2 } else { 1 };
            for _ in 0..copies {
                let x1 = u_effect + 0.5 * t_effect + normal(&mut rng);
                let x2 = normal(&mut rng);
                let noise = (0.5 + x2.abs()) * normal(&mut rng);
                p.unit.push(u as u32);
                p.period.push(t as u32);
                p.x1.push(x1);
                p.x2.push(x2);
                p.y.push(0.5 * x1 - 0.3 * x2 + 2.0 * u_effect + t_effect + noise);
                p.region.push((u / 5) as u32);
                p.g1.push(rng.random_range(0..9));
                p.g2.push(rng.random_range(0..7));
                p.w_analytic.push(rng.random_range(0.2..3.0));
                p.w_freq.push(rng.random_range(1..4) as f64);
            }
        }
    }
    p
}

fn ids(name: &str, codes: &[u32], count: usize) -> ClusterIds {
    ClusterIds {
        name: name.into(),
        codes: codes.to_vec(),
        count,
    }
}

impl Panel {
    fn clusters(&self) -> Vec<ClusterIds> {
        let cells: Vec<u32> = self
            .g1
            .iter()
            .zip(&self.g2)
            .map(|(a, b)| a * 7 + b)
            .collect();
        vec![
            ids("region", &self.region, self.units.div_ceil(5)),
            ids("g1", &self.g1, 9),
            ids("g2", &self.g2, 7),
            ids("period", &self.period, self.periods),
            ids("g1 × g2", &cells, 63),
        ]
    }

    /// Columns: intercept, x1, x2 (the absorbed design; the intercept must vanish).
    fn absorbed_input(&self) -> Design {
        let n = self.y.len();
        Design {
            x: Mat::from_fn(n, 3, |i, j| [1.0, self.x1[i], self.x2[i]][j]),
            y: Mat::from_fn(n, 1, |i, _| self.y[i]),
            x_names: vec!["one".into(), "x1".into(), "x2".into()],
            y_names: vec!["y".into()],
            clusters: self.clusters(),
        }
    }

    /// Columns: x1, x2, one indicator per unit, one per period (with `two_way`), over `rows`.
    fn explicit(&self, rows: &[usize], two_way: bool) -> Design {
        let n = rows.len();
        let p = 2 + self.units + if two_way { self.periods } else { 0 };
        let x = Mat::from_fn(n, p, |i, j| {
            let r = rows[i];
            match j {
                0 => self.x1[r],
                1 => self.x2[r],
                j if j < 2 + self.units => f64::from(self.unit[r] as usize == j - 2),
                j => f64::from(self.period[r] as usize == j - 2 - self.units),
            }
        });
        let mut x_names = vec!["x1".to_string(), "x2".to_string()];
        x_names.extend((2..p).map(|j| format!("d{j}")));
        let clusters = self
            .clusters()
            .into_iter()
            .map(|c| ClusterIds {
                codes: rows.iter().map(|&r| c.codes[r]).collect(),
                ..c
            })
            .collect();
        Design {
            x,
            y: Mat::from_fn(n, 1, |i, _| self.y[rows[i]]),
            x_names,
            y_names: vec!["y".into()],
            clusters,
        }
    }

    fn effects(&self, two_way: bool) -> Vec<ClusterIds> {
        let mut e = vec![ids("unit", &self.unit, self.units)];
        if two_way {
            e.push(ids("period", &self.period, self.periods));
        }
        e
    }
}

fn options(covs: &[Covariance]) -> FitOptions {
    FitOptions {
        covariances: covs.to_vec(),
        ..FitOptions::default()
    }
}

const ALL_ONE_WAY: [Covariance; 10] = [
    Covariance::Classical,
    Covariance::Hc0,
    Covariance::Hc1,
    Covariance::Hc2,
    Covariance::Hc3,
    Covariance::Cluster { dim: 0 },
    Covariance::Cluster { dim: 1 },
    Covariance::TwoWayCluster {
        first: 1,
        second: 2,
    },
    Covariance::Cluster { dim: 2 },
    Covariance::Cluster { dim: 4 },
];

/// Two-way errors on g1 and g2 (position 7 of [`ALL_ONE_WAY`]) built from the one-way pieces on
/// g1 (6), g2 (8) and g1 × g2 (9): V_A + V_B − V_AB, each with its own CR1 factor (Cameron,
/// Gelbach & Miller 2011). The explicit fit's own two-way matrix cannot serve: its eigenvalue
/// repair acts on all its coefficients, indicators included.
const TWO_WAY_PARTS: Option<(usize, [usize; 3])> = Some((7, [6, 8, 9]));

/// Compares the x1, x2 coefficients of an absorbed and an explicit fit; `ratio[c]` scales the
/// explicit variance of covariance c (the nesting rule), 1 elsewhere. With `two_way`, that
/// covariance is checked against its one-way pieces instead (and needs a slope block that is
/// positive semi-definite, so the absorbed side's repair does nothing; asserted).
fn assert_fwl(
    absorbed: &ModelFit,
    explicit: &ModelFit,
    covs: &[Covariance],
    ratio: &[f64],
    two_way: Option<(usize, [usize; 3])>,
) {
    if let Some((c, [a, b, ab])) = two_way {
        let ve = &explicit.tracked_covariance;
        let expected: Vec<f64> = (0..4).map(|i| ve[a][i] + ve[b][i] - ve[ab][i]).collect();
        let det = expected[0] * expected[3] - expected[1] * expected[2];
        assert!(
            expected[0] > 0.0 && det > 0.0,
            "seed gives an indefinite slope block"
        );
        for (x, e) in absorbed.tracked_covariance[c].iter().zip(&expected) {
            assert!(
                (x - e).abs() <= RTOL * expected[0].max(expected[3]),
                "two-way"
            );
        }
    }
    let skip = two_way.map(|(c, _)| c);
    assert_eq!(absorbed.n_obs, explicit.n_obs, "n");
    assert_eq!(absorbed.df_resid, explicit.df_resid, "df_resid");
    assert!(
        close(absorbed.resid_sd, explicit.resid_sd, RTOL),
        "resid sd"
    );
    // The explicit indicators span the constant, so its R² is centred: the overall R².
    assert!(
        close(absorbed.r_squared, explicit.r_squared, RTOL),
        "R² {} vs {}",
        absorbed.r_squared,
        explicit.r_squared
    );
    assert!(close(absorbed.adj_r_squared, explicit.adj_r_squared, RTOL));
    for (a, e) in absorbed.coefficients.iter().zip(&explicit.coefficients) {
        assert!(
            close(a.estimate, e.estimate, RTOL),
            "estimate {} vs {}",
            a.estimate,
            e.estimate
        );
        for (c, (ia, ie)) in a.inference.iter().zip(&e.inference).enumerate() {
            if skip == Some(c) {
                continue;
            }
            let expected = ie.std_error * ratio[c].sqrt();
            assert!(
                close(ia.std_error, expected, RTOL),
                "{:?}: SE {:e} vs explicit {:e}",
                covs[c],
                ia.std_error,
                expected
            );
            assert_eq!(ia.df, ie.df, "{:?} t df", covs[c]);
        }
    }
    for (c, (va, ve)) in absorbed
        .tracked_covariance
        .iter()
        .zip(&explicit.tracked_covariance)
        .enumerate()
        .filter(|(c, _)| skip != Some(*c))
    {
        for (a, e) in va.iter().zip(ve) {
            let scale = ve[0].abs().max(ve[3].abs());
            assert!(
                (a - e * ratio[c]).abs() <= RTOL * scale,
                "{:?} cov",
                covs[c]
            );
        }
    }
}

/// (n − 1)/(n − k) of the CR1 factor (Cameron & Miller 2015, J. Human Resources 50:317).
fn cr1_tail(n: usize, k: usize) -> f64 {
    (n as f64 - 1.0) / (n - k) as f64
}

fn tracked_model(columns: Vec<usize>) -> ModelSpec {
    let tracked = columns[..2].to_vec();
    ModelSpec {
        columns,
        outcome: 0,
        tracked,
    }
}

/// The x1, x2 slopes (union columns 1, 2 of [`Panel::absorbed_input`]) on an absorbed design.
fn slopes_fit(prepared: &AbsorbedDesign, covs: &[Covariance]) -> Result<ModelFit, ModelError> {
    SharedFactor::absorbed(prepared).unwrap().fit(
        &ModelSpec {
            columns: vec![1, 2],
            outcome: 0,
            tracked: vec![1, 2],
        },
        &options(covs),
    )
}

/// Every column of an explicit-indicator design, x1 and x2 tracked.
fn explicit_fit(factor: &SharedFactor<'_>, covs: &[Covariance]) -> ModelFit {
    let cols: Vec<usize> = (0..factor.design().x.ncols()).collect();
    factor.fit(&tracked_model(cols), &options(covs)).unwrap()
}

/// Absorbs the panel's unit (and period) effect, unweighted.
fn absorb_panel(p: &Panel, two_way: bool) -> AbsorbedDesign {
    absorb(
        &p.absorbed_input(),
        &p.effects(two_way),
        None,
        &AbsorbOptions::default(),
    )
    .unwrap()
}

#[test]
fn one_way_matches_explicit_indicators_for_every_covariance() {
    let p = panel(7001, 24, 10, false);
    let prepared = absorb_panel(&p, false);
    assert_eq!(prepared.info.absorbed_params, 24);
    assert_eq!(prepared.info.sweeps, 1);
    // Region (unit / 5) nests the unit effect; g1 does not.
    assert_eq!(prepared.info.nested_in, vec![vec![0]]);
    let fit_a = SharedFactor::absorbed(&prepared)
        .unwrap()
        .fit(
            &ModelSpec {
                columns: vec![1, 2, 0],
                outcome: 0,
                tracked: vec![1, 2],
            },
            &options(&ALL_ONE_WAY),
        )
        .unwrap();
    // The intercept column is all zero after demeaning and is dropped, not fitted on noise.
    assert_eq!(fit_a.dropped, vec![0]);
    assert_eq!(fit_a.absorbed_params, 24);
    let explicit = p.explicit(&prepared.info.rows_kept, false);
    let fit_e = explicit_fit(&SharedFactor::new(&explicit).unwrap(), &ALL_ONE_WAY);
    let n = fit_e.n_obs;
    // Nesting rule for region: the 24 unit parameters leave k (k = 2 + 24 explicit).
    let mut ratio = vec![1.0; ALL_ONE_WAY.len()];
    ratio[5] = cr1_tail(n, 2) / cr1_tail(n, 26);
    assert_fwl(&fit_a, &fit_e, &ALL_ONE_WAY, &ratio, TWO_WAY_PARTS);
    // Within R²: 1 − RSS/RSS(y on the indicators alone).
    let fe_only = SharedFactor::new(&explicit)
        .unwrap()
        .fit(
            &ModelSpec {
                columns: (2..explicit.x.ncols()).collect(),
                outcome: 0,
                tracked: vec![2],
            },
            &FitOptions::default(),
        )
        .unwrap();
    let rss = |f: &ModelFit| f.resid_sd.powi(2) * f.df_resid as f64;
    let within = 1.0 - rss(&fit_e) / rss(&fe_only);
    assert!(close(fit_a.within_r_squared.unwrap(), within, RTOL));
}

#[test]
fn two_way_unbalanced_disconnected_matches_explicit_indicators() {
    let p = panel(7002, 20, 12, true);
    let prepared = absorb_panel(&p, true);
    // Two islands: 20 + 12 levels − 2 components (by construction).
    assert_eq!(prepared.info.components, Some(2));
    assert_eq!(prepared.info.absorbed_params, 30);
    assert!(prepared.info.sweeps > 1 && prepared.info.final_change <= 1e-13);
    let covs = [
        Covariance::Classical,
        Covariance::Hc0,
        Covariance::Hc1,
        Covariance::Cluster { dim: 0 },
        Covariance::Cluster { dim: 1 },
        Covariance::Cluster { dim: 3 },
        Covariance::TwoWayCluster {
            first: 1,
            second: 2,
        },
        Covariance::Cluster { dim: 2 },
        Covariance::Cluster { dim: 4 },
        Covariance::Hc2,
        Covariance::Hc3,
    ];
    let fit_a = slopes_fit(&prepared, &covs).unwrap();
    let explicit = p.explicit(&prepared.info.rows_kept, true);
    let fit_e = explicit_fit(&SharedFactor::new(&explicit).unwrap(), &covs);
    // The engine found the same rank: two indicator columns dropped as collinear.
    assert_eq!(fit_e.dropped.len(), 2);
    let n = fit_e.n_obs;
    let mut ratio = vec![1.0; covs.len()];
    // Region nests the 20 unit levels: a = 30 − 20 = 10 counted; period nests the 12 periods.
    ratio[3] = cr1_tail(n, 12) / cr1_tail(n, 32);
    ratio[5] = cr1_tail(n, 20) / cr1_tail(n, 32);
    assert_fwl(&fit_a, &fit_e, &covs, &ratio, Some((6, [4, 7, 8])));
    // With a third absorbed set the absorbed leverage is not built: HC2/HC3 are refused with a
    // reason, not given a wrong number.
    let mut three = p.effects(true);
    three.push(ids("g1", &p.g1, 9));
    let prepared = absorb(&p.absorbed_input(), &three, None, &AbsorbOptions::default()).unwrap();
    let err = slopes_fit(&prepared, &[Covariance::Hc2]).unwrap_err();
    assert!(matches!(err, ModelError::InvalidRequest(ref m) if m.contains("HC2/HC3")));
}

/// The slopes with analytic weights two ways: effects absorbed, and explicit indicators
/// (weights only) over the same kept rows.
fn weighted_pair(p: &Panel, two_way: bool, covs: &[Covariance]) -> (ModelFit, ModelFit) {
    let w = RowWeights {
        name: "plot_area".into(),
        kind: WeightKind::Analytic,
        values: p.w_analytic.clone(),
    };
    let opts = AbsorbOptions::default();
    let prepared = absorb(&p.absorbed_input(), &p.effects(two_way), Some(&w), &opts).unwrap();
    let fit_a = slopes_fit(&prepared, covs).unwrap();
    let rows = &prepared.info.rows_kept;
    let explicit = p.explicit(rows, two_way);
    let we = RowWeights {
        values: rows.iter().map(|&r| p.w_analytic[r]).collect(),
        ..w
    };
    let weighted = absorb(&explicit, &[], Some(&we), &opts).unwrap();
    let fit_e = explicit_fit(&SharedFactor::absorbed(&weighted).unwrap(), covs);
    (fit_a, fit_e)
}

/// Two-way with analytic weights: the absorbed leverage (for HC2/HC3) is the weighted one.
#[test]
fn two_way_weighted_leverage_matches_explicit_indicators() {
    let covs = [Covariance::Hc2, Covariance::Hc3, Covariance::Classical];
    let (fit_a, fit_e) = weighted_pair(&panel(7010, 14, 9, true), true, &covs);
    assert_fwl(&fit_a, &fit_e, &covs, &[1.0; 3], None);
}

#[test]
fn analytic_weights_with_effects_match_weighted_explicit_indicators() {
    let (fit_a, fit_e) = weighted_pair(&panel(7003, 18, 8, false), false, &ALL_ONE_WAY);
    let n = fit_e.n_obs;
    let mut ratio = vec![1.0; ALL_ONE_WAY.len()];
    ratio[5] = cr1_tail(n, 2) / cr1_tail(n, 20);
    assert_fwl(&fit_a, &fit_e, &ALL_ONE_WAY, &ratio, TWO_WAY_PARTS);
}

/// Repeats every row f times (integer frequency weights made literal).
fn expand(d: &Design, f: &[f64]) -> Design {
    let rows: Vec<usize> = (0..f.len())
        .flat_map(|i| std::iter::repeat_n(i, f[i] as usize))
        .collect();
    let n = rows.len();
    Design {
        x: Mat::from_fn(n, d.x.ncols(), |i, j| d.x[(rows[i], j)]),
        y: Mat::from_fn(n, d.y.ncols(), |i, j| d.y[(rows[i], j)]),
        x_names: d.x_names.clone(),
        y_names: d.y_names.clone(),
        clusters: d
            .clusters
            .iter()
            .map(|c| ClusterIds {
                codes: rows.iter().map(|&r| c.codes[r]).collect(),
                ..c.clone()
            })
            .collect(),
    }
}

fn expand_ids(e: &ClusterIds, f: &[f64]) -> ClusterIds {
    ClusterIds {
        codes: (0..f.len())
            .flat_map(|i| std::iter::repeat_n(e.codes[i], f[i] as usize))
            .collect(),
        ..e.clone()
    }
}

/// Frequency weights are the same fit as the data with each row repeated (definition of a
/// frequency weight; common practice), for every covariance choice: with and without an
/// absorbed effect.
#[test]
fn frequency_weights_equal_literally_repeated_rows() {
    let p = panel(7004, 15, 8, false);
    let input = p.absorbed_input();
    let w = RowWeights {
        name: "trees".into(),
        kind: WeightKind::Frequency,
        values: p.w_freq.clone(),
    };
    let big = expand(&input, &p.w_freq);
    for with_effect in [false, true] {
        let (effects, big_effects, columns) = if with_effect {
            let e = p.effects(false);
            let be = vec![expand_ids(&e[0], &p.w_freq)];
            (e, be, vec![1, 2])
        } else {
            (vec![], vec![], vec![1, 2, 0])
        };
        let model = ModelSpec {
            columns,
            outcome: 0,
            tracked: vec![1, 2],
        };
        let opts = AbsorbOptions::default();
        let weighted = absorb(&input, &effects, Some(&w), &opts).unwrap();
        let repeated = absorb(&big, &big_effects, None, &opts).unwrap();
        assert_eq!(weighted.info.observations, repeated.info.rows_kept.len());
        let fw = SharedFactor::absorbed(&weighted)
            .unwrap()
            .fit(&model, &options(&ALL_ONE_WAY))
            .unwrap();
        let fr = SharedFactor::absorbed(&repeated)
            .unwrap()
            .fit(&model, &options(&ALL_ONE_WAY))
            .unwrap();
        assert_fwl(&fw, &fr, &ALL_ONE_WAY, &[1.0; 10], None);
        assert_eq!(fw.within_r_squared.is_some(), with_effect);
        if let (Some(a), Some(b)) = (fw.within_r_squared, fr.within_r_squared) {
            assert!(close(a, b, RTOL));
        }
    }
}

#[test]
fn singletons_are_dropped_until_none_is_left() {
    // Hand-built: row 4 is alone in unit 3; dropping it leaves row 3 alone in period 2
    // (periods: rows 3 and 4 share period 2), which is then dropped too.
    let unit = [0, 0, 1, 1, 3, 0, 1];
    let period = [0, 1, 0, 2, 2, 0, 1];
    let n = unit.len();
    let d = Design {
        x: Mat::from_fn(n, 1, |i, _| i as f64 * 0.37 + (i * i) as f64 * 0.01),
        y: Mat::from_fn(n, 1, |i, _| (i as f64).sin()),
        x_names: vec!["x".into()],
        y_names: vec!["y".into()],
        clusters: vec![],
    };
    let prepared = absorb(
        &d,
        &[ids("unit", &unit, 4), ids("period", &period, 3)],
        None,
        &AbsorbOptions::default(),
    )
    .unwrap();
    assert_eq!(prepared.info.singletons_dropped, 2);
    assert_eq!(prepared.info.rows_kept, vec![0, 1, 2, 5, 6]);
    assert_eq!(prepared.info.levels, vec![2, 2]);
}

#[test]
fn bad_weights_name_the_row_count() {
    let p = panel(7005, 6, 5, false);
    let input = p.absorbed_input();
    let n = p.y.len();
    let run = |values: Vec<f64>, kind| {
        absorb(
            &input,
            &[],
            Some(&RowWeights {
                name: "plot_area".into(),
                kind,
                values,
            }),
            &AbsorbOptions::default(),
        )
        .unwrap_err()
    };
    let mut v = vec![1.0; n];
    v[0] = -1.0;
    v[3] = -0.5;
    let e = run(v, WeightKind::Analytic);
    assert_eq!(
        e,
        AbsorbError::NegativeWeights {
            name: "plot_area".into(),
            rows: 2
        }
    );
    assert!(e.to_string().contains("2 row(s)"));
    let mut v = vec![1.0; n];
    v[1] = f64::NAN;
    assert!(matches!(
        run(v, WeightKind::Analytic),
        AbsorbError::MissingWeights { rows: 1, .. }
    ));
    let mut v = vec![1.0; n];
    v[2] = 1.5;
    assert!(matches!(
        run(v, WeightKind::Frequency),
        AbsorbError::FractionalFrequency { rows: 1, .. }
    ));
    assert!(matches!(
        run(vec![0.0; n], WeightKind::Analytic),
        AbsorbError::NoRowsLeft { .. }
    ));
}

/// Zero weights drop the row: same fit as leaving the rows out.
#[test]
fn zero_weights_drop_rows() {
    let p = panel(7006, 10, 6, false);
    let input = p.absorbed_input();
    let mut values = p.w_analytic.clone();
    let zeroed: Vec<usize> = (0..values.len()).step_by(4).collect();
    zeroed.iter().for_each(|&i| values[i] = 0.0);
    let w = RowWeights {
        name: "w".into(),
        kind: WeightKind::Analytic,
        values: values.clone(),
    };
    let opts = AbsorbOptions::default();
    let a = absorb(&input, &[], Some(&w), &opts).unwrap();
    assert_eq!(a.info.zero_weight_dropped, zeroed.len());
    let kept: Vec<usize> = (0..values.len()).filter(|i| values[*i] > 0.0).collect();
    let sub = Design {
        x: Mat::from_fn(kept.len(), 3, |i, j| input.x[(kept[i], j)]),
        y: Mat::from_fn(kept.len(), 1, |i, _| input.y[(kept[i], 0)]),
        x_names: input.x_names.clone(),
        y_names: input.y_names.clone(),
        clusters: vec![],
    };
    let ws = RowWeights {
        values: kept.iter().map(|&i| values[i]).collect(),
        ..w
    };
    let b = absorb(&sub, &[], Some(&ws), &opts).unwrap();
    let model = ModelSpec {
        columns: vec![0, 1, 2],
        outcome: 0,
        tracked: vec![1, 2],
    };
    let covs = [Covariance::Classical, Covariance::Hc1, Covariance::Hc3];
    let fa = SharedFactor::absorbed(&a)
        .unwrap()
        .fit(&model, &options(&covs))
        .unwrap();
    let fb = SharedFactor::absorbed(&b)
        .unwrap()
        .fit(&model, &options(&covs))
        .unwrap();
    assert_fwl(&fa, &fb, &covs, &[1.0; 3], None);
}

#[test]
fn too_few_sweeps_is_an_error_naming_the_effects() {
    let p = panel(7007, 20, 12, true);
    let err = absorb(
        &p.absorbed_input(),
        &p.effects(true),
        None,
        &AbsorbOptions {
            tolerance: 1e-13,
            max_sweeps: 2,
        },
    )
    .unwrap_err();
    let text = err.to_string();
    assert!(matches!(err, AbsorbError::NotConverged { .. }), "{text}");
    assert!(text.contains("`unit` and `period`"), "{text}");
}

/// A tracked column constant within the absorbed levels has no within variation: the model is
/// refused by name rather than given an estimate of rounding noise.
#[test]
fn tracked_column_absorbed_by_the_effects_is_refused() {
    let p = panel(7008, 12, 6, false);
    let prepared = absorb_panel(&p, false);
    let err = SharedFactor::absorbed(&prepared)
        .unwrap()
        .fit(
            &ModelSpec {
                columns: vec![0, 1],
                outcome: 0,
                tracked: vec![0],
            },
            &FitOptions::default(),
        )
        .unwrap_err();
    assert!(matches!(err, ModelError::TrackedDropped { .. }));
    // A model of nothing but the vanished intercept: an answer or a typed error, never a panic.
    let only = SharedFactor::absorbed(&prepared).unwrap().fit(
        &ModelSpec {
            columns: vec![0],
            outcome: 0,
            tracked: vec![],
        },
        &options(&[Covariance::Classical, Covariance::Hc1]),
    );
    if let Ok(fit) = only {
        assert!(fit.coefficients.is_empty() && fit.dropped == vec![0]);
    }
}

/// Nonsense convergence settings are refused before any work.
#[test]
fn invalid_absorb_options_are_refused() {
    let p = panel(7009, 8, 5, false);
    for (tolerance, max_sweeps) in [(f64::NAN, 10), (0.0, 10), (1.0, 10), (1e-12, 0)] {
        let err = absorb(
            &p.absorbed_input(),
            &p.effects(true),
            None,
            &AbsorbOptions {
                tolerance,
                max_sweeps,
            },
        )
        .unwrap_err();
        assert!(matches!(err, AbsorbError::InvalidOptions(_)), "{err}");
    }
}
