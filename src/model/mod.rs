//! What is being solved: the sample's geometry, its ends, its initial state, the diffusivity law
//! and the source terms of
//!
//! ```text
//!   ∂u/∂t = (1/r^s) ∂/∂r ( r^s D(u) ∂u/∂r ) − m (u − u_env) − k u,     s = 0, 1, 2
//! ```
//!
//! on a ≤ r ≤ b (slab: 0 ≤ x ≤ L, s = 0; cylinder s = 1; sphere s = 2). u is a concentration or
//! a temperature; D is in m²/s, m and k in 1/s, lengths in m, times in s. Everything here is SI
//! and plain data: the model knows nothing of files, and the solver ([`crate::solver`]) knows
//! nothing of where the model came from.

mod boundary;
mod diffusivity;
mod signal;

pub use boundary::EndCondition;
pub use diffusivity::DiffusivityLaw;
pub use signal::Signal;

use crate::error::{Error, Result};

/// The coordinate system: s = 0, 1, 2 in the equation above.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Plane sheet (slab), coordinate x from 0 to the total thickness. Amounts are per unit area.
    Slab,
    /// Cylinder, radial coordinate r. Amounts are per unit length.
    Cylinder,
    /// Sphere, radial coordinate r. Amounts are totals.
    Sphere,
}

impl Shape {
    /// The exponent s (0 slab, 1 cylinder, 2 sphere).
    pub fn exponent(self) -> i32 {
        match self {
            Shape::Slab => 0,
            Shape::Cylinder => 1,
            Shape::Sphere => 2,
        }
    }

    /// The factor that turns ∫ r^s u dr into an amount: 1 (per area), 2π (per length), 4π.
    pub fn measure_factor(self) -> f64 {
        match self {
            Shape::Slab => 1.0,
            Shape::Cylinder => 2.0 * std::f64::consts::PI,
            Shape::Sphere => 4.0 * std::f64::consts::PI,
        }
    }
}

/// One layer of the sample, from the inner (left) end outwards.
#[derive(Debug, Clone, PartialEq)]
pub struct Layer {
    /// Layer thickness, m.
    pub thickness: f64,
    /// Diffusivity law of this layer.
    pub diffusivity: DiffusivityLaw,
    /// Partition ratio K at this layer's outer interface with the next layer: in equilibrium
    /// u_next = K u_this. Ignored for the last layer. 1 means no jump.
    pub partition_to_next: f64,
}

impl Layer {
    /// A layer of given thickness (m) and constant diffusivity (m²/s).
    pub fn new(thickness: f64, diffusivity: f64) -> Self {
        Layer {
            thickness,
            diffusivity: DiffusivityLaw::constant(diffusivity),
            partition_to_next: 1.0,
        }
    }
}

/// The sample: shape, where it starts and its layers.
#[derive(Debug, Clone, PartialEq)]
pub struct Geometry {
    /// Coordinate system.
    pub shape: Shape,
    /// Inner radius a, m (0 for a solid cylinder or sphere, where r = 0 is a symmetry centre;
    /// must be 0 for a slab).
    pub inner_radius: f64,
    /// Layers from the inner (left) end outwards; at least one.
    pub layers: Vec<Layer>,
}

impl Geometry {
    /// A uniform slab of thickness L (m) with constant D (m²/s).
    pub fn slab(thickness: f64, diffusivity: f64) -> Self {
        Geometry {
            shape: Shape::Slab,
            inner_radius: 0.0,
            layers: vec![Layer::new(thickness, diffusivity)],
        }
    }

    /// A solid cylinder or sphere of radius R (m) with constant D (m²/s).
    pub fn solid(shape: Shape, radius: f64, diffusivity: f64) -> Self {
        Geometry {
            shape,
            inner_radius: 0.0,
            layers: vec![Layer::new(radius, diffusivity)],
        }
    }

    /// A hollow cylinder or sphere between two radii (m) with constant D (m²/s).
    pub fn hollow(shape: Shape, inner: f64, outer: f64, diffusivity: f64) -> Self {
        Geometry {
            shape,
            inner_radius: inner,
            layers: vec![Layer::new(outer - inner, diffusivity)],
        }
    }

    /// Total thickness (outer minus inner coordinate), m.
    pub fn thickness(&self) -> f64 {
        self.layers.iter().map(|l| l.thickness).sum()
    }

    /// Coordinate of the outer (right) end, m.
    pub fn outer(&self) -> f64 {
        self.inner_radius + self.thickness()
    }

    /// True when the left end is a symmetry centre (solid cylinder or sphere).
    pub fn has_centre(&self) -> bool {
        self.shape != Shape::Slab && self.inner_radius == 0.0
    }

    /// The volume measure ∫ r^s dr × factor between the ends: m (slab, per area), m² (cylinder,
    /// per length), m³ (sphere).
    pub fn volume(&self) -> f64 {
        let s = self.shape.exponent() + 1;
        let (a, b) = (self.inner_radius, self.outer());
        self.shape.measure_factor() * (b.powi(s) - a.powi(s)) / s as f64
    }
}

