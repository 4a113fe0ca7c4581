use super::stats::percentile;
use super::*;
use crate::design::{BandwidthAt, ResponseFamily};
use crate::network::Analyze;
use crate::synthesis::LadderSpec;

fn crystal() -> Crystal {
    Crystal::from_fs_lm("Y", 9e6, 15e-3, 10.0, 4e-12).unwrap()
}

/// Chebyshev 0.1 dB, `n` identical crystals (9 MHz, 15 mH, 10 Ω, 4 pF), 2400 Hz at −3 dB
/// (the benchmark design when n = 8).
fn chebyshev(n: usize) -> Design {
    LadderSpec::identical(
        ResponseFamily::Chebyshev { ripple_db: 0.1 },
        n,
        2400.0,
        BandwidthAt::Db3,
        &crystal(),
    )
    .synthesize()
    .unwrap()
}

/// Four unequal crystals, the third with a spurious mode 40 kHz up (our own test set).
fn unequal_design() -> Design {
    let crystals = [
        (-25.0, 15.0e-3, 8.0),
        (10.0, 15.5e-3, 12.0),
        (0.0, 14.6e-3, 9.0),
        (18.0, 15.2e-3, 11.0),
    ]
    .iter()
    .enumerate()
    .map(|(i, &(df, lm, rm))| {
        let x = Crystal::from_fs_lm(&format!("Y{}", i + 1), 9e6 + df, lm, rm, 4e-12).unwrap();
        if i == 2 {
            x.with_spurious(9.04e6, 60e-3, 40.0).unwrap()
        } else {
            x
        }
    })
    .collect();
    LadderSpec {
        family: ResponseFamily::Butterworth,
        bandwidth_hz: 2400.0,
        bandwidth_at: BandwidthAt::Db3,
        predistort: false,
        refine: false,
        crystals,
    }
    .synthesize()
    .unwrap()
}

fn spec(trials: usize, cap_tol: f64, fs_sigma_hz: f64) -> ToleranceSpec {
    ToleranceSpec {
        trials,
        cap_tol,
        fs_sigma_hz,
        seed: 11,
        ..ToleranceSpec::default()
    }
}

#[test]
fn fast_path_matches_the_general_ladder() {
    // The trial sweep is the chain-matrix cascade of `network::Ladder` without derivatives;
    // on a perturbed design with a missing series capacitor (the critical mesh) and a
    // spurious mode both must agree to rounding. 1e-10 relative: the two sum the same terms
    // in a different order, ~1e-13 expected, and the stopband values are formed without
    // cancellation.
    let d = unequal_design();
    assert!(
        d.series_caps_f.iter().any(|c| c.is_none()),
        "{:?}",
        d.series_caps_f
    );
    let grid = Grid::new(window(&d, 1001).unwrap());
    let mut w = Work::new(&d, &grid);
    let s = ToleranceSpec {
        cap_tol: 0.05,
        fs_sigma_hz: 20.0,
        lm_sigma: 0.05,
        rm_sigma: 0.2,
        ..ToleranceSpec::default()
    };
    for trial in [0, 1, 17] {
        w.deltas.draw_unit(5, trial, CapDistribution::Uniform);
        w.deltas.scale(&s);
        w.perturb(&d).unwrap();
        w.sweep(&d, &grid);
        let lad = w.ladder(&d).unwrap();
        for (k, &f) in grid.f_hz.iter().enumerate() {
            let r = lad.response(f);
            let e21 = (w.sweep.s21[k] - r.s21).norm() / r.s21.norm();
            let e11 = (w.sweep.s11[k] - r.s11).norm() / r.s11.norm().max(1e-6);
            assert!(
                e21 < 1e-10 && e11 < 1e-10,
                "trial {trial} at {f} Hz: {e21:e} {e11:e}"
            );
        }
    }
}

#[test]
fn same_seed_gives_the_same_report_on_one_and_two_threads() {
    let d = chebyshev(5);
    let s = ToleranceSpec {
        lm_sigma: 0.01,
        rm_sigma: 0.2,
        ..spec(100, 0.08, 30.0)
    };
    let limits = Limits::default_for(&d);
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| run_yield(&d, &s, &limits, None).unwrap())
    };
    let one = run(1);
    let two = run(2);
    assert!(
        one.passed < one.trials,
        "the check needs some failures: {}",
        one.passed
    );
    assert_eq!(one, two);
    assert_eq!(
        serde_json::to_string(&one).unwrap(),
        serde_json::to_string(&two).unwrap()
    );
    // A different seed is a different experiment.
    let other = run_yield(
        &d,
        &ToleranceSpec {
            seed: 12,
            ..s.clone()
        },
        &limits,
        None,
    )
    .unwrap();
    assert_ne!(other.samples, one.samples);
}

