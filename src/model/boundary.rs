//! Conditions at the two ends of the sample.
//!
//! Sign convention: a flux J is **positive when it enters the sample**, at either end. Units: if
//! u is an amount per volume (mol/m³, kg/m³), J is amount per area per time (mol/(m² s)); if u is
//! a temperature, J is a temperature rate times length (K m/s), i.e. q/(ρ c_p) for a heat flux q
//! in W/m².

use super::signal::Signal;
use crate::error::{Error, Result};

/// The condition at one end.
#[derive(Debug, Clone, PartialEq)]
pub enum EndCondition {
    /// Fixed value u = u_b(t) (Dirichlet).
    Value(Signal),
    /// Fixed flux J(t) entering the sample (Neumann).
    Flux(Signal),
    /// Surface transfer (Robin): J = h (K u_out(t) − u_surface).
    Transfer {
        /// Transfer coefficient h, m/s (a heat-transfer coefficient divided by ρ c_p).
        coefficient: f64,
        /// Partition (solubility) coefficient K, dimensionless: the surface is in equilibrium
        /// with the outside when u_surface = K u_out.
        partition: f64,
        /// The outside value u_out(t).
        outside: Signal,
    },
    /// No flux (sealed face, insulated end). Also what a symmetry centre is.
    Sealed,
}

impl EndCondition {
    /// A constant fixed value.
    pub fn value(v: f64) -> Self {
        EndCondition::Value(Signal::Constant(v))
    }

    /// A constant flux entering the sample.
    pub fn flux(j: f64) -> Self {
        EndCondition::Flux(Signal::Constant(j))
    }

    /// Surface transfer with constant outside value.
    pub fn transfer(coefficient: f64, partition: f64, outside: f64) -> Self {
        EndCondition::Transfer {
            coefficient,
            partition,
            outside: Signal::Constant(outside),
        }
    }

    /// True when material (or heat) can cross this end.
    pub fn is_exposed(&self) -> bool {
        !matches!(self, EndCondition::Sealed)
    }

    /// The value the sample would settle to at this end if the end alone set it, when that is
    /// constant in time: u_b for a value, K u_out for a transfer; `None` otherwise.
    pub fn equilibrium_value(&self) -> Option<f64> {
        match self {
            EndCondition::Value(Signal::Constant(v)) => Some(*v),
            EndCondition::Transfer {
                partition,
                outside: Signal::Constant(v),
                ..
            } => Some(partition * v),
            _ => None,
        }
    }

    /// The signal inside, if any.
    pub fn signal(&self) -> Option<&Signal> {
        match self {
            EndCondition::Value(s) | EndCondition::Flux(s) => Some(s),
            EndCondition::Transfer { outside, .. } => Some(outside),
            EndCondition::Sealed => None,
        }
    }

    /// Check the condition; `name` names the setting (for example `ends.left`).
    pub fn validate(&self, name: &str) -> Result<()> {
        match self {
            EndCondition::Value(s) => s.validate(&format!("{name}.value")),
            EndCondition::Flux(s) => s.validate(&format!("{name}.flux")),
            EndCondition::Transfer {
                coefficient,
                partition,
                outside,
            } => {
                if !(coefficient.is_finite() && *coefficient > 0.0) {
                    return Err(Error::setting(
                        format!("{name}.transfer_coefficient"),
                        format!("must be a positive finite number of m/s, found {coefficient} (use a sealed end for no transfer)"),
                    ));
                }
                if !(partition.is_finite() && *partition > 0.0) {
                    return Err(Error::setting(
                        format!("{name}.partition"),
                        format!("must be a positive finite number, found {partition}"),
                    ));
                }
                outside.validate(&format!("{name}.outside"))
            }
            EndCondition::Sealed => Ok(()),
        }
    }
}
