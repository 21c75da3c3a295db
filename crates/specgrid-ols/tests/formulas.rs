//! Residual-based covariances and the Breusch–Pagan statistic against the textbook formulas,
//! computed here the slow, obvious way: explicit loops, the dense sandwich
//! (X'X)⁻¹ X'ΩX (X'X)⁻¹ with (X'X)⁻¹ from Gauss–Jordan elimination. Sources beside each formula.

mod support;

use faer::Mat;
use specgrid_ols::{fit_independent, Covariance, Design, ModelFit, ModelSpec, SharedFactor};
use statrs::distribution::{ChiSquared, ContinuousCDF, StudentsT};
use support::{all_covariances, close, random_design};

const CONT: usize = 6;
const LEVELS: usize = 4;
const REL: f64 = 1e-9;

/// Dense inverse by Gauss–Jordan elimination with partial pivoting.
fn invert(a: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = a.len();
    let mut m: Vec<Vec<f64>> = a
        .iter()
        .enumerate()
        .map(|(i, row)| {
            let mut r = row.clone();
            r.extend((0..k).map(|j| f64::from(i == j)));
            r
        })
        .collect();
    for c in 0..k {
        let piv = (c..k)
            .max_by(|&i, &j| m[i][c].abs().total_cmp(&m[j][c].abs()))
            .unwrap();
        m.swap(c, piv);
        let d = m[c][c];
        m[c].iter_mut().for_each(|v| *v /= d);
        for r in 0..k {
            if r != c {
                let f = m[r][c];
                let pivot_row = m[c].clone();
                m[r].iter_mut()
                    .zip(&pivot_row)
                    .for_each(|(v, p)| *v -= f * p);
            }
        }
    }
    m.into_iter().map(|r| r[k..].to_vec()).collect()
}

/// Everything the textbook route needs for one model.
struct Naive {
    x: Vec<Vec<f64>>, // rows
    e: Vec<f64>,
    inv: Vec<Vec<f64>>,
    b: Vec<f64>,
    h: Vec<f64>,
}

fn naive(design: &Design, cols: &[usize], outcome: usize) -> Naive {
    let n = design.x.nrows();
    let k = cols.len();
    let x: Vec<Vec<f64>> = (0..n)
        .map(|i| cols.iter().map(|&c| design.x[(i, c)]).collect())
        .collect();
    let y: Vec<f64> = (0..n).map(|i| design.y[(i, outcome)]).collect();
    let mut xtx = vec![vec![0.0; k]; k];
    let mut xty = vec![0.0; k];
    for i in 0..n {
        for a in 0..k {
            xty[a] += x[i][a] * y[i];
            for b in 0..k {
                xtx[a][b] += x[i][a] * x[i][b];
            }
        }
    }
    let inv = invert(&xtx);
    let b: Vec<f64> = (0..k)
        .map(|a| (0..k).map(|c| inv[a][c] * xty[c]).sum())
        .collect();
    let e: Vec<f64> = (0..n)
        .map(|i| y[i] - (0..k).map(|a| x[i][a] * b[a]).sum::<f64>())
        .collect();
    // Leverage hᵢ = xᵢ'(X'X)⁻¹xᵢ (hat-matrix diagonal).
    let h: Vec<f64> = x
        .iter()
        .map(|xi| {
            (0..k)
                .map(|a| (0..k).map(|c| xi[a] * inv[a][c] * xi[c]).sum::<f64>())
                .sum()
        })
        .collect();
    Naive { x, e, inv, b, h }
}

/// (X'X)⁻¹ M (X'X)⁻¹.
fn sandwich(inv: &[Vec<f64>], meat: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = inv.len();
    let mut left = vec![vec![0.0; k]; k];
    for a in 0..k {
        for c in 0..k {
            left[a][c] = (0..k).map(|l| inv[a][l] * meat[l][c]).sum();
        }
    }
    (0..k)
        .map(|a| {
            (0..k)
                .map(|c| (0..k).map(|l| left[a][l] * inv[l][c]).sum())
                .collect()
        })
        .collect()
}

