//! Criterion benchmarks, one group per stage. Inputs are fixed; setup stays outside the
//! timed closures. Figures guide changes; they do not gate them.

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use filter_core::crystal::Crystal;
use filter_core::network::{
    Analyze, Branch, Element, FrequencyGrid, Ladder, Loss, Outputs, Stage, Sweep,
};

/// An 8-crystal (or n-crystal) ladder of unequal crystals with C0, Rm and series capacitors.
fn ladder(n: usize) -> Ladder {
    let mut stages = Vec::new();
    for i in 0..n {
        let fs = 9e6 + 13.0 * i as f64 - 40.0;
        let x = Crystal::from_fs_lm("x", fs, 15e-3 + 1e-4 * i as f64, 10.0, 4e-12).unwrap();
        stages.push(Stage::Series(Branch::Series(vec![
            Branch::Element(Element::Capacitor(
                120e-12 + 3e-12 * i as f64,
                Loss::Lossless,
            )),
            Branch::Element(Element::Crystal(x)),
        ])));
        if i + 1 < n {
            stages.push(Stage::Shunt(Branch::Element(Element::Capacitor(
                180e-12,
                Loss::Lossless,
            ))));
        }
    }
    Ladder::new(270.0, 270.0, stages).unwrap()
}

fn analysis(c: &mut Criterion) {
    let mut g = c.benchmark_group("analysis");
    let lad8 = ladder(8);
    let grid = FrequencyGrid::linear(8.99e6, 9.01e6, 10_001).unwrap();
    g.bench_function("ladder_8x10001", |b| {
        b.iter(|| black_box(lad8.sweep(&grid)))
    });
    // What `analyze` runs: S21, S11 and the group delay into a reused buffer.
    let mut reused = Sweep::default();
    g.bench_function("ladder_8x10001_no_s22_reused", |b| {
        b.iter(|| lad8.sweep_outputs_into(&grid, Outputs::NoS22, black_box(&mut reused)))
    });
    let lad12 = ladder(12);
    let grid = FrequencyGrid::linear(8.99e6, 9.01e6, 100_001).unwrap();
    g.sample_size(20);
    g.bench_function("ladder_12x100001", |b| {
        b.iter(|| black_box(lad12.sweep(&grid)))
    });
    g.finish();
}

fn synthesis(c: &mut Criterion) {
    use filter_core::design::{BandwidthAt, ResponseFamily};
    use filter_core::synthesis::LadderSpec;
    let mut g = c.benchmark_group("synthesis");
    let crystals: Vec<Crystal> = (0..8)
        .map(|i| {
            Crystal::from_fs_lm(
                &format!("Y{i}"),
                9e6 + 7.0 * i as f64 - 25.0,
                15e-3,
                10.0,
                4e-12,
            )
            .unwrap()
        })
        .collect();
    let mut spec = LadderSpec {
        family: ResponseFamily::Chebyshev { ripple_db: 0.1 },
        bandwidth_hz: 2400.0,
        bandwidth_at: BandwidthAt::Db3,
        predistort: false,
        refine: false,
        crystals,
    };
    g.bench_function("slope_parameter_8", |b| {
        b.iter(|| black_box(spec.synthesize().unwrap()))
    });
    spec.refine = true;
    g.sample_size(10);
    g.bench_function("refined_8", |b| {
        b.iter(|| black_box(spec.synthesize().unwrap()))
    });
    g.finish();
}

/// Time against order (10,001 points) and against point count (8 crystals).
fn scaling(c: &mut Criterion) {
    let mut g = c.benchmark_group("scaling");
    g.sample_size(10);
    for n in [2, 4, 8, 12, 16] {
        let lad = ladder(n);
        let grid = FrequencyGrid::linear(8.99e6, 9.01e6, 10_001).unwrap();
        g.bench_function(format!("order_{n}_x10001"), |b| {
            b.iter(|| black_box(lad.sweep(&grid)))
        });
    }
    let lad = ladder(8);
    for points in [100, 1_000, 10_000, 100_000, 1_000_000] {
        let grid = FrequencyGrid::linear(8.99e6, 9.01e6, points).unwrap();
        g.bench_function(format!("order_8_x{points}"), |b| {
            b.iter(|| black_box(lad.sweep(&grid)))
        });
    }
    g.finish();
}

/// A 2,001-point sweep of one crystal in a 50 Ω fixture, with seeded noise, and a batch of
/// 10,000 crystals to match.
fn measurement(c: &mut Criterion) {
    use filter_core::batch::{match_crystals, MatchRequest};
    use filter_core::io::MeasuredTrace;
    use filter_core::measure::{fit_sweep, fixture_s21, FixtureSpec};
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
    let x = Crystal::from_fs_lm("x", 9e6, 15e-3, 12.0, 4e-12).unwrap();
    let fixture = FixtureSpec::default();
    let f: Vec<f64> = (0..2001).map(|i| 8.995e6 + 12.0 * i as f64).collect();
    let s21_db = f
        .iter()
        .map(|&fi| {
            let h = fixture_s21(&x, &fixture, fi);
            20.0 * h.norm().log10() + rng.gen_range(-0.02..0.02)
        })
        .collect();
    let trace = MeasuredTrace {
        f_hz: f,
        s21_db,
        s21_deg: None,
        reference_ohm: None,
    };
    let mut g = c.benchmark_group("measurement");
    g.sample_size(20);
    g.bench_function("fit_2001_points", |b| {
        b.iter(|| black_box(fit_sweep(&trace, &fixture, "x").unwrap()))
    });
    let batch: Vec<Crystal> = (0..10_000)
        .map(|i| {
            Crystal::from_fs_lm(
                &format!("c{i}"),
                9e6 + rng.gen_range(-150.0..150.0),
                rng.gen_range(14e-3..16e-3),
                rng.gen_range(8.0..14.0),
                4e-12,
            )
            .unwrap()
        })
        .collect();
    let req = MatchRequest {
        count: 8,
        sets: 10,
        tolerance_hz: None,
    };
    g.bench_function("match_10000", |b| {
        b.iter(|| black_box(match_crystals(&batch, &req).unwrap()))
    });
    g.finish();
}

criterion_group!(benches, analysis, synthesis, scaling, measurement);
criterion_main!(benches);
