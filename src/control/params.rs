//! Parameters of a linear control system, checked once at the boundary.

use super::ControlError;
use serde::Serialize;

/// Continuous time `dx/dt = Ãx + Bu` or discrete time `x_{t+1} = Ãx_t + Bu_t`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, serde::Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
#[cfg_attr(feature = "cli", derive(clap::ValueEnum))]
pub enum TimeModel {
    /// dx/dt = Ãx + Bu with Ã = A/(c + λmax(A)) − I (default).
    #[default]
    Continuous,
    /// x(t+1) = Ãx(t) + Bu(t) with Ã = A/(c + λmax(A)); the horizon counts steps.
    Discrete,
}

/// Which nodes receive input, as the diagonal of `B`.
#[derive(Clone, Debug, PartialEq, Serialize, serde::Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Drivers {
    /// Every node, `B = I` (default).
    #[default]
    All,
    /// The listed nodes (0-based), weight 1 each.
    Nodes(Vec<usize>),
    /// One non-negative weight per node, `B = diag(w)`.
    Weights(Vec<f64>),
}

/// Unchecked system parameters. Build with [`SystemParams::new`], adjust the
/// fields, then call [`SystemParams::check`].
#[derive(Clone, Debug, Serialize, serde::Deserialize)]
pub struct SystemParams {
    /// Time model.
    pub time_model: TimeModel,
    /// Horizon `T`: time units for continuous, number of steps for discrete.
    pub horizon: f64,
    /// Stability offset `c` in `A / (c + λ_max(A))`.
    pub stability_offset: f64,
    /// Driver nodes.
    pub drivers: Drivers,
}

impl Default for SystemParams {
    fn default() -> Self {
        SystemParams::new()
    }
}

impl SystemParams {
    /// Defaults: continuous time, horizon `T = 1`, stability offset `c = 1`,
    /// all nodes as drivers. (T = 1 and c = 1 are common practice in the
    /// network-control literature, e.g. Karrer et al. 2020 use c = 1; no single source fixes T.)
    pub fn new() -> Self {
        SystemParams {
            time_model: TimeModel::Continuous,
            horizon: 1.0,
            stability_offset: 1.0,
            drivers: Drivers::All,
        }
    }

    /// Check every field for a network of `n` nodes.
    ///
    /// # Errors
    /// [`ControlError::Param`] when the horizon is not finite and > 0 (a whole
    /// number ≥ 1 in discrete time), or the offset is not finite and ≥ 0;
    /// [`ControlError::Drivers`] for an empty driver set, an index outside
    /// `0..n`, a repeated index, or weights of the wrong length, negative or
    /// non-finite.
    pub fn check(&self, n: usize) -> Result<ValidSystemParams, ControlError> {
        let t = self.horizon;
        if !(t.is_finite() && t > 0.0) {
            return Err(ControlError::param("horizon", t, "a finite number > 0"));
        }
        if self.time_model == TimeModel::Discrete && !(t >= 1.0 && t.fract() == 0.0 && t <= 1e7) {
            return Err(ControlError::param("horizon", t, "a whole number of steps >= 1 for discrete time"));
        }
        let c = self.stability_offset;
        if !(c.is_finite() && c >= 0.0) {
            return Err(ControlError::param("stability_offset", c, "a finite number >= 0"));
        }
        let weights: Vec<f64> = match &self.drivers {
            Drivers::All => vec![1.0; n],
            Drivers::Nodes(list) => {
                if list.is_empty() {
                    return Err(ControlError::Drivers(
                        "the driver set is empty; expected at least one node".into(),
                    ));
                }
                let mut w = vec![0.0; n];
                for &i in list {
                    if i >= n {
                        return Err(ControlError::Drivers(format!(
                            "node {} is outside the network of {n} nodes (nodes are numbered 1..={n})",
                            i + 1
                        )));
                    }
                    if w[i] != 0.0 {
                        return Err(ControlError::Drivers(format!("node {} is listed twice", i + 1)));
                    }
                    w[i] = 1.0;
                }
                w
            }
            Drivers::Weights(w) => {
                if w.len() != n {
                    return Err(ControlError::Drivers(format!(
                        "expected one weight for each of {n} nodes, found {}",
                        w.len()
                    )));
                }
                if let Some(i) = w.iter().position(|v| !(v.is_finite() && *v >= 0.0)) {
                    return Err(ControlError::Drivers(format!(
                        "expected finite weights >= 0, found {} at node {}",
                        w[i],
                        i + 1
                    )));
                }
                if w.iter().all(|v| *v == 0.0) {
                    return Err(ControlError::Drivers("every weight is 0; the driver set is empty".into()));
                }
                w.clone()
            }
        };
        Ok(ValidSystemParams {
            time_model: self.time_model,
            horizon: t,
            stability_offset: c,
            identity_input: matches!(self.drivers, Drivers::All),
            input_weights: weights,
            unchecked: self.clone(),
        })
    }
}

/// Checked system parameters; only this type builds a [`super::System`].
#[derive(Clone, Debug, Serialize)]
pub struct ValidSystemParams {
    pub(crate) time_model: TimeModel,
    pub(crate) horizon: f64,
    pub(crate) stability_offset: f64,
    /// `B = I` exactly (enables the eigenbasis route).
    pub(crate) identity_input: bool,
    /// Diagonal of `B`.
    pub(crate) input_weights: Vec<f64>,
    #[serde(skip)]
    pub(crate) unchecked: SystemParams,
}

impl ValidSystemParams {
    /// Time model.
    pub fn time_model(&self) -> TimeModel {
        self.time_model
    }
    /// Horizon `T`.
    pub fn horizon(&self) -> f64 {
        self.horizon
    }
    /// Stability offset `c`.
    pub fn stability_offset(&self) -> f64 {
        self.stability_offset
    }
    /// Diagonal of `B`, one weight per node.
    pub fn input_weights(&self) -> &[f64] {
        &self.input_weights
    }
    /// The parameters as given.
    pub fn params(&self) -> &SystemParams {
        &self.unchecked
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_parameters_are_rejected_with_their_value() {
        let mut p = SystemParams::new();
        p.horizon = 0.0;
        assert!(p.check(3).unwrap_err().to_string().contains("horizon = 0"));
        p.horizon = f64::NAN;
        assert!(p.check(3).is_err());
        p.horizon = 2.5;
        p.time_model = TimeModel::Discrete;
        assert!(p.check(3).unwrap_err().to_string().contains("whole number"));
        let mut p = SystemParams::new();
        p.stability_offset = -1.0;
        assert!(p.check(3).unwrap_err().to_string().contains("stability_offset = "));
        let mut p = SystemParams::new();
        p.drivers = Drivers::Nodes(vec![]);
        assert!(p.check(3).unwrap_err().to_string().contains("empty"));
        p.drivers = Drivers::Nodes(vec![3]);
        assert!(p.check(3).unwrap_err().to_string().contains("node 4 is outside"));
        p.drivers = Drivers::Weights(vec![1.0, -1.0, 0.0]);
        assert!(p.check(3).unwrap_err().to_string().contains("-1 at node 2"));
        p.drivers = Drivers::Weights(vec![0.0; 3]);
        assert!(p.check(3).is_err());
        p.drivers = Drivers::Nodes(vec![0, 2]);
        assert_eq!(p.check(3).unwrap().input_weights(), &[1.0, 0.0, 1.0]);
    }
}
