//! Tests of the plots: structure of the SVG text, errors, and robustness to NaN and ±∞.

use super::*;
use crate::network::{Analyze, Branch, Element, FrequencyGrid, Ladder, Loss, Stage};
use num_complex::Complex64;
use proptest::prelude::*;
use std::f64::consts::PI;

/// A series RLC between 50 Ω ends at 9 MHz: one resonator, a closed-form response.
fn resonator() -> Ladder {
    let l = 15e-3;
    let c = 1.0 / ((2.0 * PI * 9e6f64).powi(2) * l);
    let b = Branch::Series(vec![
        Branch::Element(Element::Inductor(l, Loss::Lossless)),
        Branch::Element(Element::Capacitor(c, Loss::Lossless)),
        Branch::Element(Element::Resistor(10.0)),
    ]);
    Ladder::new(50.0, 50.0, vec![Stage::Series(b)]).unwrap()
}

fn sweep() -> Sweep {
    resonator().sweep(&FrequencyGrid::linear(9e6 - 20e3, 9e6 + 20e3, 401).unwrap())
}

fn perf() -> Performance {
    Performance::from_sweep(&sweep()).unwrap()
}

fn opts(title: &str) -> PlotOptions {
    PlotOptions::new(title, FrequencyAxis::OffsetFrom { center_hz: 9e6 })
}

/// Every number in every `points="…"` attribute (plotters draws lines as polylines).
fn polyline_coords(svg: &str) -> Vec<f64> {
    let mut out = Vec::new();
    for part in svg.split("points=\"").skip(1) {
        let list = part.split('"').next().unwrap_or("");
        for xy in list.split_whitespace() {
            for v in xy.split(',') {
                out.push(v.parse::<f64>().unwrap_or(f64::NAN));
            }
        }
    }
    out
}

/// The structural checks every chart must pass.
fn assert_well_formed(svg: &str, opts: &PlotOptions) {
    assert!(svg.starts_with("<svg"), "{}", &svg[..svg.len().min(80)]);
    assert!(svg.trim_end().ends_with("</svg>"));
    assert_eq!(svg.matches("<text").count(), svg.matches("</text>").count());
    assert!(!svg.contains("NaN"), "no NaN coordinates or labels");
    if let Some(i) = svg.find("inf") {
        panic!(
            "no infinite coordinates or labels: {}",
            &svg[i.saturating_sub(200)..(i + 20).min(svg.len())]
        );
    }
    // Every line vertex lies on the image (off-image points mean a clamping failure).
    let (w, h) = (f64::from(opts.width), f64::from(opts.height));
    for (i, v) in polyline_coords(svg).into_iter().enumerate() {
        let limit = if i % 2 == 0 { w } else { h };
        assert!(
            v.is_finite() && (0.0..=limit).contains(&v),
            "vertex coordinate {v} off the image"
        );
    }
}

#[test]
fn transmission_in_db_has_labels_title_and_markers() {
    let o = opts("Test filter: 2 kHz");
    let p = perf();
    let svg = transmission_svg(&sweep(), Some(&p), &o).unwrap();
    assert_well_formed(&svg, &o);
    assert!(svg.contains(TRANSMISSION_DB_LABEL));
    assert!(svg.contains("Frequency offset from 9.000 MHz (kHz)"));
    assert!(svg.contains("Test filter: 2 kHz"));
    // Marker tags and legend entries with the bandwidths of `perf`.
    assert!(
        svg.contains("\u{2212}3 dB: BW "),
        "legend names the −3 dB bandwidth"
    );
    assert!(svg.contains("\u{2212}6 dB: BW "));
    // The single resonator reaches −60 dB nowhere in ±20 kHz: no −60 dB entry.
    assert!(!svg.contains("\u{2212}60 dB: BW "));
}

#[test]
fn transmission_linear_is_a_voltage_ratio_from_zero() {
    let mut o = opts("linear");
    o.linear = true;
    let svg = transmission_svg(&sweep(), Some(&perf()), &o).unwrap();
    assert_well_formed(&svg, &o);
    assert!(svg.contains(TRANSMISSION_LINEAR_LABEL));
    assert!(svg.contains("|V| ratio"));
    // The y tick labels start at zero.
    assert!(
        svg.contains(">\n0\n</text>") || svg.contains(">\n0.0\n</text>"),
        "a tick at zero"
    );
}

