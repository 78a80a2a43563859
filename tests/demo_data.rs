//! The committed demo cohort in `demo-data/` (INVENTED data, see
//! demo-data/README.md): every file reads and validates through hierax's own
//! readers, the digests in `demo-data/SHA256SUMS` match, the generator
//! reproduces them, and the planted control-energy asymmetry is present.

use crate::util::repo_root;
use hierax::io::validate::{self, ConnectomeRules, DiagonalPolicy, Orientation};
use hierax::io::{read_array, InputSpec};
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

// The generator itself, compiled into the test binary so that the test can
// regenerate the cohort (an example cannot be imported as a crate).
#[path = "../examples/make_demo.rs"]
#[allow(dead_code)]
mod make_demo;

const N_REGIONS: usize = 100;
const N_FRAMES: usize = 240;

fn demo() -> PathBuf {
    repo_root().join("demo-data")
}

fn read_tsv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let mut r = csv::ReaderBuilder::new().delimiter(b'\t').from_path(path).expect("demo TSV opens");
    let header = r.headers().expect("header").iter().map(str::to_string).collect();
    let rows = r.records().map(|x| x.expect("record").iter().map(str::to_string).collect()).collect();
    (header, rows)
}

fn region_names() -> Vec<String> {
    let (_, rows) = read_tsv(&demo().join("atlas/regions.tsv"));
    rows.into_iter().map(|r| r[0].clone()).collect()
}

struct Person {
    id: String,
    age: f64,
    mean_fd: f64,
}

fn participants() -> Vec<Person> {
    let (header, rows) = read_tsv(&demo().join("participants.tsv"));
    assert_eq!(header, ["participant_id", "age", "sex", "mean_framewise_displacement"]);
    rows.iter()
        .map(|r| {
            assert!(r[2] == "F" || r[2] == "M", "sex `{}`", r[2]);
            Person { id: r[0].clone(), age: r[1].parse().unwrap(), mean_fd: r[3].parse().unwrap() }
        })
        .collect()
}

fn load(rel: &str) -> hierax::io::LoadedArray {
    read_array(&InputSpec::parse(demo().join(rel).to_str().unwrap()).unwrap()).unwrap()
}

fn connectome(id: &str) -> validate::Connectome {
    let rules = ConnectomeRules { diagonal: DiagonalPolicy::Reject, ..Default::default() };
    validate::connectome(&load(&format!("{id}/{id}_connectome.csv")), &rules).unwrap()
}

#[test]
fn atlas_files_are_consistent() {
    let (header, rows) = read_tsv(&demo().join("atlas/regions.tsv"));
    assert_eq!(header, ["region", "hemisphere", "x_mm", "y_mm", "z_mm", "sphere_x", "sphere_y", "sphere_z"]);
    assert_eq!(rows.len(), N_REGIONS);
    let mut xyz = Vec::new();
    for (i, r) in rows.iter().enumerate() {
        let (hemi, k) = if i < 50 { ("L", i + 1) } else { ("R", i - 49) };
        assert_eq!(r[0], format!("{hemi}_P{k:02}"));
        assert_eq!(r[1], hemi);
        let v: Vec<f64> = r[2..].iter().map(|c| c.parse().unwrap()).collect();
        // Each hemisphere on its own unit sphere, and x_mm = s(38 + 28 u_x)
        // with sphere_x = s u_x (the generator's documented sheet).
        let norm = (v[3] * v[3] + v[4] * v[4] + v[5] * v[5]).sqrt();
        assert!((norm - 1.0).abs() < 1e-12, "{}: sphere radius {norm}", r[0]);
        let s = if hemi == "L" { -1.0 } else { 1.0 };
        assert!((v[0] - (38.0 * s + 28.0 * v[3])).abs() < 1e-9, "{}", r[0]);
        xyz.push([v[0], v[1], v[2]]);
    }
    let d = load("atlas/distances.npy").matrix().unwrap();
    assert_eq!(d.dim(), (N_REGIONS, N_REGIONS));
    for i in 0..N_REGIONS {
        for j in 0..N_REGIONS {
            let e: f64 = (0..3).map(|k| (xyz[i][k] - xyz[j][k]).powi(2)).sum::<f64>().sqrt();
            // Same inputs (round-tripped exactly) and same operations: equal
            // to rounding; 1e-12 mm leaves room for a different summation order.
            assert!((d[[i, j]] - e).abs() < 1e-12, "distance ({i}, {j})");
            assert_eq!(d[[i, j]], d[[j, i]]);
        }
    }
    let map = validate::region_map(&load("atlas/hierarchy.csv"), Some(N_REGIONS)).unwrap();
    assert_eq!(map.names.as_deref(), Some(&region_names()[..]));
    assert!(map.values.iter().all(|v| v.is_finite()));
}

