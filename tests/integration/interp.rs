//! lerp and slerp against a NumPy implementation of Shoemake's formula.

use genloom::latent::{lerp, slerp};
use genloom_tests::{golden, hex_f64, hex_f64s, json};

#[test]
fn interpolation_matches_numpy_reference() {
    // Source: tests/golden/latent/interp.json, Shoemake (1985) slerp in NumPy float64 with the
    // spec's parallel, antiparallel and zero-vector branches.
    let g = json(&golden("latent/interp.json"));
    let mut branches = std::collections::BTreeSet::new();
    for c in g["cases"].as_array().unwrap() {
        let dim = c["dim"].as_u64().unwrap() as usize;
        // Inputs are f64 in the file; latents are f32. Round the inputs, then compare with a
        // tolerance that covers the f32 rounding of inputs and outputs.
        let a: Vec<f32> = hex_f64s(&c["a"]).iter().map(|&v| v as f32).collect();
        let b: Vec<f32> = hex_f64s(&c["b"]).iter().map(|&v| v as f32).collect();
        let ts = c["t"].as_array().unwrap();
        let want_lerp = hex_f64s(&c["lerp"]);
        let want_slerp = hex_f64s(&c["slerp"]);
        branches.insert(c["branch"].as_str().unwrap().to_string());
        for (r, t) in ts.iter().enumerate() {
            let t = hex_f64(t);
            let l = lerp(&a, &b, t).unwrap();
            let s = slerp(&a, &b, t).unwrap();
            for j in 0..dim {
                let (wl, ws) = (want_lerp[r * dim + j], want_slerp[r * dim + j]);
                assert!(
                    (f64::from(l[j]) - wl).abs() <= 1e-6 * (1.0 + wl.abs()),
                    "{} lerp t={t} [{j}]",
                    c["name"]
                );
                assert!(
                    (f64::from(s[j]) - ws).abs() <= 2e-5 * (1.0 + ws.abs()),
                    "{} ({}) slerp t={t} [{j}]: {} vs {ws}",
                    c["name"],
                    c["branch"],
                    s[j]
                );
            }
        }
    }
    for b in ["shoemake", "lerp-parallel", "lerp-zero", "antiparallel"] {
        assert!(branches.contains(b), "no case for branch {b}");
    }
}
