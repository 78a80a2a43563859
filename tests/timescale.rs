//! `timescale` module and `hierax timescales`: checks against outside
//! references (statsmodels 0.14.4, scipy 1.14.1 fixtures; AR(1) closed forms;
//! Marriott & Pope 1954) and the command's behaviour on bad input.

use crate::util::{data, files_below, hierax, run, write};
use hierax::timescale::estimators::{fit_exp_decay, fit_spectral_knee};
use hierax::timescale::{
    autocorrelation, estimate_timescales, welch_density, BiasCorrection, Estimator, FitLags, RegionStatus,
    TimescaleParams,
};
use ndarray::Array2;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde_json::Value;

fn fixtures() -> Value {
    let text = std::fs::read_to_string(data("timescale/fixtures.json")).expect("fixture present");
    serde_json::from_str(&text).expect("fixture is JSON")
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(|x| x.as_f64().expect("number")).collect()
}

#[test]
fn acf_equals_statsmodels_acf_adjusted_false() {
    // Reference: statsmodels 0.14.4 tsa.stattools.acf(x, nlags, adjusted=False, fft=False).
    // Tolerance 1e-10 absolute (ACF values lie in [-1, 1]); the FFT route
    // differs from the direct sum by round-off of order 1e-15.
    let fx = fixtures();
    for case in fx["acf"].as_array().unwrap() {
        let x = floats(&case["x"]);
        let l = case["max_lag"].as_u64().unwrap() as usize;
        let want = floats(&case["acf"]);
        let got = autocorrelation(&x, l).unwrap();
        assert_eq!(got.len(), want.len());
        for (k, (g, w)) in got.iter().zip(&want).enumerate() {
            assert!((g - w).abs() < 1e-10, "{} lag {k}: {g} vs {w}", case["name"]);
        }
    }
}

#[test]
fn welch_equals_scipy_signal_welch() {
    // Reference: scipy 1.14.1 signal.welch(window="hann", nperseg=L,
    // noverlap=L//2, detrend="constant", scaling="density"). Relative 1e-10.
    let fx = fixtures();
    for case in fx["welch"].as_array().unwrap() {
        let x = floats(&case["x"]);
        let tr = case["tr_s"].as_f64().unwrap();
        let seg = case["segment"].as_u64().unwrap() as usize;
        let (f, p) = welch_density(&x, tr, seg).unwrap();
        let (wf, wp) = (floats(&case["freq_hz"]), floats(&case["density"]));
        assert_eq!(p.len(), wp.len());
        for j in 0..p.len() {
            assert!((f[j] - wf[j]).abs() <= 1e-12 * wf[j].abs().max(1e-12));
            assert!(
                (p[j] - wp[j]).abs() <= 1e-10 * wp[j].abs(),
                "{} bin {j}: {} vs {}",
                case["name"],
                p[j],
                wp[j]
            );
        }
    }
}

#[test]
fn exp_fit_agrees_with_scipy_curve_fit() {
    // Reference: scipy 1.14.1 optimize.curve_fit(method="lm") of
    // a*(exp(-k TR/tau)+b) on the same ACF, lags and start. Both minimise the
    // same smooth sum of squares from the same start; relative 1e-6 on the
    // parameters leaves room for the different stopping rules of MINPACK and
    // our LM (each converged to ~1e-12 in cost).
    let fx = fixtures();
    for case in fx["exp_fit"].as_array().unwrap() {
        let acf = floats(&case["acf"]);
        let tr = case["tr_s"].as_f64().unwrap();
        let first = case["first"].as_u64().unwrap() as usize;
        let last = case["last"].as_u64().unwrap() as usize;
        let fit = fit_exp_decay(&acf, tr, FitLags::Range { first, last }, case["tau0_s"].as_f64().unwrap())
            .unwrap();
        for (got, key) in [(fit.tau_s, "tau_s"), (fit.amplitude, "amplitude")] {
            let want = case[key].as_f64().unwrap();
            assert!((got - want).abs() <= 1e-6 * want.abs(), "{} {key}: {got} vs {want}", case["name"]);
        }
        let want_b = case["offset"].as_f64().unwrap();
        assert!((fit.offset - want_b).abs() <= 1e-6 * (want_b.abs() + 1.0), "{}: {fit:?}", case["name"]);
    }
}

#[test]
fn knee_fit_agrees_with_scipy_curve_fit() {
    // Reference: scipy 1.14.1 optimize.curve_fit(method="lm") of
    // b - log10(k + f^chi) on log10 of the scipy Welch density at f > 0, from
    // the start hierax documents. Relative 1e-5 on k and chi (the knee
    // problem is less well conditioned than the exponential: k and chi trade
    // off along a shallow valley), and on tau derived from them.
    let fx = fixtures();
    for case in fx["knee_fit"].as_array().unwrap() {
        let f = floats(&case["freq_hz"]);
        let p = floats(&case["density"]);
        let fit = fit_spectral_knee(&f, &p, (0.0, f64::INFINITY)).unwrap();
        for (got, key) in
            [(fit.knee, "knee"), (fit.exponent, "exponent"), (fit.tau_s, "tau_s"), (fit.offset, "offset")]
        {
            let want = case[key].as_f64().unwrap();
            assert!((got - want).abs() <= 1e-5 * want.abs(), "{} {key}: {got} vs {want}", case["name"]);
        }
    }
}

