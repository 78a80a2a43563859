//! Node controllability metrics on the discrete-time normalisation.

use super::system::System;
use super::{ControlError, TimeModel};
use crate::linalg;
use faer::Mat;
use ndarray::Array1;

/// Per-node controllability metrics.
#[derive(Clone, Debug)]
pub struct NodeMetrics {
    /// Average controllability of each node.
    pub average: Array1<f64>,
    /// Modal controllability of each node (undirected networks only).
    pub modal: Option<Array1<f64>>,
    /// The conventions used, for the output's provenance.
    pub convention: &'static str,
    /// Remarks (e.g. a divergent series).
    pub notes: Vec<String>,
}

/// The convention string written with every metrics table.
pub const METRICS_CONVENTION: &str = "discrete-time normalisation A/(c + lambda_max(A)) whatever the time model; \
average controllability = trace of the infinite-horizon Gramian sum_t A^t e_i e_i' (A')^t with node i the only \
driver; modal controllability = sum_j (1 - lambda_j^2) v_ij^2";

/// Average and modal controllability of every node.
///
/// Both use `Â = A/(c + λ_max(A))`, the discrete-time normalisation of
/// the same connectome and offset as `sys` (Gu et al. 2015, Nat. Commun. 6,
/// 8414; Pasqualetti et al. 2014, IEEE Trans. Control Netw. Syst. 1, 40–52):
///
/// * average controllability, infinite horizon:
///   $$\mathrm{AC}_i = \operatorname{tr}\sum_{t\ge 0} Â^t e_ie_i^\top (Â^\top)^t = \sum_{t\ge0}\|Â^te_i\|^2 = \sum_j \frac{v_{ij}^2}{1-λ_j^2}$$
///   (last form for symmetric Â = VΛVᵀ). Directed networks: the series is
///   summed by doubling, `S_{2m} = S_m + (Â^m)ᵀ S_m Â^m`, to convergence.
///   The horizon convention differs between tools (finite `T` vs ∞); this
///   is the infinite-horizon one of Gu et al. 2015.
/// * modal controllability `φ_i = Σ_j (1 − λ_j²) v_ij²`, defined here for
///   undirected networks only (`None` when directed).
///
/// With `c = 0` the spectral radius of Â is 1 and the average
/// controllability series diverges; the nodes touching that mode get
/// `inf` and a note says so.
///
/// # Errors
/// [`ControlError::Eigen`] only if a decomposition fails.
pub fn node_metrics(sys: &System) -> Result<NodeMetrics, ControlError> {
    let n = sys.n;
    let shift = if sys.params.time_model == TimeModel::Continuous { 1.0 } else { 0.0 };
    let mut notes = Vec::new();
    match &sys.eig {
        Some(e) => {
            let lam: Vec<f64> = e.values.iter().map(|l| l + shift).collect();
            let v = e.vectors.as_ref();
            let mut avg = Array1::zeros(n);
            let mut modal = Array1::zeros(n);
            for i in 0..n {
                let (mut s, mut m) = (0.0, 0.0);
                for (j, &l) in lam.iter().enumerate() {
                    let v2 = v[(i, j)] * v[(i, j)];
                    let gap = 1.0 - l * l;
                    s += if gap > 0.0 {
                        v2 / gap
                    } else if v2 > 0.0 {
                        f64::INFINITY
                    } else {
                        0.0
                    };
                    m += gap * v2;
                }
                avg[i] = s;
                modal[i] = m;
            }
            if avg.iter().any(|v| v.is_infinite()) {
                notes.push(
                    "stability offset 0 puts a mode on |lambda| = 1: average controllability diverges (inf)"
                        .into(),
                );
            }
            Ok(NodeMetrics { average: avg, modal: Some(modal), convention: METRICS_CONVENTION, notes })
        }
        None => {
            let a = Mat::from_fn(n, n, |i, j| sys.a[(i, j)] + if i == j { shift } else { 0.0 });
            let par = sys.par;
            // S_1 = I, P = Â; S_{2m} = S_m + Pᵀ S_m P, P ← P².
            let mut s = Mat::<f64>::identity(n, n);
            let mut p = a;
            let mut converged = false;
            for _ in 0..64 {
                let sp = linalg::mul(s.as_ref(), p.as_ref(), par);
                let add = linalg::mul(p.as_ref().transpose(), sp.as_ref(), par);
                let tr_add: f64 = (0..n).map(|i| add[(i, i)]).sum();
                let tr_s: f64 = (0..n).map(|i| s[(i, i)]).sum();
                s += &add;
                if tr_add <= 1e-17 * tr_s {
                    converged = true;
                    break;
                }
                p = linalg::mul(p.as_ref(), p.as_ref(), par);
            }
            let mut avg = Array1::from_iter((0..n).map(|i| s[(i, i)]));
            if !converged {
                avg.fill(f64::INFINITY);
                notes.push(
                    "average controllability series did not converge (spectral radius 1); reported as inf"
                        .into(),
                );
            }
            notes.push(
                "modal controllability is defined here for undirected networks only; not computed".into(),
            );
            Ok(NodeMetrics { average: avg, modal: None, convention: METRICS_CONVENTION, notes })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::control::SystemParams;
    use faer::Par;
    use ndarray::array;

    #[test]
    fn average_controllability_equals_a_truncated_power_series() {
        // Definition (Gu et al. 2015): Σ_t ‖Â^t e_i‖², truncated at 2000 terms
        // (ρ(Â) = 1/2 here, so the tail is below 1e-600).
        let a = array![[0.0, 1.0, 0.3], [1.0, 0.0, 0.6], [0.3, 0.6, 0.0]];
        for directed in [false, true] {
            let vp = SystemParams::new().check(3).unwrap();
            let sys = System::new(a.view(), directed, &vp, Par::Seq).unwrap();
            let m = node_metrics(&sys).unwrap();
            let ah = a.clone() / (1.0 + sys.spectral_radius());
            let mut p = ndarray::Array2::<f64>::eye(3);
            let mut sum = ndarray::Array1::<f64>::zeros(3);
            for _ in 0..2000 {
                for i in 0..3 {
                    sum[i] += p.column(i).dot(&p.column(i));
                }
                p = ah.dot(&p);
            }
            for i in 0..3 {
                assert!(
                    (m.average[i] - sum[i]).abs() < 1e-13 * sum[i],
                    "{directed}: {} vs {}",
                    m.average[i],
                    sum[i]
                );
            }
            assert_eq!(m.modal.is_some(), !directed);
        }
    }
}
