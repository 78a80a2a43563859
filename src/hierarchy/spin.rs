//! Spin permutations of parcel centroids on the sphere (Alexander-Bloch et al.
//! 2018) with one-to-one parcel reassignment (Váša et al. 2018).
//!
//! # Conventions
//! * Coordinates are parcel centroids on a sphere centred at the origin (one
//!   sphere per hemisphere when hemispheres are given), with the x axis
//!   running left–right. Each point must lie within `radius_tolerance`
//!   (relative, default 2 %) of the median radius of its hemisphere; points
//!   are then projected to the unit sphere. The default tolerance is common
//!   practice (no source): centroids averaged over a sphere mesh fall slightly
//!   inside it.
//! * Rotations are uniform on SO(3), from a uniformly random unit quaternion
//!   (Shoemake 1992, Graphics Gems III).
//! * With hemispheres, the left hemisphere is rotated by `R` and the right by
//!   `F R F`, `F = diag(−1, 1, 1)` (mirror across the midline x = 0), so both
//!   spin symmetrically; `det(F R F) = det R = +1`.
//! * Reassignment (Váša et al. 2018, as we recall it): within each
//!   hemisphere, repeatedly take the rotated parcel whose nearest unassigned
//!   original parcel is farthest away and give it that nearest parcel; this
//!   makes the assignment one-to-one. Nearness is great-circle distance
//!   (equivalently the largest dot product on the unit sphere); exact ties go
//!   to the lower index.
//! * Surrogate `r` is `y[j] = x[i]` where rotated parcel `i` was assigned to
//!   original parcel `j`; each surrogate is thus a permutation of the map
//!   (NaN values travel with their parcel).

use super::rng::stream;
use super::HierarchyError;
use ndarray::Array2;
use rand::Rng;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde::Serialize;

/// A 3 × 3 rotation, row-major.
pub type Rotation = [[f64; 3]; 3];

/// Parameters of [`spin_surrogates`].
#[derive(Clone, Copy, Debug, Serialize)]
pub struct SpinParams {
    /// Number of surrogates, at least 1.
    pub count: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// Allowed relative deviation of a point's radius from the median radius.
    pub radius_tolerance: f64,
}

impl SpinParams {
    /// `count` surrogates from `seed`, radius tolerance 2 %.
    pub fn new(count: usize, seed: u64) -> Self {
        SpinParams { count, seed, radius_tolerance: 0.02 }
    }
}

/// Parcels on the sphere, checked and projected to the unit sphere.
#[derive(Clone, Debug)]
pub struct SphereLayout {
    /// Unit vectors, one per parcel.
    pub points: Vec<[f64; 3]>,
    /// `true` for a right-hemisphere parcel; all `false` without hemispheres.
    pub right: Vec<bool>,
    /// Whether hemispheres were given.
    pub has_hemispheres: bool,
    /// Largest relative radius deviation found.
    pub max_radius_deviation: f64,
}