fn ar1(n: usize, phi: f64, rng: &mut ChaCha8Rng) -> Vec<f64> {
    let mut x = vec![0.0; n];
    // Start from the stationary distribution, so no burn-in is needed.
    let sd0 = 1.0 / (1.0 - phi * phi).sqrt();
    let z: f64 = StandardNormal.sample(rng);
    x[0] = sd0 * z;
    for t in 1..n {
        let e: f64 = StandardNormal.sample(rng);
        x[t] = phi * x[t - 1] + e;
    }
    x
}

/// Expected sample ACF of AR(1) with unknown mean to first order in 1/n:
/// E[r_k] ~ phi^k - [(1+phi)(1-phi^k)/(1-phi) + 2k phi^k]/n (the general-lag
/// form of the Marriott & Pope 1954 / Kendall 1954 result, from memory; at
/// k = 1 it is the cited -(1+3 phi)/n).
fn expected_acf(phi: f64, n: usize, l: usize) -> Vec<f64> {
    (0..=l)
        .map(|k| {
            let pk = phi.powi(k as i32);
            if k == 0 {
                1.0
            } else {
                pk - ((1.0 + phi) * (1.0 - pk) / (1.0 - phi) + 2.0 * k as f64 * pk) / n as f64
            }
        })
        .collect()
}

#[test]
fn ar1_simulations_land_where_theory_says() {
    // AR(1) with phi = 0.8 sampled at TR 0.72 s (a common multiband
    // resting-state TR, no source): analytic ACF phi^k, tau = -TR/ln phi.
    // 400 seeded series of 1200 frames (a common resting-state run length).
    let (phi, n, tr, sims) = (0.8f64, 1200usize, 0.72, 400usize);
    let l = 60;
    let mut rng = ChaCha8Rng::seed_from_u64(20240613);
    let mut data = Array2::<f64>::zeros((n, sims));
    for j in 0..sims {
        let x = ar1(n, phi, &mut rng);
        data.column_mut(j).assign(&ndarray::Array1::from(x));
    }
    let names: Vec<String> = (0..sims).map(|j| format!("s{j}")).collect();
    let mut p = TimescaleParams::new(tr);
    p.estimators = vec![
        Estimator::named("acw50"),
        Estimator::named("exp-fit"),
        Estimator::named("initial-positive-sum"),
    ];
    p.max_lag = Some(l);
    p.fit_lags = FitLags::Range { first: 1, last: 10 };
    p.bias_correction = BiasCorrection::Ar1;
    let v = p.check(n).unwrap();
    let res = estimate_timescales(data.view(), &names, None, &[], &v).unwrap();
    let stat = |g: &dyn Fn(&hierax::timescale::RegionResult) -> f64| {
        let xs: Vec<f64> = res.regions.iter().map(g).collect();
        assert!(xs.iter().all(|x| x.is_finite()));
        let m = xs.iter().sum::<f64>() / xs.len() as f64;
        let sd = (xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64).sqrt();
        (m, sd / (xs.len() as f64).sqrt())
    };
    let tau = -tr / phi.ln();

    // Lag 1: Marriott & Pope (1954) E[r1] ~ phi - (1+3 phi)/n. 3 Monte Carlo SEs.
    let (m1, se1) = stat(&|r| r.estimates.lag1);
    let mp = phi - (1.0 + 3.0 * phi) / n as f64;
    eprintln!("r1: mean {m1:.5} (se {se1:.5}), Marriott-Pope {mp:.5}, phi {phi}");
    assert!((m1 - mp).abs() < 3.0 * se1, "r1 mean {m1} vs Marriott-Pope {mp} (se {se1})");
    // The bias is real: the uncorrected mean sits below phi by more than 3 SE.
    assert!(phi - m1 > 3.0 * se1);

    // AR(1) tau after the Marriott-Pope correction is unbiased to O(1/n^2);
    // the uncorrected one is biased low (second-order terms make the
    // corrected mean land within 3 SE + 0.5 % of tau).
    let (mc, sec) = stat(&|r| r.estimates.ar1_tau_corrected_s);
    eprintln!("ar1 tau corrected: mean {mc:.5} (se {sec:.5}), tau {tau:.5}");
    assert!((mc - tau).abs() < 3.0 * sec + 0.005 * tau, "corrected tau {mc} vs {tau}");
    let (mu, _) = stat(&|r| r.estimates.ar1_tau_s);
    assert!(mu < mc);

    // ACF-threshold and fitted estimators against the plug-in of the
    // first-order expected ACF: each statistic is a smooth function of the ACF,
    // so its mean equals the function of the expected ACF up to O(1/n) terms
    // from the ACF's variance. Tolerance: 3 Monte Carlo SEs + 25 % of the
    // finite-sample bias shift (the size of what the first-order theory can
    // promise), stated per estimator below.
    let true_acf: Vec<f64> = (0..=l).map(|k| phi.powi(k as i32)).collect();
    let exp_acf = expected_acf(phi, n, l);
    let acw = |a: &[f64]| hierax::timescale::estimators::autocorrelation_window(a, 0.5, tr).unwrap().1;
    let expfit = |a: &[f64]| fit_exp_decay(a, tr, FitLags::Range { first: 1, last: 10 }, 3.0).unwrap().tau_s;
    for (label, theory, truth, (m, se)) in [
        ("acw50_interp", acw(&exp_acf), acw(&true_acf), stat(&|r| r.estimates.raw_value("acw50_interp_s"))),
        ("exp_tau", expfit(&exp_acf), expfit(&true_acf), stat(&|r| r.estimates.raw_value("exp_tau_s"))),
    ] {
        let tol = 3.0 * se + 0.25 * (theory - truth).abs();
        eprintln!("{label}: mean {m:.5} (se {se:.5}), first-order theory {theory:.5}, infinite-n {truth:.5}");
        assert!((m - theory).abs() < tol, "{label}: mean {m} vs theory {theory} (truth {truth}, tol {tol})");
        // And where theory predicts a bias clearly larger than the Monte Carlo
        // error, the simulations show it in the same direction (ACW-50: the
        // biased ACF crosses 0.5 earlier, a shift of ~3.6 SE here). For the
        // exponential fit the offset b absorbs most of the level shift, the
        // predicted bias (~0.7 %) is below the Monte Carlo error of 400
        // series, and only the 3-SE agreement above is tested.
        if (theory - truth).abs() > 3.0 * se {
            assert_eq!((m - truth).signum(), (theory - truth).signum(), "{label}: mean {m}, truth {truth}");
        }
    }
    // Exponential fit on phi^k is exact: truth = tau.
    assert!((expfit(&true_acf) - tau).abs() < 1e-8);
}