/// Σᵢ ωᵢ xᵢxᵢ'.
fn weighted_meat(nv: &Naive, omega: impl Fn(usize) -> f64) -> Vec<Vec<f64>> {
    let k = nv.b.len();
    let mut m = vec![vec![0.0; k]; k];
    for (i, xi) in nv.x.iter().enumerate() {
        let w = omega(i);
        for a in 0..k {
            for c in 0..k {
                m[a][c] += w * xi[a] * xi[c];
            }
        }
    }
    m
}

/// Σ_g (Σ_{i∈g} xᵢeᵢ)(Σ_{i∈g} xᵢeᵢ)' for cluster codes `g`; returns the meat and G.
fn cluster_meat(nv: &Naive, codes: &[u32]) -> (Vec<Vec<f64>>, usize) {
    let k = nv.b.len();
    let g_count = *codes.iter().max().unwrap() as usize + 1;
    let mut s = vec![vec![0.0; k]; g_count];
    for (i, xi) in nv.x.iter().enumerate() {
        for a in 0..k {
            s[codes[i] as usize][a] += xi[a] * nv.e[i];
        }
    }
    let occupied = s.iter().filter(|v| v.iter().any(|&x| x != 0.0)).count();
    let mut m = vec![vec![0.0; k]; k];
    for sg in &s {
        for a in 0..k {
            for c in 0..k {
                m[a][c] += sg[a] * sg[c];
            }
        }
    }
    (m, occupied)
}

fn scale(v: Vec<Vec<f64>>, f: f64) -> Vec<Vec<f64>> {
    v.into_iter()
        .map(|r| r.into_iter().map(|x| x * f).collect())
        .collect()
}

/// Textbook covariance matrix for one choice.
fn textbook(design: &Design, nv: &Naive, cov: Covariance) -> Vec<Vec<f64>> {
    let (n, k) = (nv.e.len() as f64, nv.b.len() as f64);
    let rss: f64 = nv.e.iter().map(|e| e * e).sum();
    let cr1 = |g: usize| g as f64 / (g as f64 - 1.0) * (n - 1.0) / (n - k);
    match cov {
        // σ²(X'X)⁻¹, σ² = RSS/(n − k) (any regression text, e.g. Greene, Econometric Analysis).
        Covariance::Classical => scale(nv.inv.clone(), rss / (n - k)),
        // White (1980, Econometrica 48): meat Σ eᵢ² xᵢxᵢ'.
        Covariance::Hc0 => sandwich(&nv.inv, &weighted_meat(nv, |i| nv.e[i].powi(2))),
        // MacKinnon & White (1985, J. Econometrics 29): HC1 = n/(n − k)·HC0,
        // HC2 weights eᵢ²/(1 − hᵢ), HC3 weights eᵢ²/(1 − hᵢ)².
        Covariance::Hc1 => scale(textbook(design, nv, Covariance::Hc0), n / (n - k)),
        Covariance::Hc2 => sandwich(
            &nv.inv,
            &weighted_meat(nv, |i| nv.e[i].powi(2) / (1.0 - nv.h[i])),
        ),
        Covariance::Hc3 => sandwich(
            &nv.inv,
            &weighted_meat(nv, |i| nv.e[i].powi(2) / (1.0 - nv.h[i]).powi(2)),
        ),
        // Liang & Zeger (1986); CR1 factor G/(G − 1)·(n − 1)/(n − k) as in Cameron & Miller
        // (2015, J. Human Resources 50, sec. II.C).
        Covariance::Cluster { dim } => {
            let (m, g) = cluster_meat(nv, &design.clusters[dim].codes);
            scale(sandwich(&nv.inv, &m), cr1(g))
        }
        // Cameron, Gelbach & Miller (2011, JBES 29): V_A + V_B − V_{A∩B}, each with its own CR1
        // factor (the statsmodels convention, per /work/shared/design/engine-notes.md).
        Covariance::TwoWayCluster { first, second } => {
            let a = &design.clusters[first].codes;
            let b = &design.clusters[second].codes;
            let nb = design.clusters[second].count as u32;
            // Intersection cells numbered a·count_b + b, then made dense.
            let mut cells: Vec<u32> = a.iter().zip(b).map(|(&x, &y)| x * nb + y).collect();
            let mut uniq = cells.clone();
            uniq.sort_unstable();
            uniq.dedup();
            cells
                .iter_mut()
                .for_each(|c| *c = uniq.binary_search(c).unwrap() as u32);
            let (ma, ga) = cluster_meat(nv, a);
            let (mb, gb) = cluster_meat(nv, b);
            let (mab, gab) = cluster_meat(nv, &cells);
            let va = scale(sandwich(&nv.inv, &ma), cr1(ga));
            let vb = scale(sandwich(&nv.inv, &mb), cr1(gb));
            let vab = scale(sandwich(&nv.inv, &mab), cr1(gab));
            let k = va.len();
            let v = Mat::from_fn(k, k, |i, j| va[i][j] + vb[i][j] - vab[i][j]);
            psd_repair(v)
        }
    }
}

