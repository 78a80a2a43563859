//! The normalised linear system, its state-transition matrix and Gramian.

use super::{ControlError, TimeModel, ValidSystemParams};
use crate::linalg::{self, SymEig};
use faer::{Mat, MatRef, Par};
use ndarray::{Array2, ArrayView2};

/// A linear network control system built from a connectome.
///
/// Continuous time: `dx/dt = Ãx + Bu`, `Ã = A / (c + λ_max(A)) − I`.
/// Discrete time: `x_{t+1} = Ãx_t + Bu_t`, `Ã = A / (c + λ_max(A))`.
/// `λ_max(A)` is the spectral radius (largest |eigenvalue|) and `c` the
/// stability offset (Karrer et al. 2020, J. Neural Eng. 17, 026031).
/// `B = diag(w)` holds the driver weights.
///
/// For an undirected network one symmetric eigendecomposition of `A` is
/// made here and reused by every later computation (the normalisation only
/// shifts and scales the eigenvalues).
#[derive(Clone, Debug)]
pub struct System {
    pub(crate) params: ValidSystemParams,
    pub(crate) n: usize,
    /// Ã.
    pub(crate) a: Mat<f64>,
    /// Eigendecomposition of Ã (undirected networks only).
    pub(crate) eig: Option<SymEig>,
    /// λ_max(A), the spectral radius of the input matrix.
    pub(crate) spectral_radius: f64,
    /// Diagonal of B Bᵀ.
    pub(crate) b2: Vec<f64>,
    pub(crate) par: Par,
}

impl System {
    /// Build the system from a connectome `adjacency` (`A[i, j]` is the
    /// weight from node `j` to node `i`).
    ///
    /// `par` is the parallelism of every dense kernel this system runs
    /// (`Par::Seq` inside a parallel loop over networks). Thread count can
    /// change the last bits of results.
    ///
    /// # Errors
    /// [`ControlError::Connectome`] when the matrix is not square, has
    /// non-finite or negative weights, is asymmetric while `directed` is
    /// false (relative tolerance 1e-10), has a node with no connection, or
    /// its size differs from the one `params` were checked for;
    /// [`ControlError::Eigen`] when an eigendecomposition fails.
    pub fn new(
        adjacency: ArrayView2<'_, f64>,
        directed: bool,
        params: &ValidSystemParams,
        par: Par,
    ) -> Result<System, ControlError> {
        let (r, c) = adjacency.dim();
        if r != c {
            return Err(ControlError::Connectome(format!("expected a square matrix, found {r} x {c}")));
        }
        let n = r;
        if n == 0 {
            return Err(ControlError::Connectome("expected at least 1 node, found 0".into()));
        }
        if params.input_weights.len() != n {
            return Err(ControlError::Connectome(format!(
                "has {n} nodes but the parameters were checked for {}",
                params.input_weights.len()
            )));
        }
        if let Some(((i, j), v)) = adjacency.indexed_iter().find(|(_, v)| !(v.is_finite() && **v >= 0.0)) {
            return Err(ControlError::Connectome(format!(
                "expected finite, non-negative weights, found {v} at row {}, column {}",
                i + 1,
                j + 1
            )));
        }
        if !directed {
            let scan = crate::linalg::asymmetry(adjacency);
            if scan.largest > 1e-10 * scan.scale {
                let (i, j) = scan.at;
                return Err(ControlError::Connectome(format!(
                    "declared undirected but entries ({}, {}) and ({}, {}) differ; declare it directed",
                    i + 1,
                    j + 1,
                    j + 1,
                    i + 1
                )));
            }
        }
        if let Some(i) =
            (0..n).find(|&i| (0..n).all(|j| i == j || (adjacency[[i, j]] == 0.0 && adjacency[[j, i]] == 0.0)))
        {
            return Err(ControlError::Connectome(format!(
                "node {} has no connection to any other node; a disconnected node cannot take part in \
                 network control (remove it or use a parcellation without it)",
                i + 1
            )));
        }
        let cst = params.stability_offset;
        let shift = if params.time_model == TimeModel::Continuous { 1.0 } else { 0.0 };
        let (a, eig, rho) = if directed {
            let am = linalg::to_faer(adjacency);
            let rho = linalg::spectral_radius_general(am.as_ref(), par)
                .map_err(|e| ControlError::Eigen(format!("{e:?}")))?;
            let d = cst + rho;
            let a = Mat::from_fn(n, n, |i, j| am[(i, j)] / d - if i == j { shift } else { 0.0 });
            (a, None, rho)
        } else {
            // Symmetrise exactly: the eigensolver reads one triangle only.
            let am = Mat::from_fn(n, n, |i, j| 0.5 * (adjacency[[i, j]] + adjacency[[j, i]]));
            let e = linalg::sym_eig(am.as_ref(), par).map_err(|e| ControlError::Eigen(format!("{e:?}")))?;
            let rho = e.values.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            let d = cst + rho;
            let a = Mat::from_fn(n, n, |i, j| am[(i, j)] / d - if i == j { shift } else { 0.0 });
            let values = e.values.iter().map(|v| v / d - shift).collect();
            (a, Some(SymEig { values, vectors: e.vectors }), rho)
        };
        if (cst + rho).is_nan() || cst + rho <= 0.0 {
            return Err(ControlError::param("stability_offset", cst, "> 0 when the spectral radius is 0"));
        }
        let b2 = params.input_weights.iter().map(|w| w * w).collect();
        Ok(System { params: params.clone(), n, a, eig, spectral_radius: rho, b2, par })
    }