impl SphereLayout {
    /// Check `coords` (n × 3) and optional hemisphere labels (0 = left,
    /// 1 = right) and project every point to the unit sphere.
    ///
    /// # Errors
    /// [`HierarchyError::Invalid`] for a shape other than n × 3, a
    /// non-finite coordinate, a label other than 0/1, a label vector of the
    /// wrong length, or a point off its sphere beyond the tolerance.
    pub fn new(coords: &Array2<f64>, hemisphere: Option<&[f64]>, tol: f64) -> Result<Self, HierarchyError> {
        let what = "sphere coordinates";
        let (n, c) = coords.dim();
        if c != 3 {
            return Err(HierarchyError::invalid(
                what,
                format!("expected n x 3 (x, y, z per parcel), found {n} x {c}"),
            ));
        }
        if let Some(((i, j), v)) = coords.indexed_iter().find(|(_, v)| !v.is_finite()) {
            return Err(HierarchyError::invalid(
                what,
                format!("expected finite coordinates, found {v} at parcel {}, column {}", i + 1, j + 1),
            ));
        }
        if !(tol > 0.0 && tol < 1.0) {
            return Err(HierarchyError::parameter("radius_tolerance", "a fraction in (0, 1)", tol));
        }
        let right: Vec<bool> = match hemisphere {
            None => vec![false; n],
            Some(h) => {
                if h.len() != n {
                    return Err(HierarchyError::RegionCount {
                        what: "hemisphere labels".into(),
                        expected: n,
                        source_of_count: "the sphere coordinates".into(),
                        found: h.len(),
                    });
                }
                h.iter()
                    .enumerate()
                    .map(|(i, &v)| {
                        if v == 0.0 {
                            Ok(false)
                        } else if v == 1.0 {
                            Ok(true)
                        } else {
                            Err(HierarchyError::invalid(
                                "hemisphere labels",
                                format!("expected 0 (left) or 1 (right), found {v} at parcel {}", i + 1),
                            ))
                        }
                    })
                    .collect::<Result<_, _>>()?
            }
        };
        let radius: Vec<f64> = coords.rows().into_iter().map(|r| r.dot(&r).sqrt()).collect();
        let mut max_dev = 0.0f64;
        for side in [false, true] {
            let mut rs: Vec<f64> = (0..n).filter(|&i| right[i] == side).map(|i| radius[i]).collect();
            if rs.is_empty() {
                continue;
            }
            rs.sort_by(f64::total_cmp);
            let median = rs[rs.len() / 2];
            if median <= 0.0 {
                return Err(HierarchyError::invalid(
                    what,
                    "expected points on a sphere centred at the origin, found radius 0",
                ));
            }
            for i in (0..n).filter(|&i| right[i] == side) {
                let dev = (radius[i] - median).abs() / median;
                max_dev = max_dev.max(dev);
                if dev > tol {
                    return Err(HierarchyError::invalid(
                        what,
                        format!(
                            "parcel {} has radius {:.6} but the median radius{} is {:.6} ({:.1} % off, tolerance {:.1} %); \
                             expected centroids on a sphere centred at the origin",
                            i + 1,
                            radius[i],
                            if hemisphere.is_some() { if side { " of the right hemisphere" } else { " of the left hemisphere" } } else { "" },
                            median,
                            100.0 * dev,
                            100.0 * tol
                        ),
                    ));
                }
            }
        }
        let points = (0..n)
            .map(|i| {
                let r = radius[i];
                [coords[[i, 0]] / r, coords[[i, 1]] / r, coords[[i, 2]] / r]
            })
            .collect();
        Ok(SphereLayout {
            points,
            right,
            has_hemispheres: hemisphere.is_some(),
            max_radius_deviation: max_dev,
        })
    }

    /// Number of parcels.
    pub fn len(&self) -> usize {
        self.points.len()
    }

    /// Whether there are no parcels.
    pub fn is_empty(&self) -> bool {
        self.points.is_empty()
    }
}

/// A uniformly random rotation from a unit quaternion `q = g/‖g‖`, `g` four
/// standard normals (Shoemake 1992).
pub fn random_rotation<R: Rng>(rng: &mut R) -> Rotation {
    let mut q = [0.0f64; 4];
    let mut norm = 0.0;
    while norm < 1e-12 {
        for e in q.iter_mut() {
            *e = rng.sample(StandardNormal);
        }
        norm = q.iter().map(|v| v * v).sum::<f64>().sqrt();
    }
    let [w, x, y, z] = q.map(|v| v / norm);
    [
        [1.0 - 2.0 * (y * y + z * z), 2.0 * (x * y - z * w), 2.0 * (x * z + y * w)],
        [2.0 * (x * y + z * w), 1.0 - 2.0 * (x * x + z * z), 2.0 * (y * z - x * w)],
        [2.0 * (x * z - y * w), 2.0 * (y * z + x * w), 1.0 - 2.0 * (x * x + y * y)],
    ]
}

/// `F R F` with `F = diag(−1, 1, 1)`: the rotation mirrored across x = 0.
pub fn mirror(r: &Rotation) -> Rotation {
    let mut m = *r;
    for (i, row) in m.iter_mut().enumerate() {
        for (j, v) in row.iter_mut().enumerate() {
            if (i == 0) != (j == 0) {
                *v = -*v;
            }
        }
    }
    m
}

fn apply(r: &Rotation, p: &[f64; 3]) -> [f64; 3] {
    [
        r[0][0] * p[0] + r[0][1] * p[1] + r[0][2] * p[2],
        r[1][0] * p[0] + r[1][1] * p[1] + r[1][2] * p[2],
        r[2][0] * p[0] + r[2][1] * p[1] + r[2][2] * p[2],
    ]
}