/// CGM (2011, sec. 2.3): if V is not positive semi-definite, set its negative eigenvalues to
/// zero and rebuild V = U·max(Λ, 0)·U'.
fn psd_repair(v: Mat<f64>) -> Vec<Vec<f64>> {
    let k = v.nrows();
    let eig = v.self_adjoint_eigen(faer::Side::Lower).unwrap();
    let (u, s) = (eig.U(), eig.S().column_vector());
    let negative = (0..k).any(|i| s[i] < 0.0);
    REPAIRED.with(|r| r.set(r.get() || negative));
    if !negative {
        return (0..k)
            .map(|i| (0..k).map(|j| v[(i, j)]).collect())
            .collect();
    }
    (0..k)
        .map(|i| {
            (0..k)
                .map(|j| (0..k).map(|l| s[l].max(0.0) * u[(i, l)] * u[(j, l)]).sum())
                .collect()
        })
        .collect()
}

thread_local! {
    /// Whether any two-way matrix of this thread needed the repair (so both paths are seen).
    static REPAIRED: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

fn check_against_textbook(
    design: &Design,
    fit: &ModelFit,
    cols: &[usize],
    outcome: usize,
    covs: &[Covariance],
) {
    let nv = naive(design, cols, outcome);
    for (q, c) in fit.coefficients.iter().enumerate() {
        assert_eq!(c.column, cols[q]);
        assert!(
            close(c.estimate, nv.b[q], REL),
            "estimate {q}: {} vs {}",
            c.estimate,
            nv.b[q]
        );
        for (inf, &cov) in c.inference.iter().zip(covs) {
            let v = textbook(design, &nv, cov);
            assert!(v[q][q] > 0.0, "textbook variance must be positive here");
            let se = v[q][q].sqrt();
            assert!(
                close(inf.std_error, se, REL),
                "{cov:?} SE {q}: {} vs {se}",
                inf.std_error
            );
            // Two-sided Student-t p-value and interval (statrs as the reference distribution).
            let t = StudentsT::new(0.0, 1.0, inf.df).unwrap();
            let p = 2.0 * t.sf((nv.b[q] / se).abs());
            assert!(
                close(inf.p_value, p, 1e-8),
                "{cov:?} p {q}: {} vs {p}",
                inf.p_value
            );
            let qt = t.inverse_cdf(0.975);
            assert!(close(inf.ci_high, nv.b[q] + qt * se, 1e-9));
        }
    }
}

#[test]
fn every_covariance_matches_the_textbook_sandwich() {
    let design = random_design(21, 300, CONT, LEVELS, 17, 8);
    let opts = all_covariances();
    let cols = vec![0, 1, 2, 3, 1 + CONT, 2 + CONT];
    for outcome in 0..2 {
        let model = ModelSpec {
            columns: cols.clone(),
            outcome,
            tracked: vec![],
        };
        let shared = SharedFactor::new(&design)
            .unwrap()
            .fit(&model, &opts)
            .unwrap();
        check_against_textbook(&design, &shared, &cols, outcome, &opts.covariances);
        let indep = fit_independent(&design, &model, &opts).unwrap();
        check_against_textbook(&design, &indep, &cols, outcome, &opts.covariances);
        // Degrees of freedom: n − k, G − 1, min(G_A, G_B) − 1.
        let dfs: Vec<f64> = shared.coefficients[0]
            .inference
            .iter()
            .map(|i| i.df)
            .collect();
        let nk = (300 - cols.len()) as f64;
        assert_eq!(dfs, vec![nk, nk, nk, nk, nk, 16.0, 7.0, 7.0]);
    }
    println!("two-way repair exercised: {}", REPAIRED.with(|r| r.get()));
}

#[test]
fn tracked_subset_gets_the_same_numbers_as_the_full_model() {
    let design = random_design(22, 250, CONT, LEVELS, 12, 6);
    let opts = all_covariances();
    let cols = vec![4, 0, 2, 1 + CONT];
    let full = SharedFactor::new(&design)
        .unwrap()
        .fit(
            &ModelSpec {
                columns: cols.clone(),
                outcome: 1,
                tracked: vec![],
            },
            &opts,
        )
        .unwrap();
    let one = SharedFactor::new(&design)
        .unwrap()
        .fit(
            &ModelSpec {
                columns: cols.clone(),
                outcome: 1,
                tracked: vec![2],
            },
            &opts,
        )
        .unwrap();
    assert_eq!(one.coefficients.len(), 1);
    assert_eq!(one.coefficients[0], full.coefficients[2]);
}

/// The covariance among tracked coefficients against the full dense textbook sandwich
/// (X'X)⁻¹X'ΩX(X'X)⁻¹ of `textbook` above: classical (σ²(X'X)⁻¹), HC0 (White 1980), HC1–HC3
/// (MacKinnon & White 1985), one-way CR1 (Liang & Zeger 1986) and two-way with the eigenvalue
/// repair (Cameron, Gelbach & Miller 2011). Off-diagonals are judged relative to
/// sqrt(V_aa·V_bb), since a true covariance may be near zero; the diagonal must equal the
/// squared reported standard errors.
#[test]
fn tracked_covariance_matches_the_textbook_sandwich_off_the_diagonal() {
    let design = random_design(23, 300, CONT, LEVELS, 17, 8);
    let opts = all_covariances();
    let cols = vec![0, 1, 2, 3, 1 + CONT, 2 + CONT];
    // Tracked out of model order, so the matrix must follow `coefficients`, not the model.
    for tracked in [vec![], vec![3, 1, 1 + CONT], vec![2]] {
        for outcome in 0..2 {
            let model = ModelSpec {
                columns: cols.clone(),
                outcome,
                tracked: tracked.clone(),
            };
            let nv = naive(&design, &cols, outcome);
            let shared = SharedFactor::new(&design)
                .unwrap()
                .fit(&model, &opts)
                .unwrap();
            let indep = fit_independent(&design, &model, &opts).unwrap();
            for fit in [&shared, &indep] {
                let pos: Vec<usize> = fit
                    .coefficients
                    .iter()
                    .map(|c| cols.iter().position(|&x| x == c.column).unwrap())
                    .collect();
                let t = pos.len();
                assert_eq!(
                    t,
                    if tracked.is_empty() {
                        cols.len()
                    } else {
                        tracked.len()
                    }
                );
                assert_eq!(fit.tracked_covariance.len(), opts.covariances.len());
                let mut off_diagonals = 0;
                for (ci, &cov) in opts.covariances.iter().enumerate() {
                    let m = &fit.tracked_covariance[ci];
                    assert_eq!(m.len(), t * t);
                    let v = textbook(&design, &nv, cov);
                    for a in 0..t {
                        let se = fit.coefficients[a].inference[ci].std_error;
                        assert!(
                            close(m[a * t + a], se * se, 1e-12),
                            "{cov:?} diagonal {a}: {} vs SE² {}",
                            m[a * t + a],
                            se * se
                        );
                        for b in 0..t {
                            let want = v[pos[a]][pos[b]];
                            let got = m[a * t + b];
                            assert_eq!(got, m[b * t + a], "{cov:?}: not symmetric");
                            let scale = (v[pos[a]][pos[a]] * v[pos[b]][pos[b]]).sqrt();
                            assert!(
                                (got - want).abs() <= 1e-10 * scale,
                                "{cov:?} [{a},{b}]: {got:e} vs textbook {want:e}"
                            );
                            if a != b {
                                // A real check: the textbook covariance is not negligible.
                                if want.abs() > 1e-3 * scale {
                                    off_diagonals += 1;
                                }
                            }
                        }
                    }
                }
                if t > 1 {
                    assert!(off_diagonals > 0, "no sizeable off-diagonal was checked");
                }
            }
            compare_fits_ok(&shared, &indep);
        }
    }
}

fn compare_fits_ok(a: &ModelFit, b: &ModelFit) {
    support::compare_fits(a, b, 1e-10).unwrap_or_else(|e| panic!("routes disagree: {e}"));
}

/// Koenker (1981, J. Econometrics 17) studentized Breusch–Pagan: regress uᵢ = eᵢ² on the
/// model's regressors (with its constant); LM = n·R² (centred), chi-square with k − 1 df.
#[test]
fn breusch_pagan_matches_the_auxiliary_regression() {
    let design = random_design(23, 500, CONT, LEVELS, 10, 5);
    let cols = vec![0, 1, 2, 5];
    let model = ModelSpec {
        columns: cols.clone(),
        outcome: 0,
        tracked: vec![],
    };
    let fit = SharedFactor::new(&design)
        .unwrap()
        .fit(&model, &Default::default())
        .unwrap();
    let nv = naive(&design, &cols, 0);
    let n = nv.e.len();
    // Auxiliary regression by the same naive route, u as the outcome.
    let aux = Design {
        x: design.x.clone(),
        y: Mat::from_fn(n, 1, |i, _| nv.e[i].powi(2)),
        ..design.clone()
    };
    let av = naive(&aux, &cols, 0);
    let u: Vec<f64> = nv.e.iter().map(|e| e * e).collect();
    let mean = u.iter().sum::<f64>() / n as f64;
    let tss: f64 = u.iter().map(|v| (v - mean).powi(2)).sum();
    let rss: f64 = av.e.iter().map(|e| e * e).sum();
    let lm = n as f64 * (1.0 - rss / tss);
    let bp = fit.breusch_pagan.expect("model has a constant");
    assert!(close(bp.statistic, lm, 1e-9), "{} vs {lm}", bp.statistic);
    assert_eq!(bp.df, 3.0);
    let p = ChiSquared::new(3.0).unwrap().sf(lm);
    assert!(close(bp.p_value, p, 1e-8));
}

/// R² = 1 − RSS/TSS, centred with a constant and uncentred without (common practice; e.g.
/// Greene, Econometric Analysis, sec. 3.5); adjusted R² = 1 − (1 − R²)(n − c)/(n − k).
#[test]
fn r_squared_centred_with_constant_and_uncentred_without() {
    let design = random_design(24, 200, CONT, LEVELS, 10, 5);
    let n = 200.0;
    for (cols, centred) in [(vec![0, 1, 2], true), (vec![1, 2], false)] {
        let fit = SharedFactor::new(&design)
            .unwrap()
            .fit(
                &ModelSpec {
                    columns: cols.clone(),
                    outcome: 0,
                    tracked: vec![],
                },
                &Default::default(),
            )
            .unwrap();
        let nv = naive(&design, &cols, 0);
        let y: Vec<f64> = (0..200).map(|i| design.y[(i, 0)]).collect();
        let mean = if centred {
            y.iter().sum::<f64>() / n
        } else {
            0.0
        };
        let tss: f64 = y.iter().map(|v| (v - mean).powi(2)).sum();
        let rss: f64 = nv.e.iter().map(|e| e * e).sum();
        let r2 = 1.0 - rss / tss;
        let c = if centred { 1.0 } else { 0.0 };
        let k = cols.len() as f64;
        assert!(
            close(fit.r_squared, r2, 1e-10),
            "{cols:?}: {} vs {r2}",
            fit.r_squared
        );
        assert!(close(
            fit.adj_r_squared,
            1.0 - (1.0 - r2) * (n - c) / (n - k),
            1e-10
        ));
        assert!(close(fit.resid_sd, (rss / (n - k)).sqrt(), 1e-10));
    }
}