    /// Number of nodes.
    pub fn n(&self) -> usize {
        self.n
    }

    /// The parameters the system was built with.
    pub fn params(&self) -> &ValidSystemParams {
        &self.params
    }

    /// λ_max(A), the spectral radius of the connectome before normalisation.
    pub fn spectral_radius(&self) -> f64 {
        self.spectral_radius
    }

    /// Whether the network is undirected (symmetric Ã, eigenbasis available).
    pub fn is_symmetric(&self) -> bool {
        self.eig.is_some()
    }

    /// Whether the energy asymmetry of this system is exactly a potential
    /// difference: Ã symmetric and every node driven with one equal weight
    /// (`B = βI`). Then `E_ij − E_ji = p_j − p_i` for every horizon, with
    /// `p` from [`super::energy::state_potentials`] (continuous time:
    /// `2(q_i − q_j)/β²` with [`super::state_quadratic_forms`]).
    pub fn asymmetry_is_potential(&self) -> bool {
        let w = &self.params.input_weights;
        self.eig.is_some() && w[0] > 0.0 && w.iter().all(|v| *v == w[0])
    }

    /// The normalised matrix Ã.
    pub fn normalised(&self) -> Array2<f64> {
        linalg::to_nd(self.a.as_ref())
    }

    /// Eigenvalues of Ã, ascending (undirected networks only).
    pub fn eigenvalues(&self) -> Option<&[f64]> {
        self.eig.as_ref().map(|e| e.values.as_slice())
    }

    /// State-transition matrix Φ(t): `e^{Ãt}` in continuous time, `Ã^t` in
    /// discrete time (t a whole number of steps).
    pub fn transition_matrix(&self, t: f64) -> Array2<f64> {
        linalg::to_nd(self.transition_faer(t).as_ref())
    }

    /// Controllability Gramian over `[0, t]`:
    /// $$W_t = \int_0^t e^{Ãs} B B^\top e^{Ã^\top s}\,ds \quad\text{or}\quad W_t = \sum_{s=0}^{t-1} Ã^s B B^\top (Ã^\top)^s.$$
    /// Undirected: closed form `V (G ∘ VᵀBBᵀV) Vᵀ` with
    /// `G_ij = (e^{(λ_i+λ_j)t} − 1)/(λ_i+λ_j)` (`= t` where the sum is 0),
    /// evaluated as `t·expm1(z)/z` for accuracy near 0; discrete
    /// `G_ij = (1 − (λ_iλ_j)^t)/(1 − λ_iλ_j)`. Directed: Van Loan's block
    /// exponential (Van Loan 1978, IEEE Trans. Autom. Control 23, 395–404)
    /// on a short step `h = t/2^s`, then doubling `W_{2h} = W_h + Φ_h W_h Φ_hᵀ`,
    /// which avoids forming the growing `e^{−Ãt}` of the one-shot block.
    pub fn gramian(&self, t: f64) -> Array2<f64> {
        linalg::to_nd(self.gramian_faer(t).as_ref())
    }

