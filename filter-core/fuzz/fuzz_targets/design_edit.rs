//! Designs edited by hand: numbers of a valid design record are changed (scaled by powers of
//! ten, negated, zeroed, set to extremes or to arbitrary bit patterns) or array entries
//! dropped, as the input bytes direct; the edited record is then read, analysed and predicted.
//! Whatever is accepted must give finite figures, or a clear error.
#![no_main]

use filter_core::design::Design;
use filter_core::synthesis::predict;
use filter_core_fuzz::{check_error, check_performance};
use libfuzzer_sys::fuzz_target;
use serde_json::Value;

/// Valid designs to edit: Chebyshev order 4 (6 dB bandwidth), Bessel order 6 predistorted and
/// refined, Butterworth order 1 with lossless crystals.
const DESIGNS: [&str; 3] = [
    include_str!("../seeds/design_json/d4.json"),
    include_str!("../seeds/design_json/d6.json"),
    include_str!("../seeds/design_json/d1.json"),
];

/// JSON pointers to every number and every array in `v`, in document order.
fn collect(v: &Value, at: String, numbers: &mut Vec<String>, arrays: &mut Vec<String>) {
    match v {
        Value::Number(_) => numbers.push(at),
        Value::Array(items) => {
            for (i, x) in items.iter().enumerate() {
                collect(x, format!("{at}/{i}"), numbers, arrays);
            }
            arrays.push(at);
        }
        Value::Object(map) => {
            for (k, x) in map {
                collect(x, format!("{at}/{k}"), numbers, arrays);
            }
        }
        _ => {}
    }
}

fn edited(value: f64, op: u8, arg: u8) -> f64 {
    match op % 8 {
        0 => value * 10f64.powi(i32::from(arg % 64) - 32),
        1 => -value,
        2 => 0.0,
        3 => [
            f64::MIN_POSITIVE,
            5e-324,
            1e-300,
            1e300,
            f64::MAX,
            1e-15,
            1e15,
            1.0,
        ][usize::from(arg % 8)],
        4 => value * (1.0 + (f64::from(arg) - 128.0) / 1000.0),
        5 => value + f64::from(arg) - 128.0,
        6 => f64::from(arg),
        _ => value * (1.0 + (f64::from(arg) - 128.0) * 1e-9),
    }
}

fuzz_target!(|data: &[u8]| {
    let Some((&which, edits)) = data.split_first() else {
        return;
    };
    let mut v: Value = serde_json::from_str(DESIGNS[usize::from(which) % DESIGNS.len()])
        .expect("the built-in designs are valid JSON");
    for chunk in edits.chunks_exact(3).take(16) {
        let (mut numbers, mut arrays) = (Vec::new(), Vec::new());
        collect(&v, String::new(), &mut numbers, &mut arrays);
        let (index, op, arg) = (usize::from(chunk[0]), chunk[1], chunk[2]);
        if op >= 240 {
            // Drop the last entry of an array (a list one entry too short).
            if let Some(at) = arrays.get(index % arrays.len().max(1)) {
                if let Some(Value::Array(items)) = v.pointer_mut(at) {
                    items.pop();
                }
            }
            continue;
        }
        let Some(at) = numbers.get(index % numbers.len().max(1)) else {
            continue;
        };
        let Some(slot) = v.pointer_mut(at) else {
            continue;
        };
        let Some(x) = slot.as_f64() else { continue };
        // JSON has no NaN or infinity: a record can only hold finite numbers.
        if let Some(n) = serde_json::Number::from_f64(edited(x, op, arg)) {
            *slot = Value::Number(n);
        }
    }
    let text = v.to_string();
    if std::env::var_os("DESIGN_EDIT_SHOW").is_some() {
        // To turn a crash into a regression file: the edited record as the reader saw it.
        println!("{text}");
    }
    let d = match Design::from_json(&text) {
        Err(e) => return check_error(&e),
        Ok(d) => d,
    };
    if let Err(e) = d.to_ladder() {
        return check_error(&e);
    }
    match predict(&d) {
        Err(e) => check_error(&e),
        Ok(p) => check_performance(&p),
    }
});
