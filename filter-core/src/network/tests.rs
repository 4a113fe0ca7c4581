use super::*;
use approx::assert_relative_eq;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

fn cap(c: f64) -> Branch {
    Branch::Element(Element::Capacitor(c, Loss::Lossless))
}
fn ind(l: f64) -> Branch {
    Branch::Element(Element::Inductor(l, Loss::Lossless))
}
fn series_lc(l: f64, c: f64) -> Branch {
    Branch::Series(vec![ind(l), cap(c)])
}
fn tank(l: f64, c: f64) -> Branch {
    Branch::Parallel(vec![ind(l), cap(c)])
}

/// Frequency of the largest (or smallest) |S21| on a fine grid.
fn extreme(l: &Ladder, from: f64, to: f64, max: bool) -> f64 {
    let g = FrequencyGrid::linear(from, to, 20001).unwrap();
    let s = l.sweep(&g);
    let db = s.s21_db();
    let mut best = 0;
    for i in 0..db.len() {
        if (max && db[i] > db[best]) || (!max && db[i] < db[best]) {
            best = i;
        }
    }
    s.f_hz[best]
}

#[test]
fn series_lc_peaks_where_the_trade_says() {
    // Common practice: 22 µH with 22 pF resonates at about 7.23 MHz; 23 µH with 26 pF at about
    // 6.5 MHz (tolerances as stated for these rule-of-thumb figures: ±0.5 % and ±1 %).
    let a = Ladder::new(50.0, 50.0, vec![Stage::Series(series_lc(22e-6, 22e-12))]).unwrap();
    let f = extreme(&a, 5e6, 9e6, true);
    assert!((f / 7.23e6 - 1.0).abs() < 0.005, "peak at {f}");
    let b = Ladder::new(50.0, 50.0, vec![Stage::Series(series_lc(23e-6, 26e-12))]).unwrap();
    let f = extreme(&b, 5e6, 8e6, true);
    assert!((f / 6.5e6 - 1.0).abs() < 0.01, "peak at {f}");
    // And the lossless series circuit passes everything at resonance.
    assert!(
        db(a.response(1.0 / (2.0 * PI * (22e-6f64 * 22e-12).sqrt()))
            .s21)
        .abs()
            < 1e-9
    );
}

#[test]
fn parallel_tank_in_series_path_gives_a_dip() {
    let a = Ladder::new(50.0, 50.0, vec![Stage::Series(tank(22e-6, 22e-12))]).unwrap();
    let f = extreme(&a, 5e6, 9e6, false);
    assert!((f / 7.23e6 - 1.0).abs() < 0.005, "dip at {f}");
    assert!(db(a.response(f).s21) < -60.0);
}

#[test]
fn series_circuit_then_tank_gives_peak_and_valley() {
    let a = Ladder::new(
        50.0,
        50.0,
        vec![
            Stage::Series(series_lc(22e-6, 22e-12)),
            Stage::Series(tank(23e-6, 26e-12)),
        ],
    )
    .unwrap();
    let peak = extreme(&a, 6.9e6, 9.5e6, true);
    let valley = extreme(&a, 6.2e6, 6.8e6, false);
    // The valley is the tank's own resonance; the peak is where the total reactance of the
    // two (inductive series circuit, capacitive tank) cancels, found here by bisection on the
    // hand-written reactances.
    let x = |f: f64| {
        let w = 2.0 * PI * f;
        let xs = w * 22e-6 - 1.0 / (w * 22e-12);
        let xt = 1.0 / (1.0 / (w * 23e-6) - w * 26e-12);
        xs + xt
    };
    let (mut lo, mut hi) = (6.6e6, 9.5e6);
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if x(mid) < 0.0 {
            lo = mid
        } else {
            hi = mid
        }
    }
    let step = (9.5e6 - 6.9e6) / 20000.0;
    assert!(
        (peak - lo).abs() < 2.0 * step,
        "peak {peak}, reactances cancel at {lo}"
    );
    assert!((valley / 6.5e6 - 1.0).abs() < 0.01, "valley {valley}");
    assert!(db(a.response(valley).s21) < db(a.response(peak).s21) - 40.0);
}