#[test]
fn return_loss_and_delay_have_their_labels() {
    let o = opts("rl");
    let p = perf();
    let svg = return_loss_svg(&sweep(), Some(&p), &o).unwrap();
    assert_well_formed(&svg, &o);
    assert!(svg.contains(RETURN_LOSS_LABEL));
    assert!(svg.contains("worst in passband"));
    let svg = group_delay_svg(&sweep(), Some(&p), &o).unwrap();
    assert_well_formed(&svg, &o);
    // A 9 MHz resonator with Q of about 1200 at 110 Ω loading: tens of µs, so µs.
    assert!(
        svg.contains("Group delay (µs)"),
        "µs for a delay of tens of µs"
    );
    assert!(svg.contains("at centre:"));
}

#[test]
fn delay_units_follow_the_magnitude() {
    assert_eq!(time_unit(412e-6).1, "µs");
    assert_eq!(time_unit(2.5e-3).1, "ms");
    assert_eq!(time_unit(80e-9).1, "ns");
}

#[test]
fn wide_marks_notches_and_spurs_on_the_range_only() {
    let o = PlotOptions::new("wide", FrequencyAxis::AbsoluteMhz);
    let svg = wide_svg(&sweep(), None, &[9.012e6, 12e6], &[9.015e6], &o).unwrap();
    assert_well_formed(&svg, &o);
    assert_eq!(
        svg.matches(">\nC0 notch 9.").count(),
        1,
        "the 12 MHz notch is off the plot"
    );
    assert!(svg.contains("spurious 9.0150"), "{}", svg.len());
    assert!(svg.contains("Frequency (MHz)"));
}

#[test]
fn fit_overlay_reports_the_residual() {
    let s = sweep();
    let m = MeasuredTrace {
        f_hz: s.f_hz.clone(),
        s21_db: s.s21_db(),
        s21_deg: None,
        reference_ohm: Some(50.0),
    };
    // A fit off by exactly 0.5 dB everywhere: rms residual 0.5 dB.
    let fitted: Vec<f64> = m.s21_db.iter().map(|v| v + 0.5).collect();
    let o = opts("X1");
    let svg = fit_overlay_svg(&m, &fitted, &o).unwrap();
    assert_well_formed(&svg, &o);
    assert!(svg.contains("X1 · residual rms 0.500 dB"));
    assert!(svg.contains("measured") && svg.contains("fitted model"));
    let e = fit_overlay_svg(&m, &fitted[1..], &o).unwrap_err();
    assert!(e.message().contains("fitted_db"), "{e}");
}

#[test]
fn envelope_has_band_and_nominal() {
    let s = sweep();
    let nom = s.s21_db();
    let lo: Vec<f64> = nom.iter().map(|v| v - 1.0).collect();
    let hi: Vec<f64> = nom.iter().map(|v| v + 1.0).collect();
    let o = opts("mc");
    let svg = envelope_svg(&s.f_hz, &lo, &hi, &nom, &o).unwrap();
    assert_well_formed(&svg, &o);
    assert!(svg.contains("<polygon"));
    assert!(svg.contains("nominal"));
    assert!(envelope_svg(&s.f_hz, &lo[1..], &hi, &nom, &o).is_err());
}

#[test]
fn histogram_counts_and_limits() {
    // Quarters are exact in binary: values 0, 0.25, …, 24.75.
    let v: Vec<f64> = (0..100).map(|i| 0.25 * f64::from(i)).collect();
    let o = opts("sf");
    let svg = histogram_svg(&v, 10, "Shape factor 60/6 dB", Some((5.0, 10.0)), &o).unwrap();
    assert_well_formed(&svg, &o);
    assert!(svg.contains("Shape factor 60/6 dB") && svg.contains(COUNT_LABEL));
    // 5.00 ..= 10.00 holds i = 20 ..= 40: 21 values, limits included.
    assert!(
        svg.contains("within limits: 21 of 100 (21.0 %)"),
        "count within limits"
    );
    assert!(svg.contains("low limit") && svg.contains("high limit"));
    // One-sided limit: no high line.
    let svg = histogram_svg(&v, 10, "x", Some((5.0, f64::INFINITY)), &o).unwrap();
    assert!(!svg.contains("high limit"));
    assert!(histogram_svg(&v, 0, "x", None, &o).is_err());
    assert!(histogram_svg(&v, 10, "x", Some((2.0, 1.0)), &o).is_err());
    assert!(histogram_svg(&[f64::NAN], 10, "x", None, &o).is_err());
    // A single repeated value still plots.
    let svg = histogram_svg(&[3.0; 5], 4, "x", None, &o).unwrap();
    assert_well_formed(&svg, &o);
}