#[test]
fn censored_and_degenerate_regions_get_their_status() {
    let n = 200;
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let mut data = Array2::<f64>::zeros((n, 4));
    data.column_mut(0).assign(&ndarray::Array1::from(ar1(n, 0.5, &mut rng)));
    data.column_mut(1).fill(4.2);
    data.column_mut(2).assign(&ndarray::Array1::from(ar1(n, 0.5, &mut rng)));
    data[[17, 2]] = f64::NAN;
    data.column_mut(3).assign(&ndarray::Array1::from(ar1(n, 0.5, &mut rng)));
    // Frame 50 is NaN everywhere but censored, so it is ignored.
    data.row_mut(50).fill(f64::NAN);
    let mut valid = vec![true; n];
    valid[50] = false;
    let names: Vec<String> = ["a", "b", "c", "d"].iter().map(|s| s.to_string()).collect();
    let mut p = TimescaleParams::new(2.0);
    p.max_lag = Some(20);
    let v = p.check(n).unwrap();
    let res = estimate_timescales(data.view(), &names, Some(&valid), &[], &v).unwrap();
    let st: Vec<RegionStatus> = res.regions.iter().map(|r| r.status).collect();
    assert_eq!(
        st,
        vec![RegionStatus::Ok, RegionStatus::ConstantSignal, RegionStatus::NonFinite, RegionStatus::Ok]
    );
    assert_eq!(res.regions[0].n_valid_frames, 199);
    // A NaN cell always has a non-ok status in its row.
    let t = res.to_table();
    let status = match t.column("status").unwrap() {
        hierax::io::table::Column::Str(s) => s.clone(),
        _ => unreachable!(),
    };
    for name in t.names() {
        if let Some(hierax::io::table::Column::F64(vals)) = t.column(name) {
            for (i, v) in vals.iter().enumerate() {
                assert!(v.is_finite() || status[i] != "ok", "row {i} column {name} is NaN with status ok");
            }
        }
    }
    // An uncensored all-NaN frame stops the subject with a clear error.
    let e = estimate_timescales(data.view(), &names, None, &[], &v).unwrap_err().to_string();
    assert!(e.contains("frame 51"), "{e}");
}

fn ar_csv(dir: &std::path::Path, n: usize, regions: usize) -> std::path::PathBuf {
    let mut rng = ChaCha8Rng::seed_from_u64(9);
    let cols: Vec<Vec<f64>> = (0..regions).map(|_| ar1(n, 0.7, &mut rng)).collect();
    let mut s = (1..=regions).map(|j| format!("r{j}")).collect::<Vec<_>>().join(",") + "\n";
    for t in 0..n {
        s += &cols.iter().map(|c| format!("{}", c[t])).collect::<Vec<_>>().join(",");
        s += "\n";
    }
    write(dir, "bold.csv", &s)
}

