//! Regenerate `demo-data/`: the INVENTED "Larkspur Youth Imaging Pilot".
//!
//! Every value written by this program is invented for demonstration. The
//! cohort, its participants, the parcellation and the cortical sheet do not
//! exist. Research software: nothing here is for clinical decisions.
//!
//! ```text
//! cargo run --release --example make_demo            # writes demo-data/
//! cargo run --release --example make_demo -- OUTDIR  # writes elsewhere
//! ```
//!
//! The output is a pure function of [`SEED`] and the constants below: the
//! same build on the same platform reproduces every byte, and the program
//! writes `SHA256SUMS` (format of `sha256sum`, so `sha256sum -c` works) that
//! `tests/demo_data.rs` compares against. Matrix products are plain loops in
//! a fixed order (no BLAS, no runtime SIMD dispatch) so that the bits do not
//! depend on the CPU; `exp`, `ln`, `sin`, `cos` come from the platform's
//! maths library and may differ in the last bit on another platform.
//!
//! # Random streams
//! One ChaCha20 generator (`rand_chacha`) seeded with
//! `seed_from_u64(SEED)`, `SEED = 20261201`, and a separate stream
//! (`set_stream`) per part: stream 1 the atlas, stream 2 the cohort table,
//! stream `100 + s` participant `s` (1-based). A participant's data therefore
//! do not change when another participant's model changes.
//!
//! # Atlas (toy cortical sheet, 2 × 50 regions)
//! Each hemisphere is its own unit sphere carrying 50 points on a Fibonacci
//! lattice along the y axis: for k = 0..49, `u_y = 1 − (2k+1)/50`,
//! `r = √(1 − u_y²)`, `u_x = r cos(k·γ)`, `u_z = r sin(k·γ)` with the golden
//! angle γ = π(3 − √5). Region `L_Pkk` / `R_Pkk` is point k−1. The sheet in mm
//! is an ellipsoid per hemisphere, `x = s·(38 + 28 u_x)`, `y = 68 u_y`,
//! `z = 10 + 45 u_z`, with `s = −1` on the left and `+1` on the right, so the
//! medial walls lie 20 mm apart. `regions.tsv` stores the sphere coordinates
//! mirrored the same way (`sphere_x = s·u_x`), i.e. each hemisphere on its
//! own unit sphere centred at the origin, left lateral pointing to −x.
//!
//! # Hierarchy map
//! Sensory pole direction `p = normalise(0.35, −0.9, 0.25)` (posterior) on the
//! unmirrored sphere, the same in both hemispheres.
//! `h_i = (1 − u_i·p)/2 + Σ_{k=1}^{6} a_k exp(4 (u_i·c_k − 1))`, with per
//! hemisphere bump centres `c_k` uniform on the sphere and amplitudes
//! `a_k ~ N(0, 0.04²)`: a smooth gradient from the sensory pole (≈ 0) to the
//! association pole (≈ 1) plus a little smooth spatial noise. `h̃` is `h`
//! rescaled to [0, 1] over all 100 regions; the model below uses `h̃`.
//!
//! # Participants
//! 24 participants; ages stratified over [8, 23] years
//! (`8 + 15 (k + U(0,1))/24`, k = 0..23, rounded to 0.1 y) and shuffled over
//! `sub-01 … sub-24`; sex drawn `F`/`M` with probability ½. `a = (age − 8)/15`.
//!
//! # Connectome (streamline counts)
//! For i < j: `A_ij = A_ji ~ Poisson(λ_ij)`,
//! `λ_ij = N₀ · exp(−d_ij/η) · exp(β (h̃_i + h̃_j)) · ξ_i ξ_j · ε_ij`
//! with `d_ij` the Euclidean centroid distance (mm), `N₀ = 400`, `η = 18 mm`,
//! node factors `ln ξ_i ~ N(0, 0.1²)`, edge factors `ln ε_ij ~ N(0, 0.3²)`,
//! and the strength gradient `β = β₀ − β₁ a + N(0, 0.1²)`, `β₀ = 1.6`,
//! `β₁ = 1.0`. The diagonal is zero.
//!
//! Why this plants the control-energy asymmetry: for symmetric `A`, `B = I`
//! and `Ã = A/(1 + λ_max) − I`, the Gramian `W_T` and `Φ = e^{ÃT}` commute
//! with `Ã`, and `M − ΦMΦ = −2Ã` (`M = W_T⁻¹`; eigenvalue-wise
//! `m(1 − e^{2λT}) = −2λ` with `m = 2λ/(e^{2λT} − 1)`), so
//! `E_ij − E_ji = 2 (x_iᵀA x_i − x_jᵀA x_j)/(1 + λ_max)` for states of equal
//! size, whatever `T` (derived here; checked against `scipy.linalg.expm` in
//! `tests/reference/check_demo_effects.py`). With `β > 0`, bins higher on the
//! hierarchy have stronger within-bin wiring, so reaching them is cheap:
//! bottom-up transitions cost less than top-down ones, more so the farther
//! apart the bins, and less so as `β` falls with age.
//!
//! # Regional signals (frames × regions, TR = 2.0 s, 240 frames)
//! Intrinsic timescale `τ_i = (τ_lo + (τ_hi − τ_lo) h̃_i) (1 + α a h̃_i) e^{ζ}`,
//! `τ_lo = 2.5 s`, `τ_hi = 7.0 s`, `α = 0.15` (association timescales
//! lengthen mildly with age), `ζ ~ N(0, 0.05²)` per participant.
//! `φ_i = exp(−TR/τ_i)`. Latent state, with `Â = A/λ_max(A)`:
//! `z_t = diag(φ) z_{t−1} + κ Â z_{t−1} + diag(√(1 − φ_i²)) w_t`,
//! `w_t ~ N(0, I)`, `κ = 0.15`, 100 burn-in frames from `z = 0` discarded.
//! The spectral radius is below `max φ + κ < 1`, so the process is stable.
//!
//! Measured signal
//! `y_{t,i} = z_{t,i} + b_i g_t + Σ_k γ_ik m_{t,k} + art_{t,i} + σ_w e_{t,i}`:
//! * global fluctuation `g`: AR(1) with τ_g = 15 s, unit variance; loadings
//!   `b_i ~ U(0.5, 1.0)`;
//! * motion `m` (six parameters `trans_x/y/z` in mm, `rot_x/y/z` in rad):
//!   random walks from 0 with steps `N(0, σ_m²)`, `σ_m = 0.025 (1.6 − 0.6 a)
//!   e^{ν}` mm (`ν ~ N(0, 0.2²)`; rotations σ_m/50 rad); a frame is a spike
//!   with probability `p = min(0.15, (0.06 − 0.045 a) e^{ν'})`,
//!   `ν' ~ N(0, 0.3²)`, and then the steps are `N(0, 0.35²)` mm (0.35/50 rad);
//!   coupling `γ_ik ~ N(0, 0.4²)` per mm (rotations times 50 mm);
//! * artefact at each spike frame t: `art_{t,i} = c_i FD_t`,
//!   `art_{t+1,i} = 0.4 c_i FD_t`, `c_i ~ N(1.5, 0.5²)`;
//! * white measurement noise `σ_w = 0.5`.
//!
//! Confounds per frame: framewise displacement
//! `FD_t = Σ|Δtrans| + 50 mm · Σ|Δrot|` (Power et al. 2012, NeuroImage;
//! first frame `n/a`), `global_signal` = mean of `y_t` over regions, and the
//! six motion parameters. `participants.tsv` carries the mean FD over frames
//! 2..240.