#[test]
fn tighter_tolerances_shrink_every_trial_along_its_own_direction() {
    // By construction: the unit variates do not depend on the tolerances.
    let loose = ToleranceSpec {
        lm_sigma: 0.02,
        rm_sigma: 0.3,
        ..spec(1, 0.1, 40.0)
    };
    let tight = ToleranceSpec {
        cap_tol: 0.03,
        fs_sigma_hz: 10.0,
        lm_sigma: 0.01,
        rm_sigma: 0.1,
        ..loose.clone()
    };
    for trial in [0, 5, 999] {
        let (mut a, mut b) = (Deltas::zero(4), Deltas::zero(4));
        a.draw_unit(loose.seed, trial, loose.cap_distribution);
        b.draw_unit(tight.seed, trial, tight.cap_distribution);
        a.scale(&loose);
        b.scale(&tight);
        let same_direction = |x: &[f64], y: &[f64], ratio: f64| {
            x.iter()
                .zip(y)
                .all(|(x, y)| (y - ratio * x).abs() <= 1e-15 * x.abs())
        };
        assert!(same_direction(&a.shunt, &b.shunt, 0.3));
        assert!(same_direction(&a.series, &b.series, 0.3));
        assert!(same_direction(&a.fs_hz, &b.fs_hz, 0.25));
        assert!(same_direction(&a.lm, &b.lm, 0.5));
        assert!(same_direction(&a.rm, &b.rm, 1.0 / 3.0));
    }
}

#[test]
fn tighter_tolerances_never_lower_the_yield() {
    let d = chebyshev(8);
    let limits = Limits::default_for(&d);
    let base = ToleranceSpec {
        lm_sigma: 0.02,
        rm_sigma: 0.2,
        points: 501,
        ..spec(250, 0.12, 50.0)
    };
    let mut last = -1.0;
    let mut yields = Vec::new();
    for scale in [1.0, 0.8, 0.6, 0.4, 0.2, 0.0] {
        let s = ToleranceSpec {
            cap_tol: base.cap_tol * scale,
            fs_sigma_hz: base.fs_sigma_hz * scale,
            lm_sigma: base.lm_sigma * scale,
            rm_sigma: base.rm_sigma * scale,
            ..base.clone()
        };
        let y = run_yield(&d, &s, &limits, None).unwrap().yield_fraction;
        yields.push(y);
        assert!(
            y >= last,
            "yield fell from {last} to {y} at scale {scale}: {yields:?}"
        );
        last = y;
    }
    assert!(
        yields[0] < 0.8,
        "the loosest spec must fail often for the check to mean anything: {yields:?}"
    );
    assert_eq!(last, 1.0);
}

/// Indices of the sampled local maxima of `y` with values above `floor`.
fn sampled_maxima(y: &[f64], floor: f64) -> Vec<usize> {
    (1..y.len() - 1)
        .filter(|&k| y[k] > floor && y[k] > y[k - 1] && y[k] >= y[k + 1])
        .collect()
}