/// Which end of the sample.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum End {
    /// x = 0 or r = inner radius (the centre of a solid body).
    Left,
    /// x = L or r = outer radius.
    Right,
}

/// The state at t = 0.
#[derive(Debug, Clone, PartialEq)]
pub enum Initial {
    /// The same value everywhere.
    Uniform(f64),
    /// Rows of (position in m, value), interpolated linearly and held outside the range.
    Table(Vec<(f64, f64)>),
}

impl Initial {
    /// The initial value at position `x` (m).
    pub fn at(&self, x: f64) -> f64 {
        match self {
            Initial::Uniform(v) => *v,
            Initial::Table(rows) => signal::interpolate(rows, x),
        }
    }
}

/// Volume terms −m (u − u_env) − k u.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Sources {
    /// Linear exchange rate m, 1/s (lateral heat loss of a rod: m = h P / (ρ c_p A)).
    pub exchange_rate: f64,
    /// The value exchanged with, u_env (ambient temperature).
    pub exchange_value: f64,
    /// First-order uptake/reaction rate k, 1/s.
    pub reaction_rate: f64,
}

impl Sources {
    /// True when there are no volume terms.
    pub fn is_none(&self) -> bool {
        self.exchange_rate == 0.0 && self.reaction_rate == 0.0
    }
}

/// A complete forward model, in SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    /// The sample.
    pub geometry: Geometry,
    /// Condition at the left end (ignored and treated as a symmetry centre for solid bodies).
    pub left: EndCondition,
    /// Condition at the right end.
    pub right: EndCondition,
    /// State at t = 0.
    pub initial: Initial,
    /// Volume terms.
    pub sources: Sources,
}

impl Model {
    /// A model with no volume terms.
    pub fn new(
        geometry: Geometry,
        left: EndCondition,
        right: EndCondition,
        initial: Initial,
    ) -> Self {
        Model {
            geometry,
            left,
            right,
            initial,
            sources: Sources::default(),
        }
    }

    /// The condition at one end.
    pub fn end(&self, end: End) -> &EndCondition {
        match end {
            End::Left => &self.left,
            End::Right => &self.right,
        }
    }

    /// True when the discrete problem is linear in u (every layer has constant D).
    pub fn is_linear(&self) -> bool {
        self.geometry
            .layers
            .iter()
            .all(|l| l.diffusivity.is_constant())
    }

    /// Reject physically meaningless settings with an error naming the setting.
    pub fn validate(&self) -> Result<()> {
        let g = &self.geometry;
        if g.layers.is_empty() {
            return Err(Error::setting(
                "layers",
                "the sample needs at least one layer",
            ));
        }
        for (i, layer) in g.layers.iter().enumerate() {
            let name = format!("layers[{i}]");
            if !(layer.thickness.is_finite() && layer.thickness > 0.0) {
                return Err(Error::setting(
                    format!("{name}.thickness"),
                    format!("must be a positive length in m, found {}", layer.thickness),
                ));
            }
            layer.diffusivity.validate(&format!("{name}.diffusivity"))?;
            if i + 1 < g.layers.len()
                && !(layer.partition_to_next.is_finite() && layer.partition_to_next > 0.0)
            {
                return Err(Error::setting(
                    format!("{name}.partition_to_next"),
                    format!(
                        "must be a positive number, found {}",
                        layer.partition_to_next
                    ),
                ));
            }
        }
        match g.shape {
            Shape::Slab => {
                if g.inner_radius != 0.0 {
                    return Err(Error::setting(
                        "inner_radius",
                        "a slab has no inner radius; give 0 or leave it out",
                    ));
                }
            }
            _ => {
                if !(g.inner_radius.is_finite() && g.inner_radius >= 0.0) {
                    return Err(Error::setting(
                        "inner_radius",
                        format!(
                            "must be zero or a positive length in m, found {}",
                            g.inner_radius
                        ),
                    ));
                }
            }
        }
        if g.has_centre() && self.left != EndCondition::Sealed {
            return Err(Error::setting(
                "ends.left",
                "the left end of a solid cylinder or sphere is its centre, a symmetry point: \
                 it cannot take a value, flux or transfer condition (leave it sealed, or give an \
                 inner radius for a hollow body)",
            ));
        }
        self.left.validate("ends.left")?;
        self.right.validate("ends.right")?;
        if let Initial::Table(rows) = &self.initial {
            if rows.is_empty() {
                return Err(Error::setting("initial", "initial table has no rows"));
            }
            for (i, &(x, v)) in rows.iter().enumerate() {
                if !x.is_finite() || !v.is_finite() {
                    return Err(Error::setting(
                        "initial",
                        format!("row {}: position and value must be finite", i + 1),
                    ));
                }
                if i > 0 && x <= rows[i - 1].0 {
                    return Err(Error::setting(
                        "initial",
                        format!("row {}: positions must increase", i + 1),
                    ));
                }
            }
        } else if let Initial::Uniform(v) = self.initial {
            if !v.is_finite() {
                return Err(Error::setting(
                    "initial",
                    format!("must be finite, found {v}"),
                ));
            }
        }
        let s = &self.sources;
        for (name, v) in [
            ("exchange_rate", s.exchange_rate),
            ("reaction_rate", s.reaction_rate),
        ] {
            if !(v.is_finite() && v >= 0.0) {
                return Err(Error::setting(
                    name,
                    format!("must be zero or a positive rate in 1/s, found {v}"),
                ));
            }
        }
        if !s.exchange_value.is_finite() {
            return Err(Error::setting("exchange_value", "must be finite"));
        }
        Ok(())
    }