#[test]
fn empty_and_mismatched_inputs_are_errors() {
    let o = opts("t");
    let empty = Sweep::default();
    for f in [transmission_svg, return_loss_svg, group_delay_svg] {
        let e = f(&empty, None, &o).unwrap_err();
        assert!(e.message().contains("0 points"), "{e}");
    }
    assert!(wide_svg(&empty, None, &[], &[], &o).is_err());
    let mut s = sweep();
    s.s21.pop();
    let e = transmission_svg(&s, None, &o).unwrap_err();
    assert!(
        e.message().contains("sweep s21") && e.message().contains("400 values for 401"),
        "{e}"
    );
    let mut s = sweep();
    s.group_delay_s.truncate(3);
    assert!(group_delay_svg(&s, None, &o).is_err());
    assert!(envelope_svg(&[], &[], &[], &[], &o).is_err());
}

#[test]
fn all_nan_is_an_error_and_bad_options_too() {
    let mut s = sweep();
    for z in &mut s.s21 {
        *z = Complex64::new(f64::NAN, 0.0);
    }
    let e = transmission_svg(&s, None, &opts("t")).unwrap_err();
    assert!(e.message().contains("nothing to plot"), "{e}");
    let mut o = opts("t");
    o.width = 10;
    let e = transmission_svg(&sweep(), None, &o).unwrap_err();
    assert!(e.message().contains("plot width"), "{e}");
    let o = PlotOptions::new(
        "t",
        FrequencyAxis::OffsetFrom {
            center_hz: f64::NAN,
        },
    );
    assert!(transmission_svg(&sweep(), None, &o).is_err());
}

#[test]
fn lossless_notch_is_clamped_to_the_floor() {
    // |S21| = 0 at one point gives −∞ dB: drawn on the axis, not off the image.
    let mut s = sweep();
    s.s21[200] = Complex64::new(0.0, 0.0);
    s.s11[200] = Complex64::new(1.0, 0.0);
    let o = opts("notch");
    for svg in [
        transmission_svg(&s, None, &o).unwrap(),
        wide_svg(&s, None, &[], &[], &o).unwrap(),
        return_loss_svg(&s, None, &o).unwrap(),
    ] {
        assert_well_formed(&svg, &o);
    }
}

#[test]
fn title_text_is_escaped() {
    let o = opts("Rs & RL <200 Ω>");
    let svg = transmission_svg(&sweep(), None, &o).unwrap();
    assert!(svg.contains("Rs &amp; RL &lt;200 Ω&gt;"));
}

#[test]
fn schematic_labels_every_part() {
    let n = 8;
    let labels = SchematicLabels {
        source: "220 Ω".into(),
        load: "220 Ω".into(),
        series: (0..n)
            .map(|i| (i != 3).then(|| format!("{} pF", 100 + i)))
            .collect(),
        crystals: (0..n).map(|i| format!("X-{:02}", i + 1)).collect(),
        shunt: (0..n - 1).map(|i| format!("{} pF", 200 + i)).collect(),
    };
    let svg = schematic_svg(n, &labels);
    assert!(svg.starts_with("<svg"));
    for d in ["Rs", "RL", "Cs1", "X8", "C12", "C78"] {
        assert!(svg.contains(&format!(">{d}</text>")), "designator {d}");
    }
    assert!(
        !svg.contains(">Cs4</text>"),
        "no capacitor at position 4: a wire"
    );
    assert!(svg.contains("206 pF") && svg.contains("X-05"));
    assert_eq!(
        svg.matches(">C").count() - svg.matches(">Cs").count(),
        n - 1,
        "n − 1 shunt caps"
    );
    // Fewer labels than parts and no crystals at all still draw.
    let s = schematic_svg(3, &SchematicLabels::default());
    assert!(s.contains(">X3</text>"));
    let s = schematic_svg(0, &SchematicLabels::default());
    assert!(s.contains(">Rs</text>") && s.contains(">RL</text>"));
}