    pub(crate) fn transition_faer(&self, t: f64) -> Mat<f64> {
        match (&self.eig, self.params.time_model) {
            (Some(e), tm) => {
                let f: Vec<f64> = e.values.iter().map(|&l| mode_transition(tm, l, t)).collect();
                eig_reconstruct(e, &f, self.par)
            }
            (None, TimeModel::Continuous) => {
                let at = Mat::from_fn(self.n, self.n, |i, j| self.a[(i, j)] * t);
                linalg::expm(at.as_ref(), self.par)
            }
            (None, TimeModel::Discrete) => matrix_power(self.a.as_ref(), t as u64, self.par),
        }
    }

    pub(crate) fn gramian_faer(&self, t: f64) -> Mat<f64> {
        match &self.eig {
            Some(e) => {
                let tm = self.params.time_model;
                if self.params.identity_input {
                    let g: Vec<f64> = e.values.iter().map(|&l| gram_kernel(tm, l, l, t)).collect();
                    eig_reconstruct(e, &g, self.par)
                } else {
                    let v = e.vectors.as_ref();
                    let k = self.input_in_eigenbasis(e);
                    let h = Mat::from_fn(self.n, self.n, |i, j| {
                        gram_kernel(tm, e.values[i], e.values[j], t) * k[(i, j)]
                    });
                    let vh = linalg::mul(v, h.as_ref(), self.par);
                    symmetrise(linalg::mul(vh.as_ref(), v.transpose(), self.par))
                }
            }
            None => {
                let q = Mat::from_fn(self.n, self.n, |i, j| if i == j { self.b2[i] } else { 0.0 });
                match self.params.time_model {
                    TimeModel::Continuous => gramian_van_loan(self.a.as_ref(), q.as_ref(), t, self.par).1,
                    TimeModel::Discrete => gramian_discrete(self.a.as_ref(), q.as_ref(), t as u64, self.par),
                }
            }
        }
    }

    /// `Vᵀ B Bᵀ V`.
    pub(crate) fn input_in_eigenbasis(&self, e: &SymEig) -> Mat<f64> {
        let v = e.vectors.as_ref();
        let bv = Mat::from_fn(self.n, self.n, |i, j| self.b2[i] * v[(i, j)]);
        symmetrise(linalg::mul(v.transpose(), bv.as_ref(), self.par))
    }
}

/// `V diag(f) Vᵀ`.
pub(crate) fn eig_reconstruct(e: &SymEig, f: &[f64], par: Par) -> Mat<f64> {
    let v = e.vectors.as_ref();
    let vf = Mat::from_fn(v.nrows(), v.ncols(), |i, j| v[(i, j)] * f[j]);
    symmetrise(linalg::mul(vf.as_ref(), v.transpose(), par))
}

pub(crate) fn symmetrise(mut m: Mat<f64>) -> Mat<f64> {
    let n = m.nrows();
    for j in 0..n {
        for i in (j + 1)..n {
            let s = 0.5 * (m[(i, j)] + m[(j, i)]);
            m[(i, j)] = s;
            m[(j, i)] = s;
        }
    }
    m
}

/// Transition factor of one mode: `e^{λt}` or `λ^t`.
pub(crate) fn mode_transition(tm: TimeModel, l: f64, t: f64) -> f64 {
    match tm {
        TimeModel::Continuous => (l * t).exp(),
        TimeModel::Discrete => l.powi(t as i32),
    }
}