#[test]
fn cli_writes_table_and_provenance() {
    let dir = tempfile::tempdir().unwrap();
    let series = ar_csv(dir.path(), 300, 3);
    let mut fd = String::from("framewise_displacement\ttrans_x\n");
    for t in 0..300 {
        let d = if t == 0 {
            "n/a".to_string()
        } else if t % 50 == 0 {
            "0.9".into()
        } else {
            "0.1".into()
        };
        fd += &format!("{d}\t{}\n", (t as f64 * 0.1).sin());
    }
    let conf = write(dir.path(), "conf.tsv", &fd);
    let out = dir.path().join("out");
    let o = run(hierax()
        .args(["timescales"])
        .arg(&series)
        .args(["--tr", "2.0", "--max-lag", "30", "--detrend", "1", "--confound-columns", "trans_x"])
        .arg("--confounds")
        .arg(&conf)
        .args(["--fd-threshold", "0.5", "--censor-after", "1", "--bootstrap", "20", "--seed", "1"])
        .arg("--out")
        .arg(&out));
    assert!(o.status.success());
    let csv = std::fs::read_to_string(out.join("timescales.csv")).unwrap();
    let header = csv.lines().next().unwrap();
    for col in [
        "region",
        "status",
        "n_valid_frames",
        "ips_tau_s",
        "acw50_interp_s",
        "acw0_s",
        "exp_tau_s",
        "knee_tau_s",
        "acw0_se_s",
    ] {
        assert!(header.split(',').any(|h| h == col), "missing {col} in {header}");
    }
    assert_eq!(csv.lines().count(), 4);
    // 5 spikes (t = 50..250), each censoring itself and the next frame.
    assert!(csv.lines().nth(1).unwrap().contains(",290,"), "{csv}");
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("timescales.json")).unwrap()).unwrap();
    assert_eq!(json["provenance"]["parameters"]["censoring"]["threshold_mm"], 0.5);
    assert_eq!(json["provenance"]["inputs"].as_array().unwrap().len(), 2);
    assert_eq!(json["summary"]["n_valid_frames"], 290);
}

fn assert_fails(args: &[&str], series: Option<&std::path::Path>, needle: &str) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let mut cmd = hierax();
    cmd.arg("timescales");
    if let Some(s) = series {
        cmd.arg(s);
    }
    cmd.args(args).arg("--out").arg(&out);
    let o = run(&mut cmd);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8(o.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains(needle), "expected `{needle}` in: {err}");
    assert!(files_below(dir.path()).is_empty(), "left {:?}", files_below(dir.path()));
}

#[test]
fn cli_bad_input_is_one_line_exit_2_and_no_output() {
    let dir = tempfile::tempdir().unwrap();
    let series = ar_csv(dir.path(), 100, 3);
    // TR missing or non-positive.
    assert_fails(&["--tr", "0"], Some(&series), "--tr 0: expected");
    assert_fails(&["--tr", "-2"], Some(&series), "--tr -2: expected");
    // Series shorter than the lag bound.
    assert_fails(&["--tr", "2", "--max-lag", "100"], Some(&series), "more frames than the lag bound");
    // Mask length mismatch.
    let mask = write(dir.path(), "mask.txt", &"1\n".repeat(99));
    assert_fails(
        &["--tr", "2", "--censor-mask", mask.to_str().unwrap()],
        Some(&series),
        "expected 100 frames, found 99",
    );
    // Wrong orientation: region-by-time declared for a file whose header names regions
    // leaves 3 "frames", fewer than the lag bound.
    assert_fails(
        &["--tr", "2", "--orientation", "region-by-time", "--max-lag", "10"],
        Some(&series),
        "lag bound",
    );
    // Unlabelled square-ish matrix with no way to tell its orientation.
    let bare = write(dir.path(), "bare.txt", "1 2 3\n4 5 6\n");
    assert_fails(&["--tr", "2"], Some(&bare), "pass --orientation");
    // A NaN frame that is not censored.
    let mut s = std::fs::read_to_string(&series).unwrap();
    let lines: Vec<&str> = s.lines().collect();
    let mut new = lines[..5].join("\n") + "\nNaN,NaN,NaN\n";
    new += &lines[6..].join("\n");
    s = new + "\n";
    let nanf = write(dir.path(), "nan.csv", &s);
    assert_fails(&["--tr", "2"], Some(&nanf), "frame 5 (1-based) is non-finite in every region");
    // Every region constant: nothing to estimate, nothing written.
    let flat = write(dir.path(), "flat.csv", &("a,b\n".to_string() + &"1,2\n".repeat(50)));
    assert_fails(&["--tr", "2"], Some(&flat), "no region could be estimated");
}

#[test]
fn cli_help_has_a_worked_example() {
    let o = run(hierax().args(["timescales", "--help"]));
    assert!(o.status.success());
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(text.contains("hierax timescales demo-data/sub-01/sub-01_bold.npy --tr 2"), "{text}");
}