fn odd_value() -> impl Strategy<Value = f64> {
    prop_oneof![
        4 => -200.0f64..20.0,
        1 => Just(f64::NAN),
        1 => Just(f64::INFINITY),
        1 => Just(f64::NEG_INFINITY),
        1 => Just(0.0),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    /// Arbitrary mixes of NaN, ±∞ and ordinary values never panic; every result is either an
    /// error or a well-formed SVG.
    #[test]
    fn odd_values_never_panic(
        vals in proptest::collection::vec((odd_value(), odd_value(), odd_value()), 1..40),
        linear in any::<bool>(),
    ) {
        let n = vals.len();
        let f_hz: Vec<f64> = (0..n)
            .map(|i| if vals[i].2.is_nan() { f64::NAN } else { 9e6 + 100.0 * i as f64 })
            .collect();
        let mag = |db: f64| 10f64.powf(db / 20.0);
        let s = Sweep {
            f_hz: f_hz.clone(),
            s21: vals.iter().map(|v| Complex64::new(mag(v.0), 0.0)).collect(),
            s11: vals.iter().map(|v| Complex64::new(mag(v.1), 0.0)).collect(),
            s22: vals.iter().map(|v| Complex64::new(mag(v.1), 0.0)).collect(),
            group_delay_s: vals.iter().map(|v| v.1 * 1e-6).collect(),
        };
        let mut o = PlotOptions::new("odd", FrequencyAxis::OffsetFrom { center_hz: 9e6 });
        o.linear = linear;
        let a: Vec<f64> = vals.iter().map(|v| v.0).collect();
        let b: Vec<f64> = vals.iter().map(|v| v.1).collect();
        let results = [
            transmission_svg(&s, None, &o),
            return_loss_svg(&s, None, &o),
            group_delay_svg(&s, None, &o),
            wide_svg(&s, None, &[9.0005e6], &[9.001e6, f64::NAN], &o),
            envelope_svg(&f_hz, &a, &b, &a, &o),
            histogram_svg(&a, 7, "x", Some((-10.0, 0.0)), &o),
            fit_overlay_svg(
                &MeasuredTrace { f_hz: f_hz.clone(), s21_db: a.clone(), s21_deg: None, reference_ohm: None },
                &b,
                &o,
            ),
        ];
        for r in results.iter().flatten() {
            assert_well_formed(r, &o);
        }
    }
}

#[test]
fn every_chart_has_its_title_and_axis_labels() {
    let title = "Design 7: 2.4 kHz SSB, eight crystals";
    let o = opts(title);
    let s = sweep();
    let p = perf();
    let f_desc = "Frequency offset from 9.000 MHz (kHz)";
    let m = MeasuredTrace {
        f_hz: s.f_hz.clone(),
        s21_db: s.s21_db(),
        s21_deg: None,
        reference_ohm: None,
    };
    let nominal = s.s21_db();
    let charts = [
        (
            transmission_svg(&s, Some(&p), &o).unwrap(),
            TRANSMISSION_DB_LABEL,
        ),
        (
            return_loss_svg(&s, Some(&p), &o).unwrap(),
            RETURN_LOSS_LABEL,
        ),
        (
            group_delay_svg(&s, Some(&p), &o).unwrap(),
            "Group delay (µs)",
        ),
        (
            wide_svg(&s, Some(&p), &[], &[], &o).unwrap(),
            TRANSMISSION_DB_LABEL,
        ),
        (
            fit_overlay_svg(&m, &nominal, &o).unwrap(),
            TRANSMISSION_DB_LABEL,
        ),
        (
            envelope_svg(&s.f_hz, &nominal, &nominal, &nominal, &o).unwrap(),
            TRANSMISSION_DB_LABEL,
        ),
    ];
    for (svg, y_desc) in &charts {
        assert_well_formed(svg, &o);
        assert!(svg.contains(title), "title");
        assert!(svg.contains(f_desc), "x axis description");
        assert!(svg.contains(y_desc), "y axis description {y_desc}");
    }
    let h = histogram_svg(&[1.0, 2.0], 2, "Shape factor 60/6 dB", None, &o).unwrap();
    assert_well_formed(&h, &o);
    assert!(h.contains(title) && h.contains("Shape factor 60/6 dB") && h.contains(COUNT_LABEL));
}