/// `expm1(z)/z`, equal to 1 at z = 0, accurate for small |z|.
pub(crate) fn phi1(z: f64) -> f64 {
    if z == 0.0 {
        1.0
    } else {
        z.exp_m1() / z
    }
}

/// Gramian kernel of the mode pair (λ_i, λ_j) over horizon t:
/// continuous `∫_0^t e^{(λ_i+λ_j)s} ds = t·expm1(zt)/(zt)`, z = λ_i + λ_j;
/// discrete `Σ_{s<t} (λ_iλ_j)^s`.
pub(crate) fn gram_kernel(tm: TimeModel, li: f64, lj: f64, t: f64) -> f64 {
    match tm {
        TimeModel::Continuous => t * phi1((li + lj) * t),
        TimeModel::Discrete => {
            let q = li * lj;
            let steps = t as i32;
            if q == 1.0 {
                t
            } else if q > 0.5 {
                // (1 − q^t)/(1 − q) = expm1(t ln q)/expm1(ln q): no cancellation near q = 1.
                let lq = q.ln();
                (t * lq).exp_m1() / lq.exp_m1()
            } else {
                (1.0 - q.powi(steps)) / (1.0 - q)
            }
        }
    }
}

/// `A^k` by repeated squaring.
pub(crate) fn matrix_power(a: MatRef<'_, f64>, mut k: u64, par: Par) -> Mat<f64> {
    let n = a.nrows();
    let mut result = Mat::<f64>::identity(n, n);
    let mut base = a.to_owned();
    while k > 0 {
        if k & 1 == 1 {
            result = linalg::mul(result.as_ref(), base.as_ref(), par);
        }
        k >>= 1;
        if k > 0 {
            base = linalg::mul(base.as_ref(), base.as_ref(), par);
        }
    }
    result
}

/// `(e^{At}, ∫_0^t e^{As} Q e^{Aᵀs} ds)` by Van Loan's block exponential
/// on a step `h = t/2^s` with ‖A‖₁h ≤ 1, then `s` doublings.
///
/// Van Loan (1978): `exp([[−A, Q], [0, Aᵀ]] h) = [[F11, F12], [0, F22]]`,
/// `F22 = e^{Aᵀh}`, `∫_0^h e^{As}Qe^{Aᵀs}ds = F22ᵀ F12`.
pub(crate) fn gramian_van_loan(
    a: MatRef<'_, f64>,
    q: MatRef<'_, f64>,
    t: f64,
    par: Par,
) -> (Mat<f64>, Mat<f64>) {
    let n = a.nrows();
    let norm = linalg::norm1(a) * t;
    let s = if norm > 1.0 { norm.log2().ceil() as i32 } else { 0 };
    let h = t / 2f64.powi(s);
    let mut c = Mat::<f64>::zeros(2 * n, 2 * n);
    for j in 0..n {
        for i in 0..n {
            c[(i, j)] = -a[(i, j)] * h;
            c[(i, j + n)] = q[(i, j)] * h;
            c[(i + n, j + n)] = a[(j, i)] * h;
        }
    }
    let f = linalg::expm(c.as_ref(), par);
    let f22t = f.as_ref().submatrix(n, n, n, n).transpose().to_owned();
    let f12 = f.as_ref().submatrix(0, n, n, n);
    let mut w = symmetrise(linalg::mul(f22t.as_ref(), f12, par));
    let mut phi = f22t;
    for _ in 0..s {
        let pw = linalg::mul(phi.as_ref(), w.as_ref(), par);
        let pwp = linalg::mul(pw.as_ref(), phi.as_ref().transpose(), par);
        w = symmetrise(&w + &pwp);
        phi = linalg::mul(phi.as_ref(), phi.as_ref(), par);
    }
    (phi, w)
}