#[test]
fn zero_tolerance_gives_full_yield_and_the_nominal_figures() {
    let d = chebyshev(8);
    let s = ToleranceSpec {
        cap_tol: 0.0,
        fs_sigma_hz: 0.0,
        ..spec(40, 0.0, 0.0)
    };
    let r = run_yield(&d, &s, &Limits::default_for(&d), None).unwrap();
    assert_eq!((r.passed, r.yield_fraction), (40, 1.0));
    // Every trial is the nominal ladder itself: bit for bit the same figures and response.
    for t in &r.samples {
        assert_eq!(t.metrics, Some(r.nominal), "trial {}", t.trial);
    }
    assert_eq!(r.envelope.min_db, r.envelope.nominal_db);
    assert_eq!(r.envelope.max_db, r.envelope.nominal_db);
    for m in &r.metrics {
        let nominal = r.nominal.value(m.metric).unwrap();
        assert!(m.percentiles.iter().all(|&(_, v)| v == nominal), "{m:?}");
        // The mean of 40 equal numbers is that number up to the rounding of the sum.
        assert!(
            (m.mean - nominal).abs() <= 64.0 * f64::EPSILON * nominal.abs(),
            "{m:?}"
        );
    }
    assert!(r.sensitivity.is_empty(), "no part has a spread");

    // The sampled nominal against the design's figures, which are refined on the circuit.
    // Interpolation error: a crossing lies in the same grid interval as the true one, so
    // each edge is within one step h (a width within 2h); a sampled extremum of a smooth
    // curve is low by at most |y''|·h²/8, with |y''|·h² read from the second differences over
    // the ripple band (doubled: the true extremum may sit half a step from the sample).
    let p = &d.performance;
    let n = &r.nominal;
    let f = &r.envelope.f_hz;
    let h = f[1] - f[0];
    let y = &r.envelope.nominal_db;
    let peak = y.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let maxima = sampled_maxima(y, peak - 3.0);
    let (first, last) = (maxima[0], maxima[maxima.len() - 1]);
    let curv = (first..=last)
        .map(|k| (y[k + 1] - 2.0 * y[k] + y[k - 1]).abs())
        .fold(0.0, f64::max);
    let extremum = 2.0 * curv / 8.0;
    assert!(
        (n.insertion_loss_db - p.insertion_loss_db).abs() <= extremum,
        "{n:?} {p:?}"
    );
    assert!(
        (n.ripple_db - p.ripple_db).abs() <= 2.0 * extremum,
        "{n:?} {p:?}"
    );
    assert!((n.bw_3db_hz - p.bw_3db_hz).abs() <= 2.0 * h);
    assert!((n.bw_6db_hz - p.bw_6db_hz).abs() <= 2.0 * h);
    assert!((n.center_hz - p.center_hz).abs() <= h);
    let (b60, p60) = (n.bw_60db_hz.unwrap(), p.bw_60db_hz.unwrap());
    assert!(
        (b60 - p60).abs() <= 2.0 * h,
        "the window must hold the −60 dB points"
    );
    // Return loss: the worst |S11| may sit at the end of the ripple band, where S11 is not
    // stationary, so the bound is its change over one step either side of the sampled worst.
    let grid = Grid::new(f.clone());
    let mut w = Work::new(&d, &grid);
    w.analyse(&d, &grid).unwrap();
    let y11: Vec<f64> = w.sweep.s11_db();
    let k = (first..=last)
        .max_by(|&a, &b| y11[a].total_cmp(&y11[b]))
        .unwrap();
    let step = (y11[k + 1] - y11[k]).abs().max((y11[k] - y11[k - 1]).abs());
    assert!(
        (n.return_loss_db - p.return_loss_db).abs() <= step,
        "{} {} {step}",
        n.return_loss_db,
        p.return_loss_db
    );
}

#[test]
fn bad_specs_are_errors_naming_the_field() {
    let d = chebyshev(3);
    let l = Limits::default_for(&d);
    let ok = spec(10, 0.05, 10.0);
    let cases: Vec<(ToleranceSpec, &str)> = vec![
        (
            ToleranceSpec {
                trials: 0,
                ..ok.clone()
            },
            "trials",
        ),
        (
            ToleranceSpec {
                trials: MAX_TRIALS + 1,
                ..ok.clone()
            },
            "trials",
        ),
        (
            ToleranceSpec {
                cap_tol: -0.01,
                ..ok.clone()
            },
            "cap_tol",
        ),
        (
            ToleranceSpec {
                cap_tol: f64::NAN,
                ..ok.clone()
            },
            "cap_tol",
        ),
        (
            ToleranceSpec {
                cap_tol: 1.0,
                ..ok.clone()
            },
            "cap_tol",
        ),
        (
            ToleranceSpec {
                fs_sigma_hz: -1.0,
                ..ok.clone()
            },
            "fs_sigma_hz",
        ),
        (
            ToleranceSpec {
                fs_sigma_hz: f64::INFINITY,
                ..ok.clone()
            },
            "fs_sigma_hz",
        ),
        (
            ToleranceSpec {
                lm_sigma: f64::NAN,
                ..ok.clone()
            },
            "lm_sigma",
        ),
        (
            ToleranceSpec {
                rm_sigma: -0.1,
                ..ok.clone()
            },
            "rm_sigma",
        ),
        (
            ToleranceSpec {
                points: 10,
                ..ok.clone()
            },
            "points",
        ),
    ];
    for (s, field) in cases {
        let e = run_yield(&d, &s, &l, None).unwrap_err();
        assert_eq!(e.kind(), ErrorKind::InvalidValue, "{e}");
        assert!(e.message().starts_with(field), "{field}: {e}");
    }
    for (limits, field) in [
        (
            Limits {
                max_ripple_db: f64::NAN,
                ..l
            },
            "max_ripple_db",
        ),
        (
            Limits {
                max_loss_db: -1.0,
                ..l
            },
            "max_loss_db",
        ),
        (
            Limits {
                bw6_tolerance: 0.0,
                ..l
            },
            "bw6_tolerance",
        ),
        (
            Limits {
                bw6_tolerance: f64::INFINITY,
                ..l
            },
            "bw6_tolerance",
        ),
    ] {
        let e = run_yield(&d, &ok, &limits, None).unwrap_err();
        assert!(e.message().starts_with(field), "{field}: {e}");
    }
    // Infinite limits mean "no limit" and are accepted.
    let open = Limits {
        max_ripple_db: f64::INFINITY,
        max_loss_db: f64::INFINITY,
        ..l
    };
    assert!(run_yield(&d, &ok, &open, None).is_ok());
    let mut broken = d.clone();
    broken.shunt_caps_f.pop();
    let e = run_yield(&broken, &ok, &l, None).unwrap_err();
    assert!(e.message().starts_with("shunt_caps_f"), "{e}");
}