#[test]
fn participants_connectomes_series_and_confounds_validate() {
    let names = region_names();
    let people = participants();
    assert_eq!(people.len(), 24);
    for (k, p) in people.iter().enumerate() {
        assert_eq!(p.id, format!("sub-{:02}", k + 1));
        assert!((8.0..=23.0).contains(&p.age), "{}: age {}", p.id, p.age);

        let c = connectome(&p.id);
        assert_eq!(c.weights.dim(), (N_REGIONS, N_REGIONS));
        assert!(c.notes.is_empty(), "{}: {:?}", p.id, c.notes); // exactly symmetric, no isolated node
        assert_eq!(c.weights, c.weights.t());
        assert!(c.weights.iter().all(|&v| v >= 0.0 && v.fract() == 0.0));
        assert_eq!(c.names.as_deref(), Some(&names[..]));

        let s = validate::series(load(&format!("{}/{}_bold.npy", p.id, p.id)), Orientation::Auto, Some(100))
            .unwrap();
        assert_eq!(s.data.dim(), (N_FRAMES, N_REGIONS));
        assert!(s.data.iter().all(|v| v.is_finite()));

        let conf = |col: &str| {
            let spec = format!("{}/{}/{}_confounds.tsv:{col}", demo().display(), p.id, p.id);
            read_array(&InputSpec::parse(&spec).unwrap()).unwrap().vector().unwrap()
        };
        let fd = conf("framewise_displacement");
        assert_eq!(fd.len(), N_FRAMES);
        assert!(fd[0].is_nan(), "first FD is n/a (BIDS)");
        assert!(fd.iter().skip(1).all(|&v| v >= 0.0));
        // Both written with 6 decimals: rounding error at most 5e-7 each.
        let mean = fd.iter().skip(1).sum::<f64>() / (N_FRAMES - 1) as f64;
        assert!((mean - p.mean_fd).abs() < 1e-6, "{}: mean FD {mean} vs {}", p.id, p.mean_fd);
        let gs = conf("global_signal");
        for t in 0..N_FRAMES {
            let m = s.data.row(t).mean().unwrap();
            assert!((gs[t] - m).abs() < 1e-6, "{}: global signal frame {t}", p.id);
        }
    }
}

/// Spectral radius of a symmetric non-negative matrix (power iteration).
fn spectral_radius(a: &ndarray::Array2<f64>) -> f64 {
    let mut v = ndarray::Array1::from_elem(a.nrows(), 1.0);
    let mut lambda = 0.0;
    for _ in 0..5000 {
        let w = a.dot(&v);
        let norm = w.dot(&w).sqrt();
        let next = v.dot(&w) / v.dot(&v);
        v = w / norm;
        // A positive connected network: the Rayleigh quotient converges
        // monotonically; 1e-13 relative is far below the effects tested.
        if (next - lambda).abs() <= 1e-13 * next {
            return next;
        }
        lambda = next;
    }
    panic!("power iteration did not converge (last estimate {lambda})")
}