#[test]
fn block_bootstrap_se_matches_the_spread_over_simulations() {
    // Truth by simulation: the standard deviation of the AR(1) timescale and
    // of ACW-50 over 400 independent seeded AR(1) series (phi = 0.8, 1200
    // frames, TR 0.72 s, common practice, no source) versus the mean
    // moving-block bootstrap SE (Kunsch 1989) of 40 of them (200 replicates,
    // default block 1200/10 = 120 frames). Tolerance, fixed before looking:
    // the ratio lies in [0.75, 1.25] (the SD over 400 series is known to
    // ~3.5 %). Measured: 0.83 (ACW-50) and 0.90 (AR(1) tau); with
    // ceil(sqrt(n)) = 35-frame blocks it was 0.75 and 0.83, which is why the
    // default block is n/10. The bootstrap is biased low: block joins
    // decorrelate the pairs that straddle them.
    let (phi, n, tr) = (0.8f64, 1200usize, 0.72);
    let mut rng = ChaCha8Rng::seed_from_u64(77);
    let sims = 400;
    let mut data = Array2::<f64>::zeros((n, sims));
    for j in 0..sims {
        data.column_mut(j).assign(&ndarray::Array1::from(ar1(n, phi, &mut rng)));
    }
    let names: Vec<String> = (0..sims).map(|j| format!("s{j}")).collect();
    let mut p = TimescaleParams::new(tr);
    p.estimators = vec![Estimator::named("acw50")];
    p.max_lag = Some(60);
    p.bias_correction = BiasCorrection::Ar1;
    let v = p.check(n).unwrap();
    let all = estimate_timescales(data.view(), &names, None, &[], &v).unwrap();
    let sd = |g: &dyn Fn(&hierax::timescale::RegionResult) -> f64| {
        let xs: Vec<f64> = all.regions.iter().map(g).collect();
        let m = xs.iter().sum::<f64>() / xs.len() as f64;
        (xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64).sqrt()
    };
    let sd_acw = sd(&|r| r.estimates.raw_value("acw50_interp_s"));
    let sd_ar1 = sd(&|r| r.estimates.ar1_tau_s);
    let mut pb = p.clone();
    pb.bootstrap = 200;
    pb.seed = 5;
    let vb = pb.check(n).unwrap();
    let sub = data.slice_axis(ndarray::Axis(1), ndarray::Slice::from(0..40));
    let boot = estimate_timescales(sub, &names[..40], None, &[], &vb).unwrap();
    // primary() order: acw50_s, acw50_interp_s, ar1_tau_s, ar1_tau_corrected_s.
    let mean_se = |i: usize| boot.regions.iter().map(|r| r.se[i]).sum::<f64>() / 40.0;
    let (se_acw, se_ar1) = (mean_se(1), mean_se(2));
    eprintln!("acw50_interp: bootstrap SE {se_acw:.4} vs simulation SD {sd_acw:.4}");
    eprintln!("ar1_tau: bootstrap SE {se_ar1:.4} vs simulation SD {sd_ar1:.4}");
    for (label, se, truth) in [("acw50_interp", se_acw, sd_acw), ("ar1_tau", se_ar1, sd_ar1)] {
        let ratio = se / truth;
        assert!((0.75..=1.25).contains(&ratio), "{label}: SE/SD = {ratio}");
    }
    // Same seed, same draws: the bootstrap is reproducible.
    let again = estimate_timescales(sub, &names[..40], None, &[], &vb).unwrap();
    assert_eq!(again.regions[3].se, boot.regions[3].se);
}

#[test]
fn min_frames_rule_marks_regions_and_cli_refuses_when_none_remain() {
    let n = 200;
    let mut rng = ChaCha8Rng::seed_from_u64(4);
    let mut data = Array2::<f64>::zeros((n, 2));
    for j in 0..2 {
        data.column_mut(j).assign(&ndarray::Array1::from(ar1(n, 0.5, &mut rng)));
    }
    let valid: Vec<bool> = (0..n).map(|t| t % 4 != 0).collect(); // 150 valid
    let names = vec!["a".to_string(), "b".to_string()];
    let mut p = TimescaleParams::new(2.0);
    p.max_lag = Some(20);
    p.min_frames = Some(151);
    let res = estimate_timescales(data.view(), &names, Some(&valid), &[], &p.check(n).unwrap()).unwrap();
    assert!(res.regions.iter().all(|r| r.status == RegionStatus::TooFewFrames && r.n_valid_frames == 150));
    p.min_frames = Some(150);
    let res = estimate_timescales(data.view(), &names, Some(&valid), &[], &p.check(n).unwrap()).unwrap();
    assert!(res.regions.iter().all(|r| r.status == RegionStatus::Ok));
}

