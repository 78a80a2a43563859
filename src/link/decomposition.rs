//! The asymmetry matrix split into a hierarchy potential and a circulation.
//!
//! For k states the asymmetry matrix $\Delta_{ij}=E_{ij}-E_{ji}$ is
//! antisymmetric: a flow on the complete graph $K_k$. Its combinatorial
//! Hodge decomposition (Jiang, Lim, Yao & Ye 2011, Math. Program.) writes it
//! as a gradient flow plus a remainder,
//! $$\Delta_{ij} = (\varphi_j - \varphi_i) + R_{ij},$$
//! with $\varphi$ the least-squares potential
//! $\min_\varphi \sum_{i<j}\big(\Delta_{ij}-(\varphi_j-\varphi_i)\big)^2$.
//! On the complete graph the normal equations are
//! $(kI-\mathbf 1\mathbf 1^\top)\varphi = \operatorname{div}\Delta$ and, fixing
//! $\sum_j\varphi_j=0$, the solution is the column mean
//! $$\varphi_j = \frac1k\sum_i \Delta_{ij}.$$
//! The remainder $R$ is divergence-free; on $K_k$ there is no harmonic part
//! (its clique complex has no 1-cycles that are not boundaries), so $R$ is a
//! pure circulation (curl flow): a part of the asymmetry that no ordering of
//! the states explains.
//!
//! The **potential share** $1-\lVert R\rVert^2/\lVert\Delta\rVert^2$ (norms
//! over the pairs $i<j$) is 1 when the asymmetry is a pure potential. That is
//! the case whenever the Gramian inverse $M=W_T^{-1}$ and the transition
//! matrix $\Phi$ are symmetric and commute, e.g. a symmetric network with all
//! nodes driven equally ($B=bI$), in continuous or discrete time: the cross
//! terms of $E_{ij}$ and $E_{ji}$ cancel and
//! $\Delta_{ij} = q(x_j)-q(x_i)$ with $q(x)=x^\top(M-\Phi^\top M\Phi)x$; in
//! continuous time $(I-\Phi^2)W_T^{-1}=-2\tilde A$, so $q(x)=-2x^\top\tilde Ax$.
//!
//! **A consequence for the summaries.** With states at positions $0..k-1$ and
//! $\Delta$ a pure potential, the least-squares slope of $\Delta_{ij}$ on
//! $j-i$ over the $k(k-1)/2$ pairs $i<j$ equals $3/(k+1)$ times the mean of
//! $\Delta_{ij}$ over the same pairs (the bottom-up minus top-down energy),
//! whatever $\varphi$ is. Proof: with $S=\sum_m\varphi_m(2m-k+1)$ and
//! $P=k(k-1)/2$ pairs, $\sum_{i<j}\Delta_{ij}=S$ and
//! $\sum_{i<j}(j-i)\Delta_{ij}=\tfrac k2 S$; the mean distance is
//! $\bar d=(k+1)/3$ and $\sum_{i<j}(j-i-\bar d)^2=k(k-1)(k+1)(k-2)/36$, so
//! slope / mean $=(\tfrac k2-\bar d)P\big/\sum(d-\bar d)^2 = 3/(k+1)$
//! ([`slope_per_mean_for_potential`]). So under that model the slope is not a
//! second
//! finding: only the circulation can make it differ from the mean.

use super::LinkError;
use crate::stats::correlation::{spearman, Correlation};
use ndarray::Array2;
use serde::Serialize;

/// The Hodge split of a k × k asymmetry matrix.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct AsymmetryDecomposition {
    /// Potential φ of each state (mean zero), with Δ_ij ≈ φ_j − φ_i.
    /// φ decreasing along the hierarchy means bottom-up transitions are the
    /// cheaper ones.
    pub potential: Vec<f64>,
    /// Share of ‖Δ‖² (pairs i < j) explained by the potential, in [0, 1];
    /// NaN when Δ is exactly 0.
    pub potential_share: f64,
    /// ‖R‖ over the pairs i < j: the size of the circulation (energy units).
    pub circulation_norm: f64,
    /// Spearman correlation of φ with the state's position along the
    /// hierarchy (0 … k − 1); undefined (None) for a constant potential or
    /// fewer than 3 states.
    pub potential_vs_position_spearman: Option<Correlation>,
}

/// Split `asymmetry` (k × k, antisymmetric: Δ_ij = E_ij − E_ji) into the
/// least-squares potential and the circulation (see the module docs):
/// $$\varphi_j=\frac1k\sum_i\Delta_{ij},\qquad R_{ij}=\Delta_{ij}-(\varphi_j-\varphi_i).$$
///
/// # Errors
/// [`LinkError::EnergyShape`] for a non-square or smaller than 2 × 2 matrix,
/// [`LinkError::NotAntisymmetric`] when Δ_ij + Δ_ji is not 0 (to 1e-9 of the
/// largest |Δ|) or an entry is not finite.
///
/// # References
/// Jiang, Lim, Yao & Ye (2011), Statistical ranking and combinatorial Hodge
/// theory, Math. Program. 127:203–244.
pub fn decompose_asymmetry(asymmetry: &Array2<f64>) -> Result<AsymmetryDecomposition, LinkError> {
    let (rows, cols) = asymmetry.dim();
    if rows != cols || rows < 2 {
        return Err(LinkError::EnergyShape { rows, cols });
    }
    let k = rows;
    let scale = asymmetry.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    for i in 0..k {
        for j in i..k {
            let s = asymmetry[[i, j]] + asymmetry[[j, i]];
            let close = s.abs() <= 1e-9 * scale;
            if !close || !asymmetry[[i, j]].is_finite() {
                return Err(LinkError::NotAntisymmetric { initial: i, target: j, sum: s });
            }
        }
    }
    let potential: Vec<f64> = (0..k).map(|j| asymmetry.column(j).sum() / k as f64).collect();
    let (mut total, mut resid) = (0.0, 0.0);
    for i in 0..k {
        for j in (i + 1)..k {
            let d = asymmetry[[i, j]];
            let r = d - (potential[j] - potential[i]);
            total += d * d;
            resid += r * r;
        }
    }
    let potential_share = if total > 0.0 { (1.0 - resid / total).clamp(0.0, 1.0) } else { f64::NAN };
    let position: Vec<f64> = (0..k).map(|j| j as f64).collect();
    Ok(AsymmetryDecomposition {
        potential_vs_position_spearman: spearman(&position, &potential).ok(),
        potential,
        potential_share,
        circulation_norm: resid.sqrt(),
    })
}