/// `Σ_{s=0}^{k−1} A^s Q (Aᵀ)^s` through the binary digits of `k`, with
/// `W_{2m} = W_m + A^m W_m (A^m)ᵀ` and `W_{m+1} = Q + A W_m Aᵀ`.
pub(crate) fn gramian_discrete(a: MatRef<'_, f64>, q: MatRef<'_, f64>, k: u64, par: Par) -> Mat<f64> {
    let n = a.nrows();
    let mut w = Mat::<f64>::zeros(n, n);
    let mut p = Mat::<f64>::identity(n, n);
    let bits = 64 - k.leading_zeros();
    for b in (0..bits).rev() {
        let pw = linalg::mul(p.as_ref(), w.as_ref(), par);
        w = &w + &linalg::mul(pw.as_ref(), p.as_ref().transpose(), par);
        p = linalg::mul(p.as_ref(), p.as_ref(), par);
        if (k >> b) & 1 == 1 {
            let aw = linalg::mul(a, w.as_ref(), par);
            w = q.to_owned() + linalg::mul(aw.as_ref(), a.transpose(), par);
            p = linalg::mul(a, p.as_ref(), par);
        }
    }
    symmetrise(w)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::control::SystemParams;
    use ndarray::array;

    #[test]
    fn kernel_is_accurate_near_zero_and_matches_the_closed_form() {
        // (e^{zT} − 1)/z → T as z → 0 (l'Hôpital); at z = 1e-12 the naive form loses ~4 digits.
        let g = gram_kernel(TimeModel::Continuous, 5e-13, 5e-13, 2.0);
        assert!((g - 2.0 * (1.0 + 1e-12)).abs() < 1e-15 * 2.0);
        let g = gram_kernel(TimeModel::Continuous, -0.3, -0.2, 1.5);
        let want = ((-0.5f64 * 1.5).exp() - 1.0) / -0.5;
        assert!((g - want).abs() < 1e-15);
        // Discrete: geometric sum Σ_{s<5} q^s for q = 0.9·0.95 and q = −0.4·0.5.
        for (a, b) in [(0.9, 0.95), (-0.4, 0.5)] {
            let q: f64 = a * b;
            let direct: f64 = (0..5).map(|s| q.powi(s)).sum();
            assert!((gram_kernel(TimeModel::Discrete, a, b, 5.0) - direct).abs() < 1e-14);
        }
    }

    #[test]
    fn directed_route_matches_eigenbasis_on_a_symmetric_network() {
        // Same maths, two algorithms: Van Loan doubling vs the closed form.
        let a = array![[0.0, 1.0, 0.5], [1.0, 0.0, 2.0], [0.5, 2.0, 0.0]];
        for tm in [TimeModel::Continuous, TimeModel::Discrete] {
            let mut p = SystemParams::new();
            p.time_model = tm;
            p.horizon = 3.0;
            p.drivers = crate::control::Drivers::Weights(vec![1.0, 0.5, 0.0]);
            let vp = p.check(3).unwrap();
            let sym = System::new(a.view(), false, &vp, Par::Seq).unwrap();
            let dir = System::new(a.view(), true, &vp, Par::Seq).unwrap();
            let (ws, wd) = (sym.gramian(3.0), dir.gramian(3.0));
            let (ps, pd) = (sym.transition_matrix(3.0), dir.transition_matrix(3.0));
            for (x, y) in ws.iter().zip(wd.iter()).chain(ps.iter().zip(pd.iter())) {
                assert!((x - y).abs() < 1e-12, "{tm:?}: {x} vs {y}");
            }
        }
    }

    #[test]
    fn isolated_node_and_asymmetry_are_refused() {
        let vp = SystemParams::new().check(3).unwrap();
        let a = array![[0.0, 1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 0.0]];
        let e = System::new(a.view(), false, &vp, Par::Seq).unwrap_err().to_string();
        assert!(e.contains("node 3 has no connection"), "{e}");
        let a = array![[0.0, 1.0, 1.0], [2.0, 0.0, 1.0], [1.0, 1.0, 0.0]];
        let e = System::new(a.view(), false, &vp, Par::Seq).unwrap_err().to_string();
        assert!(e.contains("declared undirected"), "{e}");
    }
}