#[test]
fn implausible_fits_are_flagged_and_never_reported() {
    // Planted absurd fits (issue 9): white noise (no decay to fit) and
    // anti-correlated AR(1) (phi = -0.6: an alternating ACF that a decaying
    // exponential can only match with a <= 0 or a tiny tau), against clean
    // AR(1) (phi = 0.8, whose ACF phi^k is the exponential model itself).
    // 240 frames at TR 2 s (the demo's protocol); five seeds, 40 regions each.
    let (n, tr, per) = (240usize, 2.0, 40usize);
    let bounds = hierax::timescale::TauBounds::new(tr, n);
    // Per group (white, anti-correlated, clean): exp fits ok, exp fits implausible.
    let mut exp_ok_n = [0usize; 3];
    let mut exp_implausible = [0usize; 3];
    for seed in [1u64, 2, 3, 4, 5] {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut data = Array2::<f64>::zeros((n, 3 * per));
        for j in 0..3 * per {
            let phi = [0.0, -0.6, 0.8][j / per];
            data.column_mut(j).assign(&ndarray::Array1::from(ar1(n, phi, &mut rng)));
        }
        let names: Vec<String> = (0..3 * per).map(|j| format!("r{j}")).collect();
        let mut p = TimescaleParams::new(tr);
        p.bias_correction = BiasCorrection::Ar1;
        let res = estimate_timescales(data.view(), &names, None, &[], &p.check(n).unwrap()).unwrap();
        let exp_tau = res.column_values("exp_tau_s").unwrap();
        let knee_tau = res.column_values("knee_tau_s").unwrap();
        let ar1_tau = res.column_values("ar1_tau_s").unwrap();
        for (j, r) in res.regions.iter().enumerate() {
            let e = &r.estimates;
            // The invariant: status ok <=> a reported, plausible value.
            let exp_ok = e.status_of(Estimator::named("exp-fit")) == hierax::timescale::EstimateStatus::Ok;
            let (tau, amplitude) = (e.raw_value("exp_tau_s"), e.raw_value("exp_amplitude"));
            if tau.is_finite() {
                assert_eq!(exp_ok, amplitude > 0.0 && bounds.contains(tau), "region {j}: {tau} {amplitude}");
            }
            assert_eq!(exp_ok, exp_tau[j].is_finite(), "region {j}");
            if exp_ok {
                assert!(exp_tau[j] >= tr / 10.0 && exp_tau[j] <= n as f64 * tr);
            }
            let knee_ok =
                e.status_of(Estimator::named("spectral-knee")) == hierax::timescale::EstimateStatus::Ok;
            let (tau, knee_hz) = (e.raw_value("knee_tau_s"), e.raw_value("knee_hz"));
            if tau.is_finite() {
                let inside =
                    knee_hz >= e.raw_value("knee_band_low_hz") && knee_hz <= e.raw_value("knee_band_high_hz");
                assert_eq!(knee_ok, inside && bounds.contains(tau), "region {j}: {tau} {knee_hz}");
            }
            assert_eq!(knee_ok, knee_tau[j].is_finite());
            assert_eq!(e.ar1_status == hierax::timescale::EstimateStatus::Ok, ar1_tau[j].is_finite());
            exp_ok_n[j / per] += exp_ok as usize;
            exp_implausible[j / per] += (e.status_of(Estimator::named("exp-fit"))
                == hierax::timescale::EstimateStatus::ImplausibleFit)
                as usize;
        }
    }
    eprintln!("exp fits ok per group (white, anti, AR(1)) {exp_ok_n:?}, implausible {exp_implausible:?}");
    // Measured (seeds 1-5): ok [29, 0, 200], implausible [83, 42, 0]. The
    // planted absurd fits are caught: an anti-correlated series never yields
    // an ok exponential timescale, and both planted kinds produce flagged
    // (converged but implausible) fits.
    assert_eq!(exp_ok_n[1], 0, "an anti-correlated series gave an ok exponential timescale");
    assert!(exp_implausible[0] > 0 && exp_implausible[1] > 0, "{exp_implausible:?}");
    // A clean AR(1) fit stays ok (every seed, every region).
    assert_eq!((exp_ok_n[2], exp_implausible[2]), (5 * per, 0));
}