#[test]
fn crystal_near_6mhz_peak_at_fs_and_notch_at_fp() {
    let x = crate::crystal::Crystal::from_fs_lm("x", 6e6, 10e-3, 15.0, 4e-12).unwrap();
    let (fs, fp) = (x.fs_hz(), x.fp_hz());
    let a = Ladder::new(50.0, 50.0, vec![Stage::Series(Element::Crystal(x).into())]).unwrap();
    let g = FrequencyGrid::linear(fs - 5e3, fp + 5e3, 40001).unwrap();
    let s = a.sweep(&g);
    let d = s.s21_db();
    let imax = (0..d.len()).max_by(|&i, &j| d[i].total_cmp(&d[j])).unwrap();
    let imin = (0..d.len()).min_by(|&i, &j| d[i].total_cmp(&d[j])).unwrap();
    let step = s.f_hz[1] - s.f_hz[0];
    // The transmission peak sits below fs by about ω0·C0·Rm·(Rm + 4·R0)/(4π·Lm), about 4 Hz
    // here (first-order estimate); within two grid steps of that.
    let shift = 2.0 * PI * fs * 4e-12 * 15.0 * (15.0 + 200.0) / (4.0 * PI * 10e-3);
    assert!(
        (s.f_hz[imax] - (fs - shift)).abs() < 2.0 * step,
        "peak {} fs {fs}",
        s.f_hz[imax]
    );
    assert!(
        (s.f_hz[imin] - fp).abs() < 2.0 * step,
        "notch {} fp {fp}",
        s.f_hz[imin]
    );
    assert!(s.f_hz[imin] > s.f_hz[imax]);
    // Peak level: S21 = 2·R0/(2·R0 + Rm) with R0 = 50 Ω, Rm = 15 Ω.
    assert_relative_eq!(d[imax], 20.0 * (100.0f64 / 115.0).log10(), epsilon = 1e-3);
}

#[test]
fn linear_and_db_magnitudes_agree() {
    // Voltage divider by hand: Vout/E = RL / (Rs + Z + RL); with Rs = RL = R0 the matched
    // reference is E/2, so the |V| ratio is 2·|Vout/E| and dB = 20·log10 of it.
    let (l, c) = (22e-6, 22e-12);
    let a = Ladder::new(50.0, 50.0, vec![Stage::Series(series_lc(l, c))]).unwrap();
    for f in [5e6, 7e6, 7.23e6, 8e6] {
        let w = 2.0 * PI * f;
        let z = Complex64::new(0.0, w * l - 1.0 / (w * c));
        let ratio = (Complex64::new(50.0, 0.0) / (z + 100.0)).norm() * 2.0;
        assert_relative_eq!(db(a.response(f).s21), 20.0 * ratio.log10(), epsilon = 1e-12);
    }
}

#[test]
fn unequal_terminations_resistive_divider() {
    // A series resistor R between Rs and RL: S21 = 2·sqrt(Rs·RL)/(Rs + R + RL).
    let a = Ladder::new(
        12.5,
        800.0,
        vec![Stage::Series(Element::Resistor(40.0).into())],
    )
    .unwrap();
    let r = a.response(1e6);
    assert_relative_eq!(
        r.s21.re,
        2.0 * (12.5f64 * 800.0).sqrt() / 852.5,
        max_relative = 1e-14
    );
    assert_relative_eq!(r.s11.re, (840.0 - 12.5) / 852.5, max_relative = 1e-14);
    assert_relative_eq!(r.s22.re, (52.5 - 800.0) / 852.5, max_relative = 1e-14);
}