    /// The uniform-per-layer equilibrium the sample settles to, when one exists and is known
    /// from the settings alone: each exposed end must hold a constant value (fixed, or K u_out
    /// of a transfer) and there must be no volume terms. Returns the value in each layer
    /// (values jump by the partition ratios at interfaces).
    pub fn equilibrium(&self) -> Result<Vec<f64>> {
        let layers = &self.geometry.layers;
        let none = || {
            Error::setting(
                "equilibrium",
                "no equilibrium is known from the settings (an end holds a flux or a \
                 time-varying value, volume terms are present, or both ends are sealed): give \
                 the equilibrium value explicitly",
            )
        };
        if !self.sources.is_none() {
            return Err(none());
        }
        // Cumulative partition from layer 0 to layer i.
        let mut factor = vec![1.0; layers.len()];
        for i in 1..layers.len() {
            factor[i] = factor[i - 1] * layers[i - 1].partition_to_next;
        }
        let last = factor[layers.len() - 1];
        let left = if self.geometry.has_centre() {
            None
        } else if self.left.is_exposed() {
            Some(self.left.equilibrium_value().ok_or_else(none)?)
        } else {
            None
        };
        let right = if self.right.is_exposed() {
            Some(self.right.equilibrium_value().ok_or_else(none)? / last)
        } else {
            None
        };
        let base = match (left, right) {
            (Some(a), Some(b)) => {
                if (a - b).abs() > 1e-12 * a.abs().max(b.abs()) {
                    return Err(Error::setting(
                        "equilibrium",
                        "the two ends hold different values: the sample reaches a steady \
                         profile, not a uniform equilibrium",
                    ));
                }
                a
            }
            (Some(a), None) | (None, Some(a)) => a,
            (None, None) => return Err(none()),
        };
        Ok(factor.iter().map(|f| base * f).collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn film() -> Model {
        Model::new(
            Geometry::slab(1e-4, 1e-12),
            EndCondition::value(1.0),
            EndCondition::value(1.0),
            Initial::Uniform(0.0),
        )
    }

    #[test]
    fn accepts_a_plain_film() {
        assert!(film().validate().is_ok());
        assert_eq!(film().equilibrium().unwrap(), vec![1.0]);
    }

    #[test]
    fn rejects_meaningless_settings_by_name() {
        let mut m = film();
        m.geometry.layers[0].thickness = -1e-4;
        let e = m.validate().unwrap_err().to_string();
        assert!(e.contains("layers[0].thickness"), "{e}");

        let mut m = film();
        m.geometry.layers[0].diffusivity = DiffusivityLaw::constant(0.0);
        assert!(m
            .validate()
            .unwrap_err()
            .to_string()
            .contains("diffusivity"));

        let mut m = film();
        m.geometry = Geometry::solid(Shape::Sphere, 1e-3, 1e-10);
        m.left = EndCondition::flux(1.0);
        assert!(m.validate().unwrap_err().to_string().contains("ends.left"));

        let mut m = film();
        m.geometry = Geometry::hollow(Shape::Cylinder, 2e-3, 1e-3, 1e-10);
        assert!(m.validate().unwrap_err().to_string().contains("thickness"));

        let mut m = film();
        m.right = EndCondition::transfer(-1.0, 1.0, 1.0);
        assert!(m
            .validate()
            .unwrap_err()
            .to_string()
            .contains("ends.right.transfer_coefficient"));
    }

    #[test]
    fn volume_of_shapes() {
        // Closed forms (common practice): πR² per length, 4/3 πR³.
        let c = Geometry::solid(Shape::Cylinder, 2.0, 1.0);
        assert!((c.volume() - std::f64::consts::PI * 4.0).abs() < 1e-12);
        let s = Geometry::solid(Shape::Sphere, 2.0, 1.0);
        assert!((s.volume() - 4.0 / 3.0 * std::f64::consts::PI * 8.0).abs() < 1e-12);
    }

    #[test]
    fn equilibrium_follows_partition_and_refuses_when_unknown() {
        let mut m = film();
        m.geometry.layers = vec![
            Layer {
                partition_to_next: 0.5,
                ..Layer::new(1e-5, 1e-12)
            },
            Layer::new(1e-4, 1e-11),
        ];
        m.right = EndCondition::Sealed;
        assert_eq!(m.equilibrium().unwrap(), vec![1.0, 0.5]);
        m.left = EndCondition::flux(1.0);
        assert!(m.equilibrium().is_err());
    }
}