#[test]
fn flags_count_only_the_estimators_in_use() {
    // Issue 9: a region whose initial positive sum is fine but whose knee fit
    // fails must not be flagged for a consumer of `ips_tau_s`.
    use hierax::timescale::{column_source, ColumnSource, EstimateStatus, TimescaleError};
    for (col, src) in [
        ("ips_tau_s", ColumnSource::Estimator(Estimator::named("initial-positive-sum"))),
        ("acw50_interp_s", ColumnSource::Estimator(Estimator::named("acw50"))),
        ("acw0_s", ColumnSource::Estimator(Estimator::named("acw0"))),
        ("exp_tau_s", ColumnSource::Estimator(Estimator::named("exp-fit"))),
        ("knee_tau_s", ColumnSource::Estimator(Estimator::named("spectral-knee"))),
        ("ar1_tau_corrected_s", ColumnSource::Ar1),
    ] {
        assert_eq!(column_source(col), Some(src), "{col}");
    }
    assert_eq!(column_source("exp_amplitude"), None);
    // The columns the per-subject job can link, and their estimators.
    use hierax::timescale::column_estimator;
    for (col, e) in [
        ("ips_tau_s", Estimator::named("initial-positive-sum")),
        ("acw50_s", Estimator::named("acw50")),
        ("acw50_interp_s", Estimator::named("acw50")),
        ("acw0_s", Estimator::named("acw0")),
        ("acw0_interp_s", Estimator::named("acw0")),
        ("exp_tau_s", Estimator::named("exp-fit")),
        ("knee_tau_s", Estimator::named("spectral-knee")),
    ] {
        assert_eq!(column_estimator(col), Some(e), "{col}");
    }
    for col in ["ar1_tau_s", "ar1_tau_corrected_s", "knee_hz", "tau"] {
        assert_eq!(column_estimator(col), None, "{col}");
    }

    // White noise and AR(1) at 240 frames (seed 11): the initial positive
    // sum almost never fails on them, the fits often do on white noise.
    let (n, tr) = (240usize, 2.0);
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let mut data = Array2::<f64>::zeros((n, 60));
    for j in 0..60 {
        let phi = if j < 30 { 0.0 } else { 0.7 };
        data.column_mut(j).assign(&ndarray::Array1::from(ar1(n, phi, &mut rng)));
    }
    data.column_mut(59).fill(1.0); // one constant region: flagged for every consumer
    let names: Vec<String> = (0..60).map(|j| format!("r{j}")).collect();
    let p = TimescaleParams::new(tr);
    let res = estimate_timescales(data.view(), &names, None, &[], &p.check(n).unwrap()).unwrap();
    let ips = ColumnSource::Estimator(Estimator::named("initial-positive-sum"));
    let knee = ColumnSource::Estimator(Estimator::named("spectral-knee"));
    // Naive count, straight from the per-region statuses.
    let naive = |srcs: &[ColumnSource]| {
        res.regions
            .iter()
            .filter(|r| {
                r.status != RegionStatus::Ok
                    || srcs.iter().any(|&s| r.estimates.status_of_source(s) != EstimateStatus::Ok)
            })
            .count()
    };
    let (n_ips, n_knee, n_all) = (res.n_flagged_for(&[ips]), res.n_flagged_for(&[knee]), res.n_flagged());
    eprintln!("flagged: ips {n_ips}, knee {n_knee}, any estimator {n_all}");
    assert_eq!(n_ips, naive(&[ips]));
    assert_eq!(n_knee, naive(&[knee]));
    assert_eq!(n_all, naive(&res.selected_sources()));
    assert!(n_ips < n_all, "knee and fit failures still flag ips consumers");
    // At least the constant region.
    assert!(n_ips >= 1);
    // The overall status of a table made for ips consumers names only ips.
    let t = res.to_table_for(&[ips]);
    let status = match t.column("status").unwrap() {
        hierax::io::table::Column::Str(s) => s.clone(),
        _ => unreachable!(),
    };
    assert_eq!(status.iter().filter(|s| *s != "ok").count(), n_ips);
    assert!(
        status.iter().all(|s| s == "ok" || s.starts_with("ips:") || s == "constant_signal"),
        "{status:?}"
    );
    // Values: NaN exactly where the column's status (or the region's) is not ok.
    let v = res.column_values("ips_tau_s").unwrap();
    let st = res.column_statuses("ips_tau_s").unwrap();
    for (x, s) in v.iter().zip(&st) {
        assert_eq!(x.is_finite(), *s == "ok");
    }
    assert_eq!(st[59], "constant_signal");
    // A column that is not there is a typed error naming the choices.
    match res.column_values("ar1_tau_s") {
        Err(TimescaleError::UnknownColumn { column, expected }) => {
            assert_eq!(column, "ar1_tau_s");
            assert!(expected.contains("ips_tau_s") && expected.contains("knee_tau_s"), "{expected}");
        }
        other => panic!("expected UnknownColumn, got {other:?}"),
    }
}

/// Read one column of a CSV written by hierax (`NaN`/empty cells as NaN).
fn csv_column(path: &std::path::Path, name: &str) -> Vec<f64> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let i = header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("no {name} in {header:?}"));
    lines.map(|l| l.split(',').nth(i).unwrap().parse::<f64>().unwrap_or(f64::NAN)).collect()
}