use hierax::io::atomic::write_atomic;
use hierax::io::npy::write_npy_f64;
use hierax::io::table::{format_f64, write_json, Column, Table};
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, Normal, Poisson};
use sha2::{Digest, Sha256};
use std::error::Error;
use std::path::{Path, PathBuf};

/// Seed of every random stream (see the module doc).
pub const SEED: u64 = 20_261_201;
/// Version of this generator, written into `dataset.json`.
pub const GENERATOR_VERSION: &str = "1";
/// Repetition time in seconds (2 s: common practice for conventional fMRI, no source).
pub const TR_S: f64 = 2.0;
/// Frames per run (240 frames = 8 min; kept below 300 so demo-data/ stays near 5 MB).
pub const N_FRAMES: usize = 240;
/// Regions per hemisphere.
pub const N_PER_HEMI: usize = 50;
/// Participants.
pub const N_SUBJECTS: usize = 24;

const BURN_IN: usize = 100;
const N0: f64 = 400.0;
const ETA_MM: f64 = 18.0;
const XI_SD: f64 = 0.1;
const EDGE_SD: f64 = 0.3;
const BETA0: f64 = 1.6;
const BETA1: f64 = 1.0;
const BETA_SD: f64 = 0.1;
const TAU_LO_S: f64 = 2.5;
const TAU_HI_S: f64 = 7.0;
const TAU_AGE: f64 = 0.15;
const TAU_SD: f64 = 0.05;
const KAPPA: f64 = 0.15;
const TAU_GLOBAL_S: f64 = 15.0;
const NOISE_SD: f64 = 0.5;
const MOTION_SD_MM: f64 = 0.025;
const SPIKE_SD_MM: f64 = 0.35;
const HEAD_RADIUS_MM: f64 = 50.0;
const MOTION_COUPLING_SD: f64 = 0.4;

