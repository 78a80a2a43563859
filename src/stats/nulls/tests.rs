use super::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

fn random_network(n: usize, p: f64, directed: bool, seed: u64) -> Array2<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut w = Array2::zeros((n, n));
    for a in 0..n {
        for b in 0..n {
            if a == b || (!directed && b < a) {
                continue;
            }
            if rng.random_bool(p) {
                let v: f64 = rng.random_range(0.1..5.0);
                w[[a, b]] = v;
                if !directed {
                    w[[b, a]] = v;
                }
            }
        }
    }
    w
}

/// Like [`random_network`], with hub structure: w_ab = f_a · f_b · U(0.5, 1.5), f spread over a
/// factor of about 40, so strengths differ widely and a uniform permutation of weights destroys them.
fn hub_network(n: usize, p: f64, directed: bool, seed: u64) -> Array2<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0xabc);
    let f: Vec<f64> = (0..n).map(|_| rng.random_range(0.3f64..2.0).powi(2)).collect();
    let mut w = random_network(n, p, directed, seed);
    for ((a, b), v) in w.indexed_iter_mut() {
        if *v > 0.0 && (directed || a < b) {
            *v = f[a] * f[b] * rng.random_range(0.5..1.5);
        }
    }
    if !directed {
        for a in 0..n {
            for b in 0..a {
                w[[a, b]] = w[[b, a]];
            }
        }
    }
    w
}

fn out_degrees(w: &Array2<f64>) -> Vec<usize> {
    w.rows().into_iter().map(|r| r.iter().filter(|v| **v > 0.0).count()).collect()
}

fn in_degrees(w: &Array2<f64>) -> Vec<usize> {
    w.columns().into_iter().map(|c| c.iter().filter(|v| **v > 0.0).count()).collect()
}

fn sorted_weights(w: &Array2<f64>) -> Vec<f64> {
    let mut v: Vec<f64> = w.iter().copied().filter(|v| *v > 0.0).collect();
    v.sort_by(f64::total_cmp);
    v
}

fn line_distances(n: usize) -> Array2<f64> {
    Array2::from_shape_fn((n, n), |(i, j)| (i as f64 - j as f64).abs())
}

fn run(
    model: NullModel,
    w: &Array2<f64>,
    d: Option<&Array2<f64>>,
    directed: bool,
    seed: u64,
) -> (Array2<f64>, RewireInfo) {
    let net = Network::new(w.view(), d.map(|d| d.view()), directed).unwrap();
    rewire(model, &net, &NullParams::default(), &mut ChaCha8Rng::seed_from_u64(seed)).unwrap()
}

#[test]
fn swaps_keep_degrees_and_weights_exactly_over_seeds() {
    let w = random_network(40, 0.2, false, 7);
    for seed in 0..5 {
        let (null, info) = run(NullModel::named("degree-swap"), &w, None, false, seed);
        assert_eq!(out_degrees(&null), out_degrees(&w));
        assert_eq!(sorted_weights(&null), sorted_weights(&w));
        assert!(info.swaps_accepted.unwrap() > info.swaps_attempted.unwrap() / 4, "{info:?}");
        assert!(info.edges_changed > 0.9, "{info:?}");
        assert_eq!(null, null.t());
        assert!((0..40).all(|i| null[[i, i]] == 0.0));
    }
}

#[test]
fn directed_swaps_keep_in_and_out_degrees_and_out_strengths_and_never_symmetrise() {
    let w = random_network(40, 0.15, true, 8);
    let (out_s, _) = edges::strengths(w.view());
    for seed in 0..5 {
        let (null, info) = run(NullModel::named("degree-swap"), &w, None, true, seed);
        assert_eq!(out_degrees(&null), out_degrees(&w));
        assert_eq!(in_degrees(&null), in_degrees(&w));
        assert_eq!(sorted_weights(&null), sorted_weights(&w));
        // Each weight stays with its source region, so out-strengths are kept (to rounding of the sums).
        let (null_out, _) = edges::strengths(null.view());
        for (a, b) in out_s.iter().zip(&null_out) {
            assert!((a - b).abs() <= 1e-12 * a.max(1.0), "{a} vs {b}");
        }
        assert!(info.edges_changed > 0.9, "{info:?}");
        assert_ne!(null, null.t(), "a directed null must stay directed");
        // No edge is mirrored into existence: the null has exactly as many ordered edges.
        assert_eq!(null.iter().filter(|v| **v > 0.0).count(), w.iter().filter(|v| **v > 0.0).count());
    }
}

