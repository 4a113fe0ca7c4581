//! Criterion benchmark of the tolerance yield analysis: 10,000 Monte Carlo trials of an
//! 8-crystal design at 1,001 points (target: 2 s or less on 2 cores). The design is made once,
//! outside the timed closure.

use criterion::{black_box, criterion_group, criterion_main, Criterion, SamplingMode};
use filter_core::crystal::Crystal;
use filter_core::design::{BandwidthAt, Design, ResponseFamily};
use filter_core::synthesis::LadderSpec;
use filter_core::tolerance::{run_yield, Limits, ToleranceSpec};
use std::time::Duration;

/// Chebyshev 0.1 dB, 8 identical crystals (9 MHz, Lm 15 mH, Rm 10 Ω, C0 4 pF), 2400 Hz at −3 dB.
fn design() -> Design {
    let x = Crystal::from_fs_lm("Y", 9e6, 15e-3, 10.0, 4e-12).expect("valid crystal");
    LadderSpec::identical(
        ResponseFamily::Chebyshev { ripple_db: 0.1 },
        8,
        2400.0,
        BandwidthAt::Db3,
        &x,
    )
    .synthesize()
    .expect("the benchmark design is realizable")
}

fn yield_analysis(c: &mut Criterion) {
    let d = design();
    let spec = ToleranceSpec {
        trials: 10_000,
        cap_tol: 0.05,
        fs_sigma_hz: 20.0,
        seed: 1,
        points: 1001,
        ..ToleranceSpec::default()
    };
    let limits = Limits::default_for(&d);
    let mut g = c.benchmark_group("yield");
    // About a second per run: ten flat samples of one run each.
    g.sample_size(10);
    g.sampling_mode(SamplingMode::Flat);
    g.measurement_time(Duration::from_secs(15));
    g.bench_function("chebyshev8_10000_trials_1001_points", |b| {
        b.iter(|| black_box(run_yield(&d, &spec, &limits, None).expect("yield runs")))
    });
    g.finish();
}

criterion_group!(benches, yield_analysis);
criterion_main!(benches);