type Res<T> = Result<T, Box<dyn Error>>;

/// The atlas: names, hemisphere sign, mm centroids, unit-sphere coordinates
/// (mirrored like the mm coordinates), hierarchy values.
struct Atlas {
    names: Vec<String>,
    hemi: Vec<&'static str>,
    xyz_mm: Vec<[f64; 3]>,
    sphere: Vec<[f64; 3]>,
    hierarchy: Vec<f64>,
}

impl Atlas {
    fn n(&self) -> usize {
        self.names.len()
    }
}

fn rng_for(stream: u64) -> ChaCha20Rng {
    let mut r = ChaCha20Rng::seed_from_u64(SEED);
    r.set_stream(stream);
    r
}

fn normal(rng: &mut ChaCha20Rng, mean: f64, sd: f64) -> f64 {
    // The parameters are constants of this file, always finite with sd >= 0.
    Normal::new(mean, sd).expect("finite normal parameters").sample(rng)
}

fn dot3(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

fn unit_vector(rng: &mut ChaCha20Rng) -> [f64; 3] {
    loop {
        let v = [normal(rng, 0.0, 1.0), normal(rng, 0.0, 1.0), normal(rng, 0.0, 1.0)];
        let n = dot3(&v, &v).sqrt();
        if n > 1e-6 {
            return [v[0] / n, v[1] / n, v[2] / n];
        }
    }
}

fn make_atlas() -> Atlas {
    let mut rng = rng_for(1);
    let golden = std::f64::consts::PI * (3.0 - 5f64.sqrt());
    let pole = {
        let p = [0.35, -0.9, 0.25];
        let n = dot3(&p, &p).sqrt();
        [p[0] / n, p[1] / n, p[2] / n]
    };
    let mut atlas = Atlas { names: vec![], hemi: vec![], xyz_mm: vec![], sphere: vec![], hierarchy: vec![] };
    for (hemi, s) in [("L", -1.0), ("R", 1.0)] {
        let bumps: Vec<([f64; 3], f64)> =
            (0..6).map(|_| (unit_vector(&mut rng), normal(&mut rng, 0.0, 0.04))).collect();
        for k in 0..N_PER_HEMI {
            let uy = 1.0 - (2 * k + 1) as f64 / N_PER_HEMI as f64;
            let r = (1.0 - uy * uy).sqrt();
            let ang = k as f64 * golden;
            let u = [r * ang.cos(), uy, r * ang.sin()];
            let mut h = (1.0 - dot3(&u, &pole)) / 2.0;
            for (c, a) in &bumps {
                h += a * (4.0 * (dot3(&u, c) - 1.0)).exp();
            }
            atlas.names.push(format!("{hemi}_P{:02}", k + 1));
            atlas.hemi.push(hemi);
            atlas.xyz_mm.push([s * (38.0 + 28.0 * u[0]), 68.0 * u[1], 10.0 + 45.0 * u[2]]);
            atlas.sphere.push([s * u[0], u[1], u[2]]);
            atlas.hierarchy.push(h);
        }
    }
    atlas
}

fn distances(atlas: &Atlas) -> Array2<f64> {
    let n = atlas.n();
    Array2::from_shape_fn((n, n), |(i, j)| {
        let (a, b) = (&atlas.xyz_mm[i], &atlas.xyz_mm[j]);
        ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
    })
}

fn rescaled(h: &[f64]) -> Vec<f64> {
    let lo = h.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = h.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    h.iter().map(|v| (v - lo) / (hi - lo)).collect()
}

/// Spectral radius of a symmetric non-negative matrix by power iteration
/// (plain loops, fixed order, so the bits do not depend on the CPU).
fn spectral_radius(a: &Array2<f64>) -> f64 {
    let n = a.nrows();
    let mut v = vec![1.0 / (n as f64).sqrt(); n];
    let mut lambda = 0.0;
    for _ in 0..1000 {
        let w = matvec(a, &v);
        let norm = w.iter().map(|x| x * x).sum::<f64>().sqrt();
        if norm == 0.0 {
            return 0.0;
        }
        let new_lambda = v.iter().zip(&w).map(|(x, y)| x * y).sum::<f64>();
        v = w.into_iter().map(|x| x / norm).collect();
        if (new_lambda - lambda).abs() <= 1e-13 * new_lambda.abs() {
            return new_lambda;
        }
        lambda = new_lambda;
    }
    lambda
}

fn matvec(a: &Array2<f64>, v: &[f64]) -> Vec<f64> {
    a.rows().into_iter().map(|row| row.iter().zip(v).map(|(x, y)| x * y).sum()).collect()
}

struct Participant {
    id: String,
    age: f64,
    sex: &'static str,
}

fn make_cohort() -> Vec<Participant> {
    let mut rng = rng_for(2);
    let mut ages: Vec<f64> = (0..N_SUBJECTS)
        .map(|k| {
            let a = 8.0 + 15.0 * (k as f64 + rng.random::<f64>()) / N_SUBJECTS as f64;
            (a * 10.0).round() / 10.0
        })
        .collect();
    // Fisher–Yates shuffle, so that age is not the participant order.
    for i in (1..ages.len()).rev() {
        let j = rng.random_range(0..=i);
        ages.swap(i, j);
    }
    ages.into_iter()
        .enumerate()
        .map(|(k, age)| Participant {
            id: format!("sub-{:02}", k + 1),
            age,
            sex: if rng.random::<f64>() < 0.5 { "F" } else { "M" },
        })
        .collect()
}

/// One participant's generated data.
struct SubjectData {
    connectome: Array2<f64>,
    bold: Array2<f64>,
    /// Columns: global_signal, framewise_displacement, trans_x..rot_z.
    confounds: Vec<[f64; 8]>,
    mean_fd: f64,
}

fn make_subject(s: usize, p: &Participant, dist: &Array2<f64>, ht: &[f64]) -> Res<SubjectData> {
    let mut rng = rng_for(100 + s as u64);
    let n = ht.len();
    let a = (p.age - 8.0) / 15.0;

    // Connectome.
    let beta = BETA0 - BETA1 * a + normal(&mut rng, 0.0, BETA_SD);
    let xi: Vec<f64> = (0..n).map(|_| normal(&mut rng, 0.0, XI_SD).exp()).collect();
    let mut conn = Array2::<f64>::zeros((n, n));
    for i in 0..n {
        for j in (i + 1)..n {
            let eps = normal(&mut rng, 0.0, EDGE_SD).exp();
            let lambda =
                N0 * (-dist[[i, j]] / ETA_MM).exp() * (beta * (ht[i] + ht[j])).exp() * xi[i] * xi[j] * eps;
            let count = Poisson::new(lambda)?.sample(&mut rng);
            conn[[i, j]] = count;
            conn[[j, i]] = count;
        }
    }
    let rho = spectral_radius(&conn);
    let a_hat = conn.mapv(|v| v / rho);

    // Latent signals.
    let zeta = normal(&mut rng, 0.0, TAU_SD).exp();
    let phi: Vec<f64> = ht
        .iter()
        .map(|&h| {
            let tau = (TAU_LO_S + (TAU_HI_S - TAU_LO_S) * h) * (1.0 + TAU_AGE * a * h) * zeta;
            (-TR_S / tau).exp()
        })
        .collect();
    let innov: Vec<f64> = phi.iter().map(|f| (1.0 - f * f).sqrt()).collect();
    let mut z = vec![0.0; n];
    let mut latent = Array2::<f64>::zeros((N_FRAMES, n));
    for t in 0..(BURN_IN + N_FRAMES) {
        let coupled = matvec(&a_hat, &z);
        for i in 0..n {
            z[i] = phi[i] * z[i] + KAPPA * coupled[i] + innov[i] * normal(&mut rng, 0.0, 1.0);
        }
        if t >= BURN_IN {
            for i in 0..n {
                latent[[t - BURN_IN, i]] = z[i];
            }
        }
    }

    // Global fluctuation.
    let phi_g = (-TR_S / TAU_GLOBAL_S).exp();
    let mut g = Vec::with_capacity(N_FRAMES);
    g.push(normal(&mut rng, 0.0, 1.0));
    for t in 1..N_FRAMES {
        g.push(phi_g * g[t - 1] + (1.0 - phi_g * phi_g).sqrt() * normal(&mut rng, 0.0, 1.0));
    }
    let load: Vec<f64> = (0..n).map(|_| rng.random_range(0.5..1.0)).collect();

    // Motion: six random walks with spikes.
    let motion_sd = MOTION_SD_MM * (1.6 - 0.6 * a) * normal(&mut rng, 0.0, 0.2).exp();
    let p_spike = ((0.06 - 0.045 * a) * normal(&mut rng, 0.0, 0.3).exp()).min(0.15);
    let mut motion = vec![[0.0f64; 6]; N_FRAMES];
    let mut fd = vec![f64::NAN; N_FRAMES];
    let mut spike = vec![false; N_FRAMES];
    for t in 1..N_FRAMES {
        spike[t] = rng.random::<f64>() < p_spike;
        let sd = if spike[t] { SPIKE_SD_MM } else { motion_sd };
        let prev = motion[t - 1];
        let mut d = 0.0;
        for (k, (m, p)) in motion[t].iter_mut().zip(prev).enumerate() {
            // Rotations (k >= 3) in rad: their displacement on a 50 mm sphere.
            let scale = if k < 3 { 1.0 } else { HEAD_RADIUS_MM };
            let step = normal(&mut rng, 0.0, sd / scale);
            *m = p + step;
            d += scale * step.abs();
        }
        fd[t] = d;
    }
    let gamma: Vec<[f64; 6]> = (0..n)
        .map(|_| {
            let mut c = [0.0; 6];
            for (k, ck) in c.iter_mut().enumerate() {
                let per_mm = normal(&mut rng, 0.0, MOTION_COUPLING_SD);
                *ck = if k < 3 { per_mm } else { per_mm * HEAD_RADIUS_MM };
            }
            c
        })
        .collect();
    let art_gain: Vec<f64> = (0..n).map(|_| normal(&mut rng, 1.5, 0.5)).collect();

    // Measured signal.
    let mut bold = Array2::<f64>::zeros((N_FRAMES, n));
    for t in 0..N_FRAMES {
        for i in 0..n {
            let mut y = latent[[t, i]] + load[i] * g[t];
            for k in 0..6 {
                y += gamma[i][k] * motion[t][k];
            }
            if spike[t] {
                y += art_gain[i] * fd[t];
            }
            if t > 0 && spike[t - 1] {
                y += 0.4 * art_gain[i] * fd[t - 1];
            }
            y += NOISE_SD * normal(&mut rng, 0.0, 1.0);
            bold[[t, i]] = y;
        }
    }
    let confounds: Vec<[f64; 8]> = (0..N_FRAMES)
        .map(|t| {
            let gs = bold.row(t).iter().sum::<f64>() / n as f64;
            let m = motion[t];
            [gs, fd[t], m[0], m[1], m[2], m[3], m[4], m[5]]
        })
        .collect();
    let mean_fd = fd[1..].iter().sum::<f64>() / (N_FRAMES - 1) as f64;
    Ok(SubjectData { connectome: conn, bold, confounds, mean_fd })
}

/// Write a tab-separated table (BIDS style) atomically.
fn write_tsv(path: &Path, header: &[&str], rows: &[Vec<String>]) -> Res<()> {
    write_atomic(path, |w| {
        let mut out = csv::WriterBuilder::new().delimiter(b'\t').from_writer(w);
        out.write_record(header)?;
        for r in rows {
            out.write_record(r)?;
        }
        out.flush()
    })?;
    Ok(())
}

/// A confound value with 6 decimals (enough for mm and the signal's units,
/// and it keeps the tables small); the undefined first FD is `n/a` (BIDS).
fn confound_cell(v: f64) -> String {
    if v.is_nan() {
        "n/a".into()
    } else {
        format!("{v:.6}")
    }
}

/// Generate the whole demo cohort under `out` and return the files written
/// (relative to `out`), `SHA256SUMS` last.
pub fn generate(out: &Path) -> Res<Vec<PathBuf>> {
    let mut written: Vec<PathBuf> = Vec::new();
    let atlas = make_atlas();
    let n = atlas.n();
    let dist = distances(&atlas);
    let ht = rescaled(&atlas.hierarchy);

    let rel = PathBuf::from("atlas/regions.tsv");
    let rows: Vec<Vec<String>> = (0..n)
        .map(|i| {
            let (c, u) = (atlas.xyz_mm[i], atlas.sphere[i]);
            let mut r = vec![atlas.names[i].clone(), atlas.hemi[i].to_string()];
            r.extend(c.iter().chain(u.iter()).map(|&v| format_f64(v)));
            r
        })
        .collect();
    write_tsv(
        &out.join(&rel),
        &["region", "hemisphere", "x_mm", "y_mm", "z_mm", "sphere_x", "sphere_y", "sphere_z"],
        &rows,
    )?;
    written.push(rel);

    let rel = PathBuf::from("atlas/distances.npy");
    write_npy_f64(&out.join(&rel), &dist.clone().into_dyn())?;
    written.push(rel);

    let rel = PathBuf::from("atlas/hierarchy.csv");
    Table::new()
        .with("region", Column::Str(atlas.names.clone()))
        .with("value", Column::F64(atlas.hierarchy.clone()))
        .write_csv(&out.join(&rel))?;
    written.push(rel);

    let cohort = make_cohort();
    let mut mean_fds = Vec::new();
    for (s, p) in cohort.iter().enumerate() {
        let d = make_subject(s + 1, p, &dist, &ht)?;
        let dir = PathBuf::from(&p.id);

        let rel = dir.join(format!("{}_connectome.csv", p.id));
        let mut table = Table::new();
        for (j, name) in atlas.names.iter().enumerate() {
            // Counts are whole numbers far below 2^53, so the cast is exact.
            table = table.with(name, Column::I64(d.connectome.column(j).iter().map(|&v| v as i64).collect()));
        }
        table.write_csv(&out.join(&rel))?;
        written.push(rel);

        let rel = dir.join(format!("{}_bold.npy", p.id));
        write_npy_f64(&out.join(&rel), &d.bold.into_dyn())?;
        written.push(rel);

        let rel = dir.join(format!("{}_confounds.tsv", p.id));
        let rows: Vec<Vec<String>> =
            d.confounds.iter().map(|r| r.iter().map(|&v| confound_cell(v)).collect()).collect();
        write_tsv(
            &out.join(&rel),
            &[
                "global_signal",
                "framewise_displacement",
                "trans_x",
                "trans_y",
                "trans_z",
                "rot_x",
                "rot_y",
                "rot_z",
            ],
            &rows,
        )?;
        written.push(rel);
        mean_fds.push(d.mean_fd);
    }

    let rel = PathBuf::from("participants.tsv");
    let rows: Vec<Vec<String>> = cohort
        .iter()
        .zip(&mean_fds)
        .map(|(p, fd)| vec![p.id.clone(), format!("{:.1}", p.age), p.sex.to_string(), format!("{fd:.6}")])
        .collect();
    write_tsv(&out.join(&rel), &["participant_id", "age", "sex", "mean_framewise_displacement"], &rows)?;
    written.push(rel);

    let rel = PathBuf::from("dataset.json");
    let meta = serde_json::json!({
        "name": "Larkspur Youth Imaging Pilot (INVENTED demonstration data)",
        "invented": true,
        "description": "All participants, values and the parcellation are invented by examples/make_demo.rs \
                        for demonstrating hierax. Not real data; not for clinical decisions.",
        "generator": "examples/make_demo.rs",
        "generator_version": GENERATOR_VERSION,
        "seed": SEED,
        "rng": "rand_chacha ChaCha20Rng::seed_from_u64(seed), one stream per part",
        "repetition_time_s": TR_S,
        "n_frames": N_FRAMES,
        "n_regions": n,
        "n_participants": N_SUBJECTS,
        "series_layout": "frames x regions (float64)",
        "sphere_coordinates": "each hemisphere on its own unit sphere centred at the origin; sphere_x mirrored \
                               like x_mm (left lateral = -x)",
        "parameters": {
            "connectome": { "N0": N0, "eta_mm": ETA_MM, "node_log_sd": XI_SD, "edge_log_sd": EDGE_SD,
                            "beta0": BETA0, "beta1_per_unit_age": BETA1, "beta_sd": BETA_SD },
            "timescales": { "tau_lo_s": TAU_LO_S, "tau_hi_s": TAU_HI_S, "age_gain": TAU_AGE,
                            "participant_log_sd": TAU_SD, "coupling_kappa": KAPPA, "burn_in_frames": BURN_IN },
            "confounds": { "global_tau_s": TAU_GLOBAL_S, "noise_sd": NOISE_SD, "motion_step_sd_mm": MOTION_SD_MM,
                           "spike_step_sd_mm": SPIKE_SD_MM, "head_radius_mm": HEAD_RADIUS_MM,
                           "motion_coupling_sd_per_mm": MOTION_COUPLING_SD }
        }
    });
    write_json(&out.join(&rel), &meta)?;
    written.push(rel);

    // Digests of everything above, in sha256sum's format, sorted by path.
    written.sort();
    let mut sums = String::new();
    for rel in &written {
        let bytes = std::fs::read(out.join(rel))?;
        let hex: String = Sha256::digest(&bytes).iter().map(|b| format!("{b:02x}")).collect();
        sums.push_str(&format!("{hex}  {}\n", rel.to_string_lossy().replace('\\', "/")));
    }
    let rel = PathBuf::from("SHA256SUMS");
    hierax::io::atomic::write_bytes_atomic(&out.join(&rel), sums.as_bytes())?;
    written.push(rel);
    Ok(written)
}

fn main() -> Res<()> {
    let out = std::env::args_os().nth(1).map_or_else(|| PathBuf::from("demo-data"), PathBuf::from);
    let files = generate(&out)?;
    let bytes: u64 = files.iter().filter_map(|f| std::fs::metadata(out.join(f)).ok()).map(|m| m.len()).sum();
    println!(
        "wrote {} files ({:.2} MB) of INVENTED demo data to {} (seed {SEED})",
        files.len(),
        bytes as f64 / 1e6,
        out.display()
    );
    Ok(())
}