#[test]
fn strength_matching_beats_plain_swaps_on_strength_error_undirected_and_directed() {
    for directed in [false, true] {
        let w = hub_network(60, 0.3, directed, 11);
        let (_, plain) = run(NullModel::named("degree-swap"), &w, None, directed, 1);
        let (null, kept) = run(NullModel::named("strength-swap"), &w, None, directed, 1);
        assert_eq!(out_degrees(&null), out_degrees(&w));
        assert_eq!(in_degrees(&null), in_degrees(&w));
        assert_eq!(sorted_weights(&null), sorted_weights(&w));
        assert!(
            kept.strength_error < 0.5 * plain.strength_error,
            "directed {directed}: {kept:?} vs {plain:?}"
        );
    }
}

#[test]
fn geometry_swaps_keep_the_length_distribution() {
    let n = 50;
    let d = line_distances(n);
    // Distance-dependent wiring: nearby nodes connect more.
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let mut w = Array2::zeros((n, n));
    for a in 0..n {
        for b in (a + 1)..n {
            if rng.random_bool((-d[[a, b]] / 8.0).exp()) {
                w[[a, b]] = 1.0;
                w[[b, a]] = 1.0;
            }
        }
    }
    let (geo, info) = run(NullModel::named("geometry-swap"), &w, Some(&d), false, 4);
    let (plain, _) = run(NullModel::named("degree-swap"), &w, None, false, 4);
    assert_eq!(out_degrees(&geo), out_degrees(&w));
    let lengths = |m: &Array2<f64>| {
        let mut v: Vec<f64> = edges_of(m.view(), false).iter().map(|e| d[[e.a, e.b]]).collect();
        v.sort_by(f64::total_cmp);
        v
    };
    let ks_geo = info.length_ks_distance.unwrap();
    let ks_plain = ks_distance_sorted(&lengths(&w), &lengths(&plain));
    // With 10 equal-count bins the CDF can move by at most one bin's share (0.1) plus the share of
    // lengths tied at a cut; plain swaps lose the distance dependence.
    assert!(ks_geo <= 0.15, "KS {ks_geo}");
    assert!(ks_plain > 2.0 * ks_geo, "plain {ks_plain} vs geometry {ks_geo}");
    assert!(info.swaps_accepted.unwrap() > 0);
}

#[test]
fn weight_permutation_keeps_topology_and_moves_weights_of_a_complete_graph() {
    let n = 30;
    let w = hub_network(n, 1.0, false, 5);
    let (null, info) = run(NullModel::named("weight-permutation"), &w, None, false, 2);
    assert_eq!(null.mapv(|v| v > 0.0), w.mapv(|v| v > 0.0), "topology kept");
    assert_eq!(sorted_weights(&null), sorted_weights(&w), "a permutation of the weights");
    assert_eq!(null, null.t());
    assert!(info.edges_changed > 0.9, "{info:?}");
    assert_eq!(info.swaps_attempted, None);
    // Strength matching keeps strengths far better than a uniform permutation of the same weights.
    let mut rng = ChaCha8Rng::seed_from_u64(9);
    let mut edges = edges_of(w.view(), false);
    let mut ws: Vec<f64> = edges.iter().map(|e| e.w).collect();
    rand::seq::SliceRandom::shuffle(ws.as_mut_slice(), &mut rng);
    for (e, v) in edges.iter_mut().zip(ws) {
        e.w = v;
    }
    let uniform = to_matrix(w.view(), &edges, false);
    let err_uniform = strength_error(&strengths(w.view()), &strengths(uniform.view()));
    assert!(info.strength_error < 0.25 * err_uniform, "{} vs uniform {err_uniform}", info.strength_error);
}