#[test]
fn demo_knee_is_the_same_from_the_command_and_the_subject_job() {
    // Issue 9: one Welch segment rule for every path. Invented demo subject
    // sub-01 (240 frames, TR 2 s), censoring FD > 0.5 mm with no extra
    // frames in both paths (the job's defaults). The per-subject job's
    // timescale stage is run through the library with its defaults
    // (`welch_segment: None`, the shared rule).
    use hierax::io::InputSpec;
    use hierax::subject::{stages, LoadedSubject, SubjectConfig, SubjectInputs};
    let root = crate::util::repo_root().join("demo-data");
    let sub = root.join("sub-01");
    let dir = tempfile::tempdir().unwrap();
    let cli_out = dir.path().join("cli");
    let o = run(hierax()
        .arg("timescales")
        .arg(sub.join("sub-01_bold.npy"))
        .args(["--tr", "2", "--orientation", "time-by-region", "--fd-threshold", "0.5"])
        .arg("--confounds")
        .arg(sub.join("sub-01_confounds.tsv"))
        .arg("--out")
        .arg(&cli_out));
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let spec = |p: std::path::PathBuf| InputSpec::parse(p.to_str().unwrap()).unwrap();
    let inputs = SubjectInputs {
        subject: "sub-01".into(),
        connectome: spec(sub.join("sub-01_connectome.csv")),
        series: spec(sub.join("sub-01_bold.npy")),
        map: spec(root.join("atlas/hierarchy.csv")),
        confounds: Some(spec(sub.join("sub-01_confounds.tsv"))),
        distances: None,
        sphere: None,
        hemisphere: None,
        covariates: Default::default(),
    };
    let cfg = SubjectConfig::new(2.0);
    assert_eq!((cfg.welch_segment, cfg.fd_threshold_mm, cfg.censor_after), (None, Some(0.5), 0));
    let cfg = cfg.check().unwrap();
    let loaded = LoadedSubject::load(&inputs, &cfg).unwrap();
    let stage = stages::timescales(&loaded, &cfg).unwrap();
    let job = stage.result.to_table();
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(cli_out.join("timescales.json")).unwrap()).unwrap();
    let seg = json["summary"]["welch_segment_frames"].as_u64().unwrap() as usize;
    assert_eq!(Some(seg), stage.result.welch_segment_frames);
    assert_eq!(json["summary"]["n_valid_frames"].as_u64().unwrap() as usize, stage.result.n_valid_frames);
    let cli_csv = cli_out.join("timescales.csv");
    for col in ["knee_tau_s", "knee_hz", "knee_exponent", "ips_tau_s", "exp_tau_s"] {
        let a = csv_column(&cli_csv, col);
        let Some(hierax::io::table::Column::F64(b)) = job.column(col) else {
            panic!("job table lacks {col}")
        };
        assert_eq!((a.len(), b.len()), (100, 100));
        for (i, (x, y)) in a.iter().zip(b).enumerate() {
            // Same arithmetic on the same data: identical to the last bit
            // (the CSV prints shortest round-trip decimals).
            assert!(x.to_bits() == y.to_bits() || (x.is_nan() && y.is_nan()), "{col} region {i}: {x} vs {y}");
        }
    }
    // The job's linked column is the table's, NaN exactly where not ok.
    assert_eq!(stage.column, "ips_tau_s");
    let ips = stage.result.column_values("ips_tau_s").unwrap();
    assert!(ips.iter().zip(&stage.tau).all(|(x, y)| x.to_bits() == y.to_bits()));
    let finite = csv_column(&cli_csv, "knee_tau_s").iter().filter(|v| v.is_finite()).count();
    eprintln!(
        "sub-01: {} valid frames, Welch segment {seg} frames, {finite} of 100 knees ok",
        stage.result.n_valid_frames
    );
}

/// A series large enough to be memory-mapped (16 MiB or more, as
/// `hierax timescales` maps a `.npy` series) gives byte-for-byte the table
/// of the same values read from an `.npz` archive (the copying reader), in
/// either orientation, and the input's digest is the file's SHA-256 (FIPS
/// 180-4, via the `sha2` crate).
#[test]
fn a_mapped_npy_series_gives_the_table_of_a_read_one() {
    use sha2::{Digest, Sha256};
    let dir = tempfile::tempdir().unwrap();
    let (frames, regions) = (100, 21_000); // 16.8 MB of float64
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let mut x = Array2::<f64>::zeros((frames, regions));
    for r in 0..regions {
        let phi = 0.2 + 0.7 * (r as f64 / regions as f64);
        let mut prev = 0.0;
        for t in 0..frames {
            let e: f64 = StandardNormal.sample(&mut rng);
            prev = phi * prev + e;
            x[[t, r]] = prev;
        }
    }
    let npy = dir.path().join("bold.npy");
    ndarray_npy::write_npy(&npy, &x).unwrap();
    let npy_t = dir.path().join("bold_t.npy");
    ndarray_npy::write_npy(&npy_t, &x.t().as_standard_layout()).unwrap();
    let npz = dir.path().join("bold.npz");
    let mut z = ndarray_npy::NpzWriter::new(std::fs::File::create(&npz).unwrap());
    z.add_array("bold", &x).unwrap();
    z.finish().unwrap();
    let table = |spec: &str, orientation: &str, out: &str| {
        let o = run(hierax()
            .arg("timescales")
            .arg(spec)
            .args([
                "--tr",
                "1",
                "--estimator",
                "acw0",
                "--max-lag",
                "20",
                "--orientation",
                orientation,
                "--out",
            ])
            .arg(dir.path().join(out)));
        assert!(o.status.success());
        std::fs::read_to_string(dir.path().join(out).join("timescales.csv")).unwrap()
    };
    let read = table(&format!("{}:bold", npz.display()), "time-by-region", "read");
    assert_eq!(read.lines().count(), regions + 1);
    assert_eq!(table(npy.to_str().unwrap(), "time-by-region", "mapped"), read);
    assert_eq!(table(npy_t.to_str().unwrap(), "region-by-time", "mapped_t"), read);
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("mapped/timescales.json")).unwrap())
            .unwrap();
    let input = &json["provenance"]["inputs"][0];
    let want: String =
        Sha256::digest(std::fs::read(&npy).unwrap()).iter().map(|b| format!("{b:02x}")).collect();
    assert_eq!(input["role"], "series");
    assert_eq!(input["sha256"], want.as_str());
    assert_eq!(input["bytes"], std::fs::metadata(&npy).unwrap().len());
}