#[test]
fn progress_reports_every_trial() {
    let d = chebyshev(3);
    let calls = AtomicUsize::new(0);
    let most = AtomicUsize::new(0);
    let cb = |k: usize| {
        calls.fetch_add(1, Ordering::Relaxed);
        most.fetch_max(k, Ordering::Relaxed);
    };
    let trials = 3 * BLOCK + 5;
    run_yield(
        &d,
        &spec(trials, 0.05, 10.0),
        &Limits::default_for(&d),
        Some(&cb),
    )
    .unwrap();
    // One call per block of trials, plus the final one.
    assert_eq!(calls.load(Ordering::Relaxed), 4 + 1);
    assert_eq!(most.load(Ordering::Relaxed), trials);
}

#[test]
fn variates_follow_their_distributions() {
    // Uniform on [−1, 1]: mean 0, E[u²] = 1/3, Var(u²) = 1/5 − 1/9 = 4/45. Standard normal:
    // E[z²] = 1, Var(z²) = 2, P(|z| > 3) = 0.0027 (common practice). Each check allows five
    // standard errors of its estimate (fixed seed; a wrong distribution is off by far more).
    let n = 8;
    let trials = 3000;
    let (mut u, mut z, mut tail) = (Vec::new(), Vec::new(), 0usize);
    let mut d = Deltas::zero(n);
    for t in 0..trials {
        d.draw_unit(3, t, CapDistribution::Uniform);
        u.extend(d.shunt.iter().chain(&d.series));
        z.extend(d.fs_hz.iter().chain(&d.lm).chain(&d.rm));
        d.draw_unit(3, t, CapDistribution::Gaussian3Sigma);
        tail += d
            .shunt
            .iter()
            .chain(&d.series)
            .filter(|g| g.abs() > 3.0)
            .count();
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let sq: Vec<f64> = u.iter().map(|x| x * x).collect();
    let nu = u.len() as f64;
    assert!(u.iter().all(|x| (-1.0..=1.0).contains(x)));
    assert!(mean(&u).abs() < 5.0 * (1.0 / 3.0 / nu).sqrt());
    assert!((mean(&sq) - 1.0 / 3.0).abs() < 5.0 * (4.0 / 45.0 / nu).sqrt());
    let nz = z.len() as f64;
    let zsq: Vec<f64> = z.iter().map(|x| x * x).collect();
    assert!(mean(&z).abs() < 5.0 / nz.sqrt());
    assert!((mean(&zsq) - 1.0).abs() < 5.0 * (2.0 / nz).sqrt());
    let ng = (trials * (2 * n - 1)) as f64;
    let p = 0.0027;
    assert!(
        (tail as f64 / ng - p).abs() < 5.0 * (p * (1.0 - p) / ng).sqrt(),
        "{tail}"
    );
}

#[test]
fn percentiles_interpolate_between_order_statistics() {
    // Definition 7 of Hyndman & Fan (1996), worked by hand: for 0, 1, …, 100 the p-th
    // percentile is p; for [1, 2, 3, 4], h = 3·p/100, so p25 = 1.75, p50 = 2.5, p99 = 3.97.
    let v: Vec<f64> = (0..=100).map(f64::from).collect();
    for p in PERCENTILES {
        assert!((percentile(&v, p) - p).abs() < 1e-12);
    }
    let v = [1.0, 2.0, 3.0, 4.0];
    assert!((percentile(&v, 25.0) - 1.75).abs() < 1e-12);
    assert!((percentile(&v, 50.0) - 2.5).abs() < 1e-12);
    assert!((percentile(&v, 99.0) - 3.97).abs() < 1e-12);
    assert_eq!(percentile(&[5.0], 1.0), 5.0);
}

#[test]
fn mirror_image_parts_are_equally_sensitive() {
    // The 8-crystal design is mirror-symmetric (equal terminations, mirrored values); moving
    // C12 or its mirror C78 gives mirror circuits with the same S21 (reciprocity), so the
    // same ripple, bandwidth and loss up to rounding in the sampled figures (1e-6).
    let d = chebyshev(8);
    let n = d.order();
    let rel = |a: f64, b: f64| (a - b).abs() <= 1e-9 * a.abs().max(b.abs());
    assert!(rel(d.source_ohm, d.load_ohm));
    for i in 0..n - 1 {
        assert!(rel(d.shunt_caps_f[i], d.shunt_caps_f[n - 2 - i]));
    }
    let s = ToleranceSpec {
        lm_sigma: 0.01,
        ..spec(1, 0.05, 20.0)
    };
    let r = run_yield(&d, &s, &Limits::default_for(&d), None).unwrap();
    let get = |name: &str| r.sensitivity.iter().find(|x| x.part == name).unwrap();
    for (a, b) in [
        ("C12", "C78"),
        ("C34", "C56"),
        ("Cs1", "Cs8"),
        ("Y1 fs", "Y8 fs"),
        ("Y2 Lm", "Y7 Lm"),
    ] {
        let (x, y) = (get(a), get(b));
        for (u, v) in [
            (x.score, y.score),
            (x.bw6_hz, y.bw6_hz),
            (x.ripple_db, y.ripple_db),
        ] {
            assert!((u - v).abs() <= 1e-6 * u.abs().max(v.abs()), "{x:?} {y:?}");
        }
    }
    // Listed: 7 shunt, 6 series (two meshes have none), 8 fs and 8 Lm; ranked.
    assert_eq!(r.sensitivity.len(), 7 + 6 + 8 + 8);
    assert!(r.sensitivity.windows(2).all(|w| w[0].score >= w[1].score));
}

#[test]
fn sensitivities_predict_the_monte_carlo_spread() {
    // First-order propagation of variance (JCGM 100:2008, Guide to the expression of
    // uncertainty in measurement, eq. 10): for a smooth figure such as the −6 dB bandwidth,
    // σ² ≈ Σ (∂B6/∂x_i · σ_i)², and each part's one-σ change is that term. Two independent
    // computations, one from 600 random trials and one from one-at-a-time steps, must agree.
    // 10 %: the sample standard deviation of 600 trials has a relative standard error of
    // 1/sqrt(2·600) = 2.9 %, and the small tolerances keep second-order terms below 1 %.
    let d = chebyshev(5);
    let s = spec(600, 0.02, 5.0);
    let r = run_yield(&d, &s, &Limits::default_for(&d), None).unwrap();
    let predicted = r
        .sensitivity
        .iter()
        .map(|x| x.bw6_hz * x.bw6_hz)
        .sum::<f64>()
        .sqrt();
    let v = r.values(Metric::Bandwidth6);
    let mean = v.iter().sum::<f64>() / v.len() as f64;
    let sd = (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (v.len() - 1) as f64).sqrt();
    assert!(
        (sd / predicted - 1.0).abs() < 0.10,
        "Monte Carlo {sd} Hz, propagated {predicted} Hz"
    );
}

#[test]
fn lost_passbands_and_non_physical_draws_fail_with_their_reason() {
    let d = chebyshev(4);
    // an fs spread of 10 kHz (four times the bandwidth) scatters the crystals, so the highest
    // transmission often lies at an end of the window and the passband is lost; an Lm
    // spread of σ = 50 % draws Lm ≤ 0 below z = −2 (2.3 % of crystals).
    let s = ToleranceSpec {
        cap_distribution: CapDistribution::Gaussian3Sigma,
        lm_sigma: 0.5,
        points: 201,
        ..spec(300, 0.99, 10e3)
    };
    let r = run_yield(&d, &s, &Limits::default_for(&d), None).unwrap();
    let f = r.failures_by_reason;
    assert!(f.out_of_window > 0 && f.non_physical > 0, "{f:?}");
    assert_eq!(r.samples.len(), r.trials);
    for t in &r.samples {
        assert_eq!(t.passed, t.reasons.is_empty());
        if t.metrics.is_none() {
            assert!(
                matches!(
                    t.reasons[..],
                    [FailureReason::OutOfWindow]
                        | [FailureReason::NonPhysical]
                        | [FailureReason::Numerical]
                ),
                "{t:?}"
            );
        }
    }
    let listed: usize = r.samples.iter().map(|t| t.reasons.len()).sum();
    assert_eq!(
        listed,
        f.ripple + f.bw6 + f.loss + f.out_of_window + f.non_physical + f.numerical
    );
    assert_eq!(r.passed, r.samples.iter().filter(|t| t.passed).count());
    assert_eq!(
        r.values(Metric::Ripple).len(),
        r.distribution(Metric::Ripple).unwrap().count
    );
    // The envelope holds every swept trial (recomputed here for the first few).
    let e = &r.envelope;
    let grid = Grid::new(e.f_hz.clone());
    let mut w = Work::new(&d, &grid);
    let mut checked = 0;
    for t in 0..20 {
        w.deltas.draw_unit(s.seed, t, s.cap_distribution);
        w.deltas.scale(&s);
        if w.perturb(&d).is_err() {
            continue;
        }
        w.sweep(&d, &grid);
        for (k, y) in w.sweep.s21_db().iter().enumerate() {
            assert!(
                e.min_db[k] <= *y && *y <= e.max_db[k],
                "trial {t} point {k}"
            );
        }
        checked += 1;
    }
    assert!(checked > 10);
}

#[test]
fn limits_are_inclusive_and_bandwidth_is_two_sided() {
    let m = TrialMetrics {
        insertion_loss_db: 3.0,
        ripple_db: 0.5,
        bw_3db_hz: 2000.0,
        bw_6db_hz: 2100.0,
        center_hz: 9e6,
        return_loss_db: 15.0,
        bw_60db_hz: None,
        shape_factor_60_6: None,
    };
    let l = Limits {
        max_ripple_db: 0.5,
        bw6_tolerance: 0.05,
        max_loss_db: 3.0,
    };
    assert!(judge(&m, &l, 2100.0).is_empty());
    assert_eq!(
        judge(&m, &l, 2000.0 / 1.06),
        vec![FailureReason::Bandwidth6]
    );
    assert_eq!(
        judge(&m, &l, 2100.0 / 0.94),
        vec![FailureReason::Bandwidth6]
    );
    let l2 = Limits {
        max_ripple_db: 0.4,
        max_loss_db: 2.9,
        ..l
    };
    assert_eq!(
        judge(&m, &l2, 2100.0),
        vec![FailureReason::Ripple, FailureReason::InsertionLoss]
    );
}

#[test]
fn report_round_trips_json_with_an_infinite_score() {
    let d = chebyshev(3);
    let mut r = run_yield(&d, &spec(5, 0.05, 10.0), &Limits::default_for(&d), None).unwrap();
    r.sensitivity[0].score = f64::INFINITY;
    let text = serde_json::to_string(&r).unwrap();
    assert!(text.contains("\"score\":null"));
    // (Values are compared loosely: JSON text keeps 17 digits but parsing is not promised to
    // be correctly rounded to the last bit.)
    let back: YieldReport = serde_json::from_str(&text).unwrap();
    assert!(back.sensitivity[0].score.is_infinite());
    assert_eq!(
        (back.trials, back.passed, back.samples.len()),
        (r.trials, r.passed, r.samples.len())
    );
    assert_eq!(back.sensitivity.len(), r.sensitivity.len());
    assert!((back.nominal.bw_6db_hz - r.nominal.bw_6db_hz).abs() <= 1e-12 * r.nominal.bw_6db_hz);
}