#[test]
fn length_bin_shuffle_keeps_topology_and_each_bins_weights() {
    let n = 30;
    let d = line_distances(n);
    let w = random_network(n, 1.0, false, 6);
    let (null, info) = run(NullModel::named("length-bin-shuffle"), &w, Some(&d), false, 3);
    assert_eq!(null.mapv(|v| v > 0.0), w.mapv(|v| v > 0.0));
    assert!(info.edges_changed > 0.8, "{info:?}");
    // The multiset of weights within each length bin is unchanged.
    let edges = edges_of(w.view(), false);
    let mut sorted: Vec<f64> = edges.iter().map(|e| d[[e.a, e.b]]).collect();
    sorted.sort_by(f64::total_cmp);
    let bins = LengthBins::new(&sorted, 10);
    for bin in 0..10 {
        let pick = |m: &Array2<f64>| {
            let mut v: Vec<f64> =
                edges.iter().filter(|e| bins.of(d[[e.a, e.b]]) == bin).map(|e| m[[e.a, e.b]]).collect();
            v.sort_by(f64::total_cmp);
            v
        };
        assert_eq!(pick(&null), pick(&w), "bin {bin}");
    }
    // On a network with hubs, strengths are kept far better than by a uniform shuffle within the
    // same bins.
    let wh = hub_network(n, 1.0, false, 6);
    let (_, kept) = run(NullModel::named("length-bin-shuffle"), &wh, Some(&d), false, 3);
    let mut uniform = edges_of(wh.view(), false);
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    for bin in 0..10 {
        let idx: Vec<usize> =
            (0..uniform.len()).filter(|&k| bins.of(d[[uniform[k].a, uniform[k].b]]) == bin).collect();
        let mut ws: Vec<f64> = idx.iter().map(|&k| uniform[k].w).collect();
        rand::seq::SliceRandom::shuffle(ws.as_mut_slice(), &mut rng);
        for (&k, v) in idx.iter().zip(ws) {
            uniform[k].w = v;
        }
    }
    let u = to_matrix(wh.view(), &uniform, false);
    let err_uniform = strength_error(&strengths(wh.view()), &strengths(u.view()));
    assert!(kept.strength_error < 0.5 * err_uniform, "{} vs uniform {err_uniform}", kept.strength_error);
}

#[test]
fn the_diagonal_is_carried_over_and_never_rewired() {
    let mut w = random_network(20, 0.3, false, 12);
    w[[3, 3]] = 7.0;
    let (null, _) = run(NullModel::named("degree-swap"), &w, None, false, 1);
    assert_eq!(null[[3, 3]], 7.0);
}

fn refusal(model: NullModel, w: &Array2<f64>, directed: bool) -> String {
    let d = line_distances(w.nrows());
    let net = Network::new(w.view(), Some(d.view()), directed).unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let infos: Vec<RewireInfo> =
        (0..5).map(|_| rewire(model, &net, &NullParams::default(), &mut rng).unwrap().1).collect();
    assert_eq!(infos.iter().map(|i| i.edges_changed).sum::<f64>(), 0.0, "{model:?}: {infos:?}");
    assert!(infos.iter().all(|i| i.swaps_accepted.unwrap_or(0) == 0));
    match assess(model, &net, &infos) {
        Err(StatsError::CannotRandomise { model: m, reason }) => {
            assert_eq!(m, model.label());
            reason
        }
        other => panic!("{model:?}: expected a refusal, got {other:?}"),
    }
}

#[test]
fn every_model_refuses_a_complete_graph_of_equal_weights_and_says_why() {
    // The degenerate case: 12 regions, every pair connected with weight 1.
    let n = 12;
    let w = Array2::from_shape_fn((n, n), |(i, j)| if i == j { 0.0 } else { 1.0 });
    for model in [
        NullModel::named("degree-swap"),
        NullModel::named("strength-swap"),
        NullModel::named("geometry-swap"),
    ] {
        let r = refusal(model, &w, false);
        // Five rewirings of 10 attempts per edge: 3,300 attempts pooled.
        assert!(
            r.starts_with(
                "the connectome is 100 % dense (66 edges over 12 regions): 0 of 3300 swaps (0.00 %)"
            ),
            "{r}"
        );
        assert!(r.contains("use the weight-permutation or length-bin-shuffle null model"), "{r}");
    }
    for model in [NullModel::named("weight-permutation"), NullModel::named("length-bin-shuffle")] {
        let r = refusal(model, &w, false);
        assert!(r.starts_with("all 66 edge weights are equal, so reassigning them changes nothing"), "{r}");
    }
    // The same, directed: 132 ordered edges.
    let r = refusal(NullModel::named("degree-swap"), &w, true);
    assert!(r.starts_with("the connectome is 100 % dense (132 edges over 12 regions)"), "{r}");
}

