//! Timing of the surrogate generators at the sizes of issue 5:
//! 1,000 variogram surrogates and 10,000 spins for a 400-region map.
//!
//! Run with `cargo bench --bench hierarchy` (release build). Thread count
//! from `HIERAX_BENCH_THREADS` (default 2). Each figure is printed beside a
//! baseline measured in the same run: the same number of plain random
//! permutations of the map (the cheapest possible null), so the ratio says
//! what the spatial constraint costs. Invented data.

use hierax::hierarchy::{
    spin_surrogates, variogram_surrogates, SphereLayout, SpinParams, VariogramModel, VariogramParams,
};
use ndarray::Array2;
use rand::seq::SliceRandom;
use rand::SeedableRng;
use std::time::Instant;

fn fibonacci_sphere(n: usize) -> Vec<[f64; 3]> {
    let golden = std::f64::consts::PI * (3.0 - 5f64.sqrt());
    (0..n)
        .map(|i| {
            let z = 1.0 - 2.0 * (i as f64 + 0.5) / n as f64;
            let r = (1.0 - z * z).sqrt();
            let t = golden * i as f64;
            [r * t.cos(), r * t.sin(), z]
        })
        .collect()
}

fn permutations(map: &[f64], count: usize) -> f64 {
    let t = Instant::now();
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(0);
    let mut sink = 0.0;
    for _ in 0..count {
        let mut v = map.to_vec();
        v.shuffle(&mut rng);
        sink += v[0];
    }
    std::hint::black_box(sink);
    t.elapsed().as_secs_f64()
}

fn main() {
    let threads: usize = std::env::var("HIERAX_BENCH_THREADS").ok().and_then(|s| s.parse().ok()).unwrap_or(2);
    rayon::ThreadPoolBuilder::new().num_threads(threads).build_global().expect("rayon pool");
    let n = 400;
    let pts = fibonacci_sphere(n);
    let map: Vec<f64> = pts.iter().map(|p| (2.0 * p[0]).sin() + p[1] * p[2]).collect();
    let dist = Array2::from_shape_fn((n, n), |(i, j)| {
        if i == j {
            0.0
        } else {
            let d: f64 = (0..3).map(|k| pts[i][k] * pts[j][k]).sum();
            d.clamp(-1.0, 1.0).acos()
        }
    });
    let dist = (&dist + &dist.t()) * 0.5;
    println!("hierax hierarchy bench: {n} regions, {threads} thread(s)");

    let p = VariogramParams::new(1000, 1);
    let t = Instant::now();
    let model = VariogramModel::new(&dist, &p).expect("model");
    let setup = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let s = variogram_surrogates(&map, &model, &p).expect("variogram");
    let vt = t.elapsed().as_secs_f64();
    let base = permutations(&map, 1000);
    let fe = s.fit_error.iter().sum::<f64>() / s.fit_error.len() as f64;
    println!(
        "variogram: 1000 surrogates in {vt:.2} s (+ {setup:.2} s setup); plain permutations {base:.4} s; ratio {:.0}; mean fit error {fe:.3}",
        vt / base
    );

    let mut coords = Array2::<f64>::zeros((n, 3));
    let mut hemi = vec![0.0; n];
    let half = fibonacci_sphere(n / 2);
    for (i, q) in half.iter().enumerate() {
        coords.row_mut(i).assign(&ndarray::arr1(q));
        coords.row_mut(i + n / 2).assign(&ndarray::arr1(&[-q[0], q[1], q[2]]));
        hemi[i + n / 2] = 1.0;
    }
    let whole = Array2::from_shape_fn((n, 3), |(i, k)| pts[i][k]);
    for (label, layout) in [
        ("whole sphere", SphereLayout::new(&whole, None, 0.02).expect("layout")),
        ("two hemispheres", SphereLayout::new(&coords, Some(&hemi), 0.02).expect("layout")),
    ] {
        let t = Instant::now();
        let s = spin_surrogates(&map, &layout, &SpinParams::new(10_000, 1)).expect("spin");
        let st = t.elapsed().as_secs_f64();
        let base = permutations(&map, 10_000);
        println!(
            "spin ({label}): 10000 surrogates in {st:.2} s; plain permutations {base:.4} s; ratio {:.0}; mean reassignment angle {:.3} rad",
            st / base,
            s.mean_reassignment_angle
        );
    }
}
