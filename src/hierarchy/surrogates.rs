//! One entry point for spatially constrained surrogate maps, so that the
//! per-subject job, the `surrogates` command and any new method share one
//! list and one dispatch.

use super::{
    moran_surrogates, spin_surrogates, variogram_surrogates, HierarchyError, MoranBasis, MoranMethod,
    MoranParams, SphereLayout, SpinParams, VariogramModel, VariogramParams,
};
use ndarray::Array2;

/// The spatial input a surrogate method needs besides the map.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SpatialNeed {
    /// Parcel centroids on the sphere.
    Sphere,
    /// A region-to-region distance matrix.
    Distances,
}

impl SpatialNeed {
    /// The input's name in messages (`sphere`, `distances`).
    pub fn name(self) -> &'static str {
        match self {
            SpatialNeed::Sphere => "sphere",
            SpatialNeed::Distances => "distances",
        }
    }
}

/// The spatial inputs a surrogate method may use.
#[derive(Clone, Copy, Debug, Default)]
pub struct SpatialInputs<'a> {
    /// Parcel layout on the sphere (spin).
    pub sphere: Option<&'a SphereLayout>,
    /// Region-to-region distances (variogram, Moran).
    pub distances: Option<&'a Array2<f64>>,
}

/// A surrogate method, defined once.
#[derive(Clone, Copy)]
pub struct SurrogateDef {
    /// The name used in outputs and on the command line.
    pub label: &'static str,
    /// One line with its source, for `--help`.
    pub summary: &'static str,
    /// The null hypothesis a test against these surrogates examines.
    pub hypothesis: &'static str,
    /// What it needs besides the map.
    pub needs: SpatialNeed,
    /// `count` surrogates of the map (regions × count), seeded, with the
    /// method's defaults; the spatial input it needs is present.
    pub make: MakeSurrogates,
}

/// `(map, spatial inputs, count, seed) -> regions × count surrogates`.
pub type MakeSurrogates = fn(&[f64], SpatialInputs<'_>, usize, u64) -> Result<Array2<f64>, HierarchyError>;

/// Rotations on the sphere (Alexander-Bloch et al. 2018; Váša et al. 2018).
pub const SPIN: SurrogateDef = SurrogateDef {
    label: "spin",
    summary: "Rotations of parcel centroids on the sphere (Alexander-Bloch et al. 2018; Váša et al. 2018); \
              needs sphere coordinates",
    hypothesis: "the statistic is no more extreme than for the same map rotated on the sphere: spatial \
                 autocorrelation and the value distribution are kept, the map's placement relative to the \
                 network is destroyed. Spin p-values run slightly liberal at about 50 parcels per hemisphere \
                 (about 6 % below 0.05 at alpha = 0.05 for independent smooth fields, in our simulations)",
    needs: SpatialNeed::Sphere,
    make: |map, spatial, count, seed| {
        let layout = spatial.sphere.expect("checked by surrogate_maps");
        Ok(spin_surrogates(map, layout, &SpinParams::new(count, seed))?.surrogates)
    },
};

/// Variogram-matched surrogates (Burt et al. 2020).
pub const VARIOGRAM: SurrogateDef = SurrogateDef {
    label: "variogram",
    summary: "Variogram-matched surrogates (Burt et al. 2020); needs a distance matrix",
    hypothesis: "the statistic is no more extreme than for random maps with the same variogram (spatial \
                 autocorrelation, measured after rank-matching to the map's values) and the same values",
    needs: SpatialNeed::Distances,
    make: |map, spatial, count, seed| {
        let d = spatial.distances.expect("checked by surrogate_maps");
        let vp = VariogramParams::new(count, seed);
        let model = VariogramModel::new(d, &vp)?;
        Ok(variogram_surrogates(map, &model, &vp)?.surrogates)
    },
};

/// Moran spectral randomisation (Wagner & Dray 2015).
pub const MORAN: SurrogateDef = SurrogateDef {
    label: "moran",
    summary:
        "Moran spectral randomisation (Wagner & Dray 2015); needs a distance matrix, whose inverse gives \
              the spatial weights",
    hypothesis: "the statistic is no more extreme than for random maps with the same Moran's I structure \
                 (coefficients on the spatial eigenvectors randomised)",
    needs: SpatialNeed::Distances,
    make: |map, spatial, count, seed| {
        let d = spatial.distances.expect("checked by surrogate_maps");
        let basis = MoranBasis::new(&inverse_distance_weights(d))?;
        // Singleton randomisation keeps Moran's I exactly (Wagner & Dray 2015).
        let p = MoranParams { method: MoranMethod::Singleton, ..MoranParams::new(count, seed) };
        Ok(moran_surrogates(map, &basis, &p)?.surrogates)
    },
};

/// Every surrogate method, in documentation order. Adding one: its
/// [`SurrogateDef`] (in its own file of this module) and one line here.
pub const REGISTRY: &[&SurrogateDef] = &[&SPIN, &VARIOGRAM, &MORAN];

crate::registry::method_handle!(
    /// A surrogate method: a handle on its definition in [`REGISTRY`].
    /// Named by [`SurrogateMethod::named`] (`SurrogateMethod::named("spin")`);
    /// the default is the first, `spin`.
    SurrogateMethod,
    SurrogateDef,
    REGISTRY,
    label,
    "surrogate method"
);

impl SurrogateMethod {
    /// The name used in outputs and on the command line.
    pub fn label(self) -> &'static str {
        self.def().label
    }

    /// The null hypothesis a test against these surrogates examines.
    pub fn hypothesis(self) -> &'static str {
        self.def().hypothesis
    }

    /// What the method needs besides the map.
    pub fn needs(self) -> SpatialNeed {
        self.def().needs
    }
}

/// `count` surrogates of `map` (regions × count) by `method`, seeded.
///
/// # Errors
/// [`HierarchyError::Invalid`] naming the missing spatial input, or the
/// method's own error.
pub fn surrogate_maps(
    method: SurrogateMethod,
    map: &[f64],
    spatial: SpatialInputs<'_>,
    count: usize,
    seed: u64,
) -> Result<Array2<f64>, HierarchyError> {
    let need = method.needs();
    let present = match need {
        SpatialNeed::Sphere => spatial.sphere.is_some(),
        SpatialNeed::Distances => spatial.distances.is_some(),
    };
    if !present {
        return Err(HierarchyError::invalid(
            need.name(),
            format!("{method} surrogates need {}", need.name()),
        ));
    }
    (method.def().make)(map, spatial, count, seed)
}

/// Spatial weights $w_{ij}=1/d_{ij}$ ($i\ne j$), zero diagonal: the common
/// choice for Moran spectral randomisation of cortical maps (common practice,
/// no single source).
pub fn inverse_distance_weights(d: &Array2<f64>) -> Array2<f64> {
    Array2::from_shape_fn(d.dim(), |(i, j)| if i != j && d[[i, j]] > 0.0 { 1.0 / d[[i, j]] } else { 0.0 })
}
