//! Calibration of the permutation machinery under a planted null, and the
//! `hierax link` command.

use hierax::stats::correlation::spearman;
use hierax::stats::inference::{ks_uniform, permutation_p_value, Alternative};
use rand::seq::SliceRandom;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Two-sided permutation p-value of Spearman(map, tau) from 199 shuffles of the map.
fn spearman_permutation_p(map: &[f64], tau: &[f64], rng: &mut ChaCha8Rng) -> f64 {
    let obs = spearman(map, tau).unwrap().r;
    let mut perm = map.to_vec();
    let null: Vec<f64> = (0..199)
        .map(|_| {
            perm.shuffle(rng);
            spearman(&perm, tau).unwrap().r
        })
        .collect();
    permutation_p_value(obs, &null, Alternative::TwoSided).unwrap()
}

#[test]
fn permutation_p_values_are_uniform_under_a_planted_null() {
    // Maps unrelated by construction: timescales and hierarchy drawn independently.
    // Each p-value uses 199 permutations; 400 simulations; the KS test (exact distribution,
    // checked against scipy.stats.kstest in tests/stats.rs) must not reject uniformity at 1 %.
    for seed in 0..3u64 {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut ps = Vec::new();
        for _ in 0..400 {
            let map: Vec<f64> = (0..40).map(|_| rng.random::<f64>()).collect();
            let tau: Vec<f64> = (0..40).map(|_| rng.random::<f64>()).collect();
            ps.push(spearman_permutation_p(&map, &tau, &mut rng));
        }
        let (d, p) = ks_uniform(&ps).unwrap();
        assert!(p > 0.01, "seed {seed}: KS D = {d}, p = {p}");
        // And a planted effect is detected: the same machinery on related maps gives small p.
        let map: Vec<f64> = (0..40).map(|_| rng.random::<f64>()).collect();
        let tau: Vec<f64> = map.iter().map(|m| m + 0.3 * rng.random::<f64>()).collect();
        assert_eq!(spearman_permutation_p(&map, &tau, &mut rng), 1.0 / 200.0);
    }
}

#[test]
fn link_command_summarises_an_energy_matrix() {
    use crate::util::{hierax, repo_root, run};
    let dir = tempfile::tempdir().unwrap();
    let root = repo_root();
    let e = dir.path().join("energy");
    let o = run(hierax()
        .arg("energy")
        .arg(root.join("demo-data/sub-02/sub-02_connectome.csv"))
        .arg("--map")
        .arg(root.join("demo-data/atlas/hierarchy.csv"))
        .args(["--bins", "4", "--out"])
        .arg(&e));
    assert!(o.status.success());
    let l = dir.path().join("link");
    let o = run(hierax().arg("link").arg("--energy").arg(e.join("energy_matrix.csv")).arg("--out").arg(&l));
    assert!(o.status.success());
    // Bottom-up mean by hand from the matrix: the 6 entries above the diagonal of a 4 x 4 matrix.
    let m = hierax::export::energy::read_state_matrix(&hierax::io::InputSpec::new(
        e.join("energy_matrix.csv"),
        None,
    ))
    .unwrap();
    assert_eq!(m.dim(), (4, 4));
    let bu: f64 =
        (0..4).flat_map(|i| ((i + 1)..4).map(move |j| (i, j))).map(|(i, j)| m[[i, j]]).sum::<f64>() / 6.0;
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(l.join("link.json")).unwrap()).unwrap();
    let got = v["summary"]["mean_bottom_up_energy"].as_f64().unwrap();
    assert!((got - bu).abs() <= 1e-12 * bu, "{got} vs {bu}");
    let pairs = std::fs::read_to_string(l.join("pairs.csv")).unwrap();
    assert_eq!(pairs.lines().count(), 17);
}