#[test]
fn group_delay_of_series_rlc_matches_closed_form() {
    // H = 2R0 / (Rt + jX), X = ωL − 1/(ωC), Rt = 2R0 + R; φ = −atan(X/Rt);
    // τ = −dφ/dω = (L + 1/(ω²C)) / Rt / (1 + (X/Rt)²).
    let (l, c, r) = (15e-3, 2.0845e-14, 12.0);
    let branch = Branch::Series(vec![ind(l), cap(c), Branch::Element(Element::Resistor(r))]);
    let a = Ladder::new(50.0, 50.0, vec![Stage::Series(branch)]).unwrap();
    let f0 = 1.0 / (2.0 * PI * (l * c).sqrt());
    for df in [-2000.0, -300.0, 0.0, 150.0, 4000.0] {
        let w = 2.0 * PI * (f0 + df);
        let x = w * l - 1.0 / (w * c);
        let rt = 100.0 + r;
        let tau = (l + 1.0 / (w * w * c)) / rt / (1.0 + (x / rt).powi(2));
        assert_relative_eq!(a.response(f0 + df).group_delay_s, tau, max_relative = 1e-9);
    }
}

fn random_ladder(rng: &mut ChaCha8Rng, n: usize) -> Ladder {
    let mut stages = Vec::new();
    let f0 = 9e6;
    for i in 0..n {
        let lm = rng.gen_range(5e-3..30e-3);
        let fs = f0 + rng.gen_range(-300.0..300.0);
        let x = crate::crystal::Crystal::from_fs_lm(
            "x",
            fs,
            lm,
            rng.gen_range(0.0..40.0),
            rng.gen_range(0.0..6e-12),
        )
        .unwrap();
        let x = if i == 2 {
            x.with_spurious(f0 + 40e3, 50e-3, 80.0).unwrap()
        } else {
            x
        };
        let cs = Branch::Element(Element::Capacitor(
            rng.gen_range(20e-12..200e-12),
            Loss::Q(800.0),
        ));
        stages.push(Stage::Series(Branch::Series(vec![
            cs,
            Element::Crystal(x).into(),
        ])));
        if i + 1 < n {
            stages.push(Stage::Shunt(Branch::Element(Element::Capacitor(
                rng.gen_range(50e-12..500e-12),
                Loss::Esr(0.05),
            ))));
        }
    }
    stages.push(Stage::Shunt(Branch::Element(Element::Inductor(
        10e-6,
        Loss::Q(120.0),
    ))));
    Ladder::new(
        rng.gen_range(50.0..400.0),
        rng.gen_range(50.0..400.0),
        stages,
    )
    .unwrap()
}

#[test]
fn fast_path_agrees_with_nodal_solver() {
    // Two independent analyses of the same circuits; 1e-9 relative is far above rounding
    // error (~1e-13 here) and far below any modelling mistake.
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    for n in [1, 2, 5, 8, 12] {
        let lad = random_ladder(&mut rng, n);
        let ckt = lad.to_circuit().unwrap();
        for k in 0..60 {
            let f = 9e6 - 6e3 + 200.0 * k as f64 + rng.gen_range(0.0..50.0);
            let a = lad.response(f);
            let b = ckt.response(f);
            for (x, y) in [(a.s21, b.s21), (a.s11, b.s11), (a.s22, b.s22)] {
                assert!(
                    (x - y).norm() <= 1e-9 * x.norm().max(y.norm()).max(1e-6),
                    "n={n} f={f}: {x} vs {y}"
                );
            }
            assert_relative_eq!(
                a.group_delay_s,
                b.group_delay_s,
                max_relative = 1e-8,
                epsilon = 1e-15
            );
        }
    }
}

#[test]
fn group_delay_matches_phase_difference() {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let lad = random_ladder(&mut rng, 8);
    for f in [8.999e6, 9.0e6, 9.0012e6] {
        let h = 0.01; // Hz: phase changes by far less than a turn
        let p1 = lad.response(f - h).s21.arg();
        let p2 = lad.response(f + h).s21.arg();
        let mut dp = p2 - p1;
        if dp > PI {
            dp -= 2.0 * PI;
        } else if dp < -PI {
            dp += 2.0 * PI;
        }
        let tau_fd = -dp / (2.0 * PI * 2.0 * h);
        // Central difference error ~ h²·τ''', tiny at 0.01 Hz steps on a kHz-wide filter.
        assert_relative_eq!(lad.response(f).group_delay_s, tau_fd, max_relative = 1e-4);
    }
}