/// The ratio (least-squares slope of Δ_ij on j − i) / (mean of Δ_ij), both
/// over the pairs i < j of k states at positions 0 … k − 1, when Δ is a pure
/// potential (see the module docs). Computed from the pair geometry:
/// $$\frac{\big(\tfrac k2-\bar d\big)\,P}{\sum_{i<j}(j-i-\bar d)^2},\qquad
/// P=\frac{k(k-1)}2,\ \bar d=\frac{k+1}3,$$
/// which equals $3/(k+1)$. `None` for k < 3 (the slope is undefined).
pub fn slope_per_mean_for_potential(k: usize) -> Option<f64> {
    if k < 3 {
        return None;
    }
    let kf = k as f64;
    let pairs = kf * (kf - 1.0) / 2.0;
    let mean_d = (kf + 1.0) / 3.0;
    let ss: f64 = (1..k).map(|d| (k - d) as f64 * (d as f64 - mean_d).powi(2)).sum();
    Some((kf / 2.0 - mean_d) * pairs / ss)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::regression::least_squares_line;

    fn from_potential(phi: &[f64]) -> Array2<f64> {
        let k = phi.len();
        Array2::from_shape_fn((k, k), |(i, j)| phi[j] - phi[i])
    }

    #[test]
    fn a_pure_potential_is_recovered_with_share_one() {
        let phi = [3.0, -1.0, 0.5, 2.0, -4.5];
        let d = decompose_asymmetry(&from_potential(&phi)).unwrap();
        // φ is defined up to a constant; ours has mean zero (the input's mean is 0 already).
        for (a, b) in d.potential.iter().zip(phi) {
            assert!((a - b).abs() < 1e-14, "{a} vs {b}");
        }
        assert!((d.potential_share - 1.0).abs() < 1e-15);
        assert!(d.circulation_norm < 1e-14);
    }

    #[test]
    fn a_pure_circulation_has_share_zero() {
        // A 3-cycle 0 -> 1 -> 2 -> 0 of unit flow is divergence-free: the curl flow of Jiang et al.
        // (2011, section 2) with no gradient part.
        let mut c = Array2::zeros((3, 3));
        for (i, j) in [(0, 1), (1, 2), (2, 0)] {
            c[[i, j]] = 1.0;
            c[[j, i]] = -1.0;
        }
        let d = decompose_asymmetry(&c).unwrap();
        assert!(d.potential.iter().all(|p| p.abs() < 1e-15));
        assert!(d.potential_share.abs() < 1e-15);
        assert!((d.circulation_norm - 3f64.sqrt()).abs() < 1e-15);
        // Potential plus circulation: the share is ‖grad φ‖² / (‖grad φ‖² + ‖R‖²), as the two
        // parts are orthogonal (Hodge decomposition).
        let g = from_potential(&[0.0, 1.0, 2.0]);
        let d = decompose_asymmetry(&(&g + &c)).unwrap();
        let grad2 = 1.0 + 4.0 + 1.0;
        assert!((d.potential_share - grad2 / (grad2 + 3.0)).abs() < 1e-14);
    }

    #[test]
    fn slope_is_three_over_k_plus_one_times_the_mean_for_any_potential() {
        for k in 3..=16 {
            let c = slope_per_mean_for_potential(k).unwrap();
            assert!((c - 3.0 / (k as f64 + 1.0)).abs() < 1e-14, "k {k}: {c}");
            // And directly, for an arbitrary (non-linear) potential.
            let phi: Vec<f64> = (0..k).map(|m| (m as f64 * 0.7).sin() + 0.1 * (m * m) as f64).collect();
            let delta = from_potential(&phi);
            let (mut dist, mut asym) = (Vec::new(), Vec::new());
            for i in 0..k {
                for j in (i + 1)..k {
                    dist.push((j - i) as f64);
                    asym.push(delta[[i, j]]);
                }
            }
            let mean = asym.iter().sum::<f64>() / asym.len() as f64;
            let slope = least_squares_line(&dist, &asym).unwrap().slope;
            assert!((slope - c * mean).abs() < 1e-12 * (1.0 + mean.abs()), "k {k}: {slope} vs {}", c * mean);
        }
        assert_eq!(slope_per_mean_for_potential(2), None);
    }

    #[test]
    fn a_matrix_that_is_not_antisymmetric_is_refused() {
        let mut m = from_potential(&[0.0, 1.0, 2.0]);
        m[[0, 2]] = 5.0;
        assert!(matches!(
            decompose_asymmetry(&m),
            Err(LinkError::NotAntisymmetric { initial: 0, target: 2, .. })
        ));
    }
}