/// One-to-one reassignment of rotated parcels to original parcels.
///
/// Returns `a` with `a[j] = i`: rotated parcel `i` takes original place `j`.
/// Furthest-first greedy on similarity `s_ij = rotated_i · original_j`
/// (see the module documentation). The nearest unassigned original of each
/// rotated parcel is kept up to date, rescanning a row only when its nearest
/// parcel is taken, which keeps one assignment near O(n²) instead of the
/// naive O(n³) (checked against the naive loop in the tests).
pub fn assign_one_to_one(rotated: &[[f64; 3]], original: &[[f64; 3]]) -> Vec<usize> {
    let n = rotated.len();
    let mut sim = vec![0.0f64; n * n];
    for (i, r) in rotated.iter().enumerate() {
        let row = &mut sim[i * n..(i + 1) * n];
        for (s, o) in row.iter_mut().zip(original) {
            *s = r[0] * o[0] + r[1] * o[1] + r[2] * o[2];
        }
    }
    // Remaining rotated and original parcels are kept in compact lists (with
    // the position of each original) so every scan shrinks as parcels are
    // assigned. Ties go to the lower index, compared explicitly because the
    // lists are not kept in index order.
    let mut alive_o: Vec<usize> = (0..n).collect();
    let mut pos_o: Vec<usize> = (0..n).collect();
    let mut alive_r: Vec<usize> = (0..n).collect();
    let nearest = |i: usize, alive_o: &[usize]| -> (usize, f64) {
        let row = &sim[i * n..(i + 1) * n];
        let mut best = (usize::MAX, f64::NEG_INFINITY);
        for &j in alive_o {
            let s = row[j];
            if s > best.1 || (s == best.1 && j < best.0) {
                best = (j, s);
            }
        }
        best
    };
    let mut near: Vec<(usize, f64)> = (0..n).map(|i| nearest(i, &alive_o)).collect();
    // The rotated parcel whose nearest unassigned original is farthest.
    let argmin = |alive_r: &[usize], near: &[(usize, f64)]| -> usize {
        let mut best = (usize::MAX, usize::MAX, f64::INFINITY);
        for (p, &i) in alive_r.iter().enumerate() {
            let v = near[i].1;
            if v < best.2 || (v == best.2 && i < best.1) {
                best = (p, i, v);
            }
        }
        best.0
    };
    let mut out = vec![usize::MAX; n];
    let mut pick_pos = argmin(&alive_r, &near);
    while !alive_r.is_empty() {
        let i = alive_r.swap_remove(pick_pos);
        let j = near[i].0;
        out[j] = i;
        let pj = pos_o[j];
        alive_o.swap_remove(pj);
        if pj < alive_o.len() {
            pos_o[alive_o[pj]] = pj;
        }
        // Parcels whose nearest was j get a new nearest; the next pick is
        // found in the same pass.
        let mut best = (usize::MAX, usize::MAX, f64::INFINITY);
        for (p, &r) in alive_r.iter().enumerate() {
            if near[r].0 == j {
                near[r] = nearest(r, &alive_o);
            }
            let v = near[r].1;
            if v < best.2 || (v == best.2 && r < best.1) {
                best = (p, r, v);
            }
        }
        pick_pos = best.0;
    }
    out
}

/// Spin surrogates and the rotations that made them.
#[derive(Clone, Debug)]
pub struct SpinSurrogates {
    /// Surrogate maps, regions × count.
    pub surrogates: Array2<f64>,
    /// The left-hemisphere (or whole-sphere) rotation of each surrogate.
    pub rotations: Vec<Rotation>,
    /// Mean over surrogates of the mean angle (radians) between a parcel's
    /// original place and the rotated parcel assigned to it: how far the
    /// reassignment had to move parcels.
    pub mean_reassignment_angle: f64,
}