#[test]
fn reciprocity_and_passivity() {
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let lad = random_ladder(&mut rng, 6);
    let ckt = lad.to_circuit().unwrap();
    for k in 0..200 {
        let f = 8.99e6 + 100.0 * k as f64;
        let r = lad.response(f);
        let p = r.s11.norm_sqr() + r.s21.norm_sqr();
        assert!(p <= 1.0 + 1e-12, "passivity at {f}: {p}");
        let p2 = r.s22.norm_sqr() + r.s21.norm_sqr();
        assert!(p2 <= 1.0 + 1e-12);
        let _ = ckt;
    }
    // Lossless: power is conserved and |S11| = |S22|.
    let mut stages = Vec::new();
    for i in 0..4 {
        let x = crate::crystal::Crystal::from_fs_lm("x", 9e6 + 10.0 * i as f64, 15e-3, 0.0, 3e-12)
            .unwrap();
        stages.push(Stage::Series(Element::Crystal(x).into()));
        stages.push(Stage::Shunt(cap(150e-12)));
    }
    let lad = Ladder::new(220.0, 470.0, stages).unwrap();
    for k in 0..100 {
        let r = lad.response(8.998e6 + 50.0 * k as f64);
        assert_relative_eq!(r.s11.norm_sqr() + r.s21.norm_sqr(), 1.0, epsilon = 1e-10);
        assert_relative_eq!(r.s11.norm(), r.s22.norm(), epsilon = 1e-9);
    }
}

#[test]
fn reversed_ladder_transmits_the_same() {
    // S12 = S21: analysing the mirror image gives the same transmission.
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let lad = random_ladder(&mut rng, 5);
    let mut st = lad.stages().to_vec();
    st.reverse();
    let rev = Ladder::new(lad.load_ohm(), lad.source_ohm(), st).unwrap();
    for f in [8.998e6, 9.0e6, 9.003e6] {
        let (a, b) = (lad.response(f), rev.response(f));
        assert!((a.s21 - b.s21).norm() < 1e-12 * a.s21.norm().max(1e-9));
        assert!((a.s22 - b.s11).norm() < 1e-10);
    }
}

#[test]
fn structure_of_arrays_sweep_equals_point_by_point() {
    // The chunked path (all stages precompiled) against the per-point cascade, including a
    // ladder that falls back (spurious modes) and point counts that are not a multiple of the
    // chunk width.
    let mut rng = ChaCha8Rng::seed_from_u64(21);
    for n in [1, 3, 8] {
        let mut stages = Vec::new();
        for i in 0..n {
            let x = crate::crystal::Crystal::from_fs_lm(
                "x",
                9e6 + 10.0 * i as f64,
                rng.gen_range(10e-3..20e-3),
                rng.gen_range(0.0..20.0),
                rng.gen_range(0.0..5e-12),
            )
            .unwrap();
            let xb: Branch = Element::Crystal(x).into();
            stages.push(Stage::Series(if i % 2 == 0 {
                Branch::Series(vec![cap(rng.gen_range(30e-12..300e-12)), xb])
            } else {
                xb
            }));
            if i + 1 < n {
                stages.push(Stage::Shunt(cap(rng.gen_range(50e-12..400e-12))));
            }
        }
        let lad = Ladder::new(200.0, 330.0, stages).unwrap();
        for points in [1, 7, 8, 9, 1001] {
            let g = FrequencyGrid::linear(8.995e6, 9.006e6, points).unwrap();
            let s = lad.sweep(&g);
            assert_eq!(s.len(), points);
            for i in 0..points {
                let r = lad.response(g.at(i));
                assert_eq!(s.f_hz[i], g.at(i));
                for (x, y) in [(s.s21[i], r.s21), (s.s11[i], r.s11), (s.s22[i], r.s22)] {
                    assert!(
                        (x - y).norm() <= 1e-12 * y.norm().max(1e-9),
                        "n={n} i={i}: {x} vs {y}"
                    );
                }
                assert_relative_eq!(
                    s.group_delay_s[i],
                    r.group_delay_s,
                    max_relative = 1e-10,
                    epsilon = 1e-18
                );
            }
        }
    }
}