#[test]
fn a_dense_weighted_graph_is_refused_by_swaps_and_randomised_by_weight_models() {
    let w = random_network(20, 1.0, false, 13);
    let d = line_distances(20);
    let net = Network::new(w.view(), Some(d.view()), false).unwrap();
    assert_eq!(net.density(), 1.0);
    let mut rng = ChaCha8Rng::seed_from_u64(2);
    for model in NullModel::ALL {
        let infos: Vec<RewireInfo> =
            (0..5).map(|_| rewire(model, &net, &NullParams::default(), &mut rng).unwrap().1).collect();
        let verdict = assess(model, &net, &infos);
        if model.swaps_edges() {
            assert!(matches!(verdict, Err(StatsError::CannotRandomise { .. })), "{model:?}: {verdict:?}");
        } else {
            let e = verdict.unwrap();
            assert!(e.edges_changed > 0.9 && e.accepted_share.is_none(), "{model:?}: {e:?}");
        }
    }
}

#[test]
fn sparse_networks_pass_the_assessment_with_their_accepted_share() {
    let w = random_network(40, 0.2, false, 7);
    let net = Network::new(w.view(), None, false).unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(4);
    let infos: Vec<RewireInfo> = (0..4)
        .map(|_| rewire(NullModel::named("degree-swap"), &net, &NullParams::default(), &mut rng).unwrap().1)
        .collect();
    let e = assess(NullModel::named("degree-swap"), &net, &infos).unwrap();
    let share = e.accepted_share.unwrap();
    // Expected acceptance of a random swap is about (1 - density)^2 minus collisions (0.64 at 0.2).
    assert!(share > 0.4 && share < 0.8, "{e:?}");
    assert!((e.density - net.n_edges() as f64 / 780.0).abs() < 1e-15);
}

#[test]
fn models_needing_distances_say_so() {
    let w = random_network(10, 0.5, false, 1);
    let net = Network::new(w.view(), None, false).unwrap();
    let e = rewire(
        NullModel::named("length-bin-shuffle"),
        &net,
        &NullParams::default(),
        &mut ChaCha8Rng::seed_from_u64(1),
    );
    assert_eq!(e.unwrap_err().to_string(), "length-bin-shuffle needs a distance matrix");
}

#[test]
fn bad_networks_are_refused() {
    let mut w = random_network(10, 0.5, false, 1);
    w[[0, 1]] = -1.0;
    assert!(Network::new(w.view(), None, false).is_err());
    let one =
        Array2::from_shape_fn((3, 3), |(i, j)| if (i, j) == (0, 1) || (i, j) == (1, 0) { 1.0 } else { 0.0 });
    assert!(matches!(Network::new(one.view(), None, false), Err(StatsError::TooFew { found: 1, .. })));
}

#[test]
fn labels_are_the_command_line_spellings() {
    for m in NullModel::ALL {
        let json = serde_json::to_value(m).unwrap();
        assert_eq!(json, m.label());
        #[cfg(feature = "cli")]
        assert_eq!(clap::ValueEnum::to_possible_value(&m).unwrap().get_name(), m.label());
    }
}

#[test]
fn ks_distance_of_shifted_samples() {
    // sup|F1 - F2| for {1,2,3,4} vs {3,4,5,6} is 0.5 (hand computation).
    assert_eq!(ks_distance_sorted(&[1., 2., 3., 4.], &[3., 4., 5., 6.]), 0.5);
    assert_eq!(ks_distance_sorted(&[1., 2.], &[1., 2.]), 0.0);
}