/// Spin surrogates of `map` on `layout` (see the module documentation).
///
/// # Errors
/// [`HierarchyError::RegionCount`] when the map length differs from the
/// parcel count; [`HierarchyError::Parameter`] for `count = 0`;
/// [`HierarchyError::ConstantMap`].
///
/// # References
/// Alexander-Bloch et al. 2018, NeuroImage 178:540; Váša et al. 2018, Cereb
/// Cortex 28:281; Shoemake 1992, Graphics Gems III.
pub fn spin_surrogates(
    map: &[f64],
    layout: &SphereLayout,
    params: &SpinParams,
) -> Result<SpinSurrogates, HierarchyError> {
    let n = layout.len();
    if map.len() != n {
        return Err(HierarchyError::RegionCount {
            what: "map".into(),
            expected: n,
            source_of_count: "the sphere coordinates".into(),
            found: map.len(),
        });
    }
    if params.count == 0 {
        return Err(HierarchyError::parameter("count", "at least 1", 0));
    }
    super::check_not_constant(map)?;
    let sides: Vec<Vec<usize>> =
        [false, true].iter().map(|&s| (0..n).filter(|&i| layout.right[i] == s).collect()).collect();
    let results: Vec<(Vec<f64>, Rotation, f64)> = (0..params.count)
        .into_par_iter()
        .map(|r| {
            let mut rng = stream(params.seed, r);
            let rot = random_rotation(&mut rng);
            let rot_right = mirror(&rot);
            let mut y = vec![f64::NAN; n];
            let mut angle_sum = 0.0;
            for (s, idx) in sides.iter().enumerate() {
                if idx.is_empty() {
                    continue;
                }
                let rr = if s == 0 { &rot } else { &rot_right };
                let original: Vec<[f64; 3]> = idx.iter().map(|&i| layout.points[i]).collect();
                let rotated: Vec<[f64; 3]> = original.iter().map(|p| apply(rr, p)).collect();
                let a = assign_one_to_one(&rotated, &original);
                for (jj, &ii) in a.iter().enumerate() {
                    y[idx[jj]] = map[idx[ii]];
                    let o = &original[jj];
                    let p = &rotated[ii];
                    angle_sum += (o[0] * p[0] + o[1] * p[1] + o[2] * p[2]).clamp(-1.0, 1.0).acos();
                }
            }
            (y, rot, angle_sum / n as f64)
        })
        .collect();
    let mut surrogates = Array2::<f64>::zeros((n, params.count));
    let mut rotations = Vec::with_capacity(params.count);
    let mut angle = 0.0;
    for (r, (y, rot, a)) in results.into_iter().enumerate() {
        for i in 0..n {
            surrogates[[i, r]] = y[i];
        }
        rotations.push(rot);
        angle += a;
    }
    Ok(SpinSurrogates { surrogates, rotations, mean_reassignment_angle: angle / params.count as f64 })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn det(r: &Rotation) -> f64 {
        r[0][0] * (r[1][1] * r[2][2] - r[1][2] * r[2][1]) - r[0][1] * (r[1][0] * r[2][2] - r[1][2] * r[2][0])
            + r[0][2] * (r[1][0] * r[2][1] - r[1][1] * r[2][0])
    }

    #[test]
    fn rotations_are_proper_and_orthogonal() {
        let mut rng = stream(7, 0);
        for _ in 0..200 {
            for r in [random_rotation(&mut rng), mirror(&random_rotation(&mut rng))] {
                assert!((det(&r) - 1.0).abs() < 1e-12);
                for i in 0..3 {
                    for j in 0..3 {
                        let d: f64 = (0..3).map(|k| r[i][k] * r[j][k]).sum();
                        assert!((d - if i == j { 1.0 } else { 0.0 }).abs() < 1e-12);
                    }
                }
            }
        }
    }

    /// Naive furthest-first greedy, O(n³): recompute every nearest each step.
    fn assign_naive(rot: &[[f64; 3]], orig: &[[f64; 3]]) -> Vec<usize> {
        let n = rot.len();
        let dot = |a: &[f64; 3], b: &[f64; 3]| a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
        let (mut used_r, mut used_o) = (vec![false; n], vec![false; n]);
        let mut out = vec![0; n];
        for _ in 0..n {
            let mut pick = (usize::MAX, usize::MAX, f64::INFINITY);
            for i in (0..n).filter(|&i| !used_r[i]) {
                let (j, s) = (0..n)
                    .filter(|&j| !used_o[j])
                    .map(|j| (j, dot(&rot[i], &orig[j])))
                    .fold((usize::MAX, f64::NEG_INFINITY), |b, c| if c.1 > b.1 { c } else { b });
                if s < pick.2 {
                    pick = (i, j, s);
                }
            }
            used_r[pick.0] = true;
            used_o[pick.1] = true;
            out[pick.1] = pick.0;
        }
        out
    }

    #[test]
    fn lazy_assignment_equals_naive_greedy() {
        let pts: Vec<[f64; 3]> = (0..80)
            .map(|i| {
                let z = 1.0 - 2.0 * (i as f64 + 0.5) / 80.0;
                let r = (1.0 - z * z).sqrt();
                let t = 2.399963229728653 * i as f64;
                [r * t.cos(), r * t.sin(), z]
            })
            .collect();
        for s in 0..20 {
            let rot = random_rotation(&mut stream(3, s));
            let rotated: Vec<[f64; 3]> = pts.iter().map(|p| apply(&rot, p)).collect();
            assert_eq!(assign_one_to_one(&rotated, &pts), assign_naive(&rotated, &pts), "rotation {s}");
        }
    }

    #[test]
    fn identity_rotation_assigns_each_parcel_to_itself() {
        let pts: Vec<[f64; 3]> = (0..30)
            .map(|i| {
                let t = i as f64 * 0.7;
                let z = -1.0 + 2.0 * (i as f64 + 0.5) / 30.0;
                let s = (1.0 - z * z).sqrt();
                [s * t.cos(), s * t.sin(), z]
            })
            .collect();
        assert_eq!(assign_one_to_one(&pts, &pts), (0..30).collect::<Vec<_>>());
    }
}