/// The planted effect, through the identity that holds for symmetric A,
/// B = I and equal-size states: E_ij − E_ji = 2 (x_iᵀA x_i − x_jᵀA x_j) / (1 + λ_max)
/// (derived in examples/make_demo.rs; checked against scipy 1.14.1
/// `linalg.expm` energies to 5e-15 relative by tests/reference/check_demo_effects.py).
/// Thresholds sit below the values that script printed for the committed
/// files (demo-data/README.md): fraction of cheaper bottom-up pairs ≥ 0.80
/// in every participant, Spearman(age, mean asymmetry) = 0.91.
#[test]
fn planted_energy_asymmetry_is_present() {
    let map = validate::region_map(&load("atlas/hierarchy.csv"), Some(N_REGIONS)).unwrap();
    let mut order: Vec<usize> = (0..N_REGIONS).collect();
    order.sort_by(|&a, &b| map.values[a].total_cmp(&map.values[b])); // stable: ties by region order
    let bins: Vec<&[usize]> = order.chunks(N_REGIONS / 10).collect();
    let people = participants();
    let mut by_age = Vec::new();
    for p in &people {
        let a = connectome(&p.id).weights;
        let scale = 2.0 / (1.0 + spectral_radius(&a));
        let within: Vec<f64> =
            bins.iter().map(|b| b.iter().map(|&i| b.iter().map(|&j| a[[i, j]]).sum::<f64>()).sum()).collect();
        let mut per_distance = [0.0f64; 10];
        let (mut cheaper, mut pairs, mut total) = (0, 0, 0.0);
        for i in 0..10 {
            for j in (i + 1)..10 {
                let de = scale * (within[i] - within[j]);
                per_distance[j - i] += de / (10 - (j - i)) as f64;
                cheaper += usize::from(de < 0.0);
                pairs += 1;
                total += de;
            }
        }
        assert!(cheaper as f64 / pairs as f64 >= 0.75, "{}: {cheaper}/{pairs} bottom-up cheaper", p.id);
        // Asymmetry grows with bin distance: the extreme pair is the most asymmetric.
        assert!(per_distance[9] < per_distance[1], "{}: {per_distance:?}", p.id);
        by_age.push((p.age, total / pairs as f64));
    }
    // Asymmetry shrinks with age: the older half is less asymmetric on average.
    by_age.sort_by(|a, b| a.0.total_cmp(&b.0));
    let half = by_age.len() / 2;
    let young = by_age[..half].iter().map(|x| x.1).sum::<f64>() / half as f64;
    let old = by_age[half..].iter().map(|x| x.1).sum::<f64>() / (by_age.len() - half) as f64;
    assert!(young < old && old < 0.0, "mean asymmetry young {young}, old {old}");
}

fn parse_sums(text: &str) -> BTreeMap<String, String> {
    text.lines()
        .map(|l| {
            let (hex, path) = l.split_once("  ").expect("`HEX  PATH` lines");
            (path.to_string(), hex.to_string())
        })
        .collect()
}

fn files_under(root: &Path, dir: &Path, out: &mut Vec<String>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            files_under(root, &p, out);
        } else {
            out.push(p.strip_prefix(root).unwrap().to_string_lossy().replace('\\', "/"));
        }
    }
}

#[test]
fn digests_match_committed_files() {
    let sums = parse_sums(&std::fs::read_to_string(demo().join("SHA256SUMS")).unwrap());
    let mut present = Vec::new();
    files_under(&demo(), &demo(), &mut present);
    present.retain(|f| f != "README.md" && f != "SHA256SUMS");
    present.sort();
    assert_eq!(present, sums.keys().cloned().collect::<Vec<_>>(), "files in demo-data/ vs SHA256SUMS");
    for (path, hex) in &sums {
        let got: String = Sha256::digest(std::fs::read(demo().join(path)).unwrap())
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        assert_eq!(&got, hex, "{path}");
    }
}

/// Regenerating from the seed gives the committed bytes. The generator uses
/// plain loops in a fixed order, so only the platform's `exp`/`ln`/`sin`/`cos`
/// could change a bit on another platform.
#[test]
fn generator_reproduces_committed_files() {
    let tmp = tempfile::tempdir().unwrap();
    make_demo::generate(tmp.path()).unwrap();
    let fresh = std::fs::read_to_string(tmp.path().join("SHA256SUMS")).unwrap();
    let committed = std::fs::read_to_string(demo().join("SHA256SUMS")).unwrap();
    assert_eq!(fresh, committed, "regenerate with `cargo run --release --example make_demo`");
}
