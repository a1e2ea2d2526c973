//! The experiment file as written: serde structs mirroring the TOML keys one to one.
//!
//! Every table rejects keys it does not know (`deny_unknown_fields`); numbers are kept as
//! written ([`Scalar`]) and are converted to SI only in [`super::build`], where the kind of each
//! number is known. The keys are documented in `docs/experiment-file.md`.

use std::collections::BTreeMap;
use std::fmt;

use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::Deserialize;

/// A number as written: a TOML number, or a string holding a number with unit or a parameter
/// name.
#[derive(Debug, Clone, PartialEq)]
pub enum Scalar {
    /// A bare TOML number.
    Number(f64),
    /// A string: `"120 um"` or `"D"`.
    Text(String),
}

struct ScalarVisitor;

impl<'de> Visitor<'de> for ScalarVisitor {
    type Value = Scalar;
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a number, a number with unit such as \"120 um\", or a parameter name")
    }
    fn visit_f64<E: de::Error>(self, v: f64) -> Result<Scalar, E> {
        Ok(Scalar::Number(v))
    }
    fn visit_i64<E: de::Error>(self, v: i64) -> Result<Scalar, E> {
        Ok(Scalar::Number(v as f64))
    }
    fn visit_u64<E: de::Error>(self, v: u64) -> Result<Scalar, E> {
        Ok(Scalar::Number(v as f64))
    }
    fn visit_str<E: de::Error>(self, v: &str) -> Result<Scalar, E> {
        Ok(Scalar::Text(v.to_string()))
    }
}

impl<'de> Deserialize<'de> for Scalar {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(ScalarVisitor)
    }
}

/// A value that may change in time: a scalar (constant or parameter) or a table describing a
/// time table, a periodic signal or a column of a data file.
#[derive(Debug, Clone, PartialEq)]
pub enum SignalSpec {
    /// Constant or parameter.
    Scalar(Scalar),
    /// One of the table forms.
    Table(Box<SignalTable>),
}

/// The table forms of a signal; exactly one group of keys is used.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SignalTable {
    /// Time table: rows `[time, value]`.
    pub rows: Option<Vec<[f64; 2]>>,
    /// Unit of the times of `rows` (required with `rows`).
    pub time_unit: Option<String>,
    /// Unit of the values of `rows` (default: the sample's value unit).
    pub value_unit: Option<String>,
    /// Periodic: mean value.
    pub mean: Option<Scalar>,
    /// Periodic: amplitude.
    pub amplitude: Option<Scalar>,
    /// Periodic: period.
    pub period: Option<Scalar>,
    /// Periodic: phase at t = 0 (default 0 rad).
    pub phase: Option<Scalar>,
    /// Data file with the signal, relative to the experiment file.
    pub file: Option<String>,
    /// Time column of `file`.
    pub time_column: Option<String>,
    /// Value column of `file`.
    pub value_column: Option<String>,
    /// Time of the step on the file's clock (rows before it are dropped).
    pub time_origin: Option<Scalar>,
    /// Gas at a face: its pressure p (the value is S·p, Henry's law).
    pub pressure: Option<Scalar>,
    /// Gas at a face: the solubility coefficient S (value per pressure).
    pub solubility: Option<Scalar>,
}

struct SignalVisitor;

impl<'de> Visitor<'de> for SignalVisitor {
    type Value = SignalSpec;
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str(
            "a number, a number with unit, a parameter name, or a table with rows, a periodic \
             signal or a data file",
        )
    }
    fn visit_f64<E: de::Error>(self, v: f64) -> Result<SignalSpec, E> {
        Ok(SignalSpec::Scalar(Scalar::Number(v)))
    }
    fn visit_i64<E: de::Error>(self, v: i64) -> Result<SignalSpec, E> {
        Ok(SignalSpec::Scalar(Scalar::Number(v as f64)))
    }
    fn visit_u64<E: de::Error>(self, v: u64) -> Result<SignalSpec, E> {
        Ok(SignalSpec::Scalar(Scalar::Number(v as f64)))
    }
    fn visit_str<E: de::Error>(self, v: &str) -> Result<SignalSpec, E> {
        Ok(SignalSpec::Scalar(Scalar::Text(v.to_string())))
    }
    fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<SignalSpec, A::Error> {
        SignalTable::deserialize(de::value::MapAccessDeserializer::new(map))
            .map(|t| SignalSpec::Table(Box::new(t)))
    }
}

impl<'de> Deserialize<'de> for SignalSpec {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(SignalVisitor)
    }
}

/// A diffusivity: a scalar (constant D) or a law table.
#[derive(Debug, Clone, PartialEq)]
pub enum LawSpec {
    /// Constant D.
    Scalar(Scalar),
    /// A law D(u).
    Table(LawTable),
}

/// Which law.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LawName {
    /// D = D0.
    Constant,
    /// D = D0 exp(β u / u_ref).
    Exponential,
    /// D = D0 (1 + β u / u_ref).
    Linear,
}

/// A diffusivity law as written.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LawTable {
    /// The law.
    pub law: LawName,
    /// D0.
    pub d0: Scalar,
    /// β (not for `constant`).
    pub beta: Option<Scalar>,
    /// u_ref (not for `constant`).
    pub u_ref: Option<Scalar>,
}

struct LawVisitor;

impl<'de> Visitor<'de> for LawVisitor {
    type Value = LawSpec;
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a diffusivity (number with unit or parameter name) or a table with law, d0, beta, u_ref")
    }
    fn visit_f64<E: de::Error>(self, v: f64) -> Result<LawSpec, E> {
        Ok(LawSpec::Scalar(Scalar::Number(v)))
    }
    fn visit_i64<E: de::Error>(self, v: i64) -> Result<LawSpec, E> {
        Ok(LawSpec::Scalar(Scalar::Number(v as f64)))
    }
    fn visit_u64<E: de::Error>(self, v: u64) -> Result<LawSpec, E> {
        Ok(LawSpec::Scalar(Scalar::Number(v as f64)))
    }
    fn visit_str<E: de::Error>(self, v: &str) -> Result<LawSpec, E> {
        Ok(LawSpec::Scalar(Scalar::Text(v.to_string())))
    }
    fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<LawSpec, A::Error> {
        LawTable::deserialize(de::value::MapAccessDeserializer::new(map)).map(LawSpec::Table)
    }
}

impl<'de> Deserialize<'de> for LawSpec {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(LawVisitor)
    }
}

/// The whole file.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ExperimentFile {
    /// A one-line title.
    pub title: Option<String>,
    /// Free text.
    pub notes: Option<String>,
    /// Temperature of the run (for Arrhenius analyses across reports), with unit.
    pub temperature: Option<Scalar>,
    /// The sample.
    pub sample: SampleSpec,
    /// The two ends.
    pub ends: EndsSpec,
    /// The state at t = 0.
    pub initial: InitialSpec,
    /// Volume terms.
    pub volume: Option<VolumeSpec>,
    /// Named parameters.
    #[serde(default)]
    pub parameters: BTreeMap<String, ParameterSpec>,
    /// The runs.
    pub datasets: Vec<DatasetSpec>,
    /// Solver options.
    #[serde(default)]
    pub solver: SolverSpec,
    /// Fit options.
    #[serde(default)]
    pub fit: FitSpec,
    /// Quantities derived from the fitted parameters, with propagated uncertainty.
    #[serde(default)]
    pub derived: BTreeMap<String, DerivedSpec>,
}

/// What a `[derived.NAME]` table computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DerivedName {
    /// Thermal conductivity k = α ρ c_p.
    Conductivity,
    /// Time for a run to reach a fraction of its equilibrium uptake.
    EquilibriumTime,
    /// Flux in through an end at given times.
    FluxIn,
    /// Permeability P = D S of a membrane whose face sees a gas pressure.
    Permeability,
    /// Time lag θ = L²/(6D) of a membrane.
    TimeLag,
}

/// `[derived.NAME]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DerivedSpec {
    /// What to compute.
    pub quantity: DerivedName,
    /// Conductivity: the diffusivity parameter (default: the sample's diffusivity).
    pub diffusivity: Option<String>,
    /// Conductivity: density with unit (`kg/m3`, `g/cm3`).
    pub density: Option<Scalar>,
    /// Conductivity: standard uncertainty of the density.
    pub density_uncertainty: Option<Scalar>,
    /// Conductivity: specific heat capacity with unit (`J/(kg K)`, `J/(g K)`, `kJ/(kg K)`).
    pub heat_capacity: Option<Scalar>,
    /// Conductivity: standard uncertainty of the heat capacity.
    pub heat_capacity_uncertainty: Option<Scalar>,
    /// Equilibrium time and flux: the dataset (run) whose model is used (default: the first).
    pub dataset: Option<String>,
    /// Equilibrium time: the fraction of the equilibrium change (default 0.95).
    pub fraction: Option<f64>,
    /// Flux: the end, `left` or `right`.
    pub end: Option<EndWhich>,
    /// Flux: the times, with unit.
    pub times: Option<Vec<Scalar>>,
    /// Permeability: the solubility coefficient, a parameter name or a number with unit
    /// (default: that of the gas face of the run).
    pub solubility: Option<Scalar>,
}

/// An end by name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EndWhich {
    /// x = 0 or the inner radius.
    Left,
    /// x = L or the outer radius.
    Right,
}

/// Sample shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ShapeName {
    /// Plane sheet.
    Slab,
    /// Cylinder.
    Cylinder,
    /// Sphere.
    Sphere,
}

/// `[sample]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SampleSpec {
    /// Shape.
    pub shape: ShapeName,
    /// Unit of u.
    pub value_unit: String,
    /// Slab thickness (single layer).
    pub thickness: Option<Scalar>,
    /// Outer radius (cylinder, sphere; single layer).
    pub radius: Option<Scalar>,
    /// Inner radius (hollow cylinder or sphere).
    pub inner_radius: Option<Scalar>,
    /// Diffusivity (single layer).
    pub diffusivity: Option<LawSpec>,
    /// Layers from the left (inner) end outwards.
    pub layers: Option<Vec<LayerSpec>>,
}

/// `[datasets.sample]`: the size of this run's sample (a one-layer sample only).
#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct SampleOverride {
    /// Slab thickness, replacing `sample.thickness`.
    pub thickness: Option<Scalar>,
    /// Outer radius of a cylinder or sphere, replacing `sample.radius`.
    pub radius: Option<Scalar>,
}

/// `[[sample.layers]]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LayerSpec {
    /// Thickness.
    pub thickness: Scalar,
    /// Diffusivity.
    pub diffusivity: LawSpec,
    /// Partition ratio to the next layer (default 1).
    pub partition_to_next: Option<Scalar>,
}

/// `[ends]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EndsSpec {
    /// x = 0, or the inner radius (may be left out for the centre of a solid body).
    pub left: Option<EndSpec>,
    /// x = L, or the outer radius.
    pub right: EndSpec,
}

/// Per-dataset replacements of the ends.
#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct EndsOverride {
    /// Replaces `ends.left`.
    pub left: Option<EndSpec>,
    /// Replaces `ends.right`.
    pub right: Option<EndSpec>,
}

/// One end: exactly one of the four keys.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EndSpec {
    /// Fixed value.
    pub value: Option<SignalSpec>,
    /// Fixed flux, positive entering.
    pub flux: Option<SignalSpec>,
    /// Surface transfer.
    pub transfer: Option<TransferSpec>,
    /// No flux.
    pub sealed: Option<bool>,
}

/// `transfer = { ... }`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TransferSpec {
    /// h.
    pub coefficient: Scalar,
    /// K (default 1).
    pub partition: Option<Scalar>,
    /// Outside value.
    pub outside: SignalSpec,
}

/// `[initial]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InitialSpec {
    /// Uniform value.
    pub value: Option<Scalar>,
    /// Rows `[position, value]`.
    pub rows: Option<Vec<[f64; 2]>>,
    /// Unit of the positions of `rows`.
    pub position_unit: Option<String>,
    /// Unit of the values of `rows` (default: the sample's value unit).
    pub value_unit: Option<String>,
}

/// `[volume]`.
#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct VolumeSpec {
    /// m.
    pub exchange_rate: Option<Scalar>,
    /// u_env.
    pub ambient: Option<Scalar>,
    /// k.
    pub reaction_rate: Option<Scalar>,
}

/// Parameter transform.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TransformName {
    /// Fit log(p).
    Log,
    /// Fit p.
    None,
}

/// `[parameters.NAME]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ParameterSpec {
    /// Start value with unit; omitted: derived from the data (see `analysis::starts`).
    pub start: Option<Scalar>,
    /// Reporting unit when `start` is omitted (default: the unit of `lower`/`upper`, else SI).
    pub unit: Option<String>,
    /// Lower bound.
    pub lower: Option<Scalar>,
    /// Upper bound.
    pub upper: Option<Scalar>,
    /// Held at its start value.
    #[serde(default)]
    pub fixed: bool,
    /// One value per dataset instead of one shared.
    #[serde(default)]
    pub per_dataset: bool,
    /// Transform hint.
    pub transform: Option<TransformName>,
}

/// Data layout.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LayoutName {
    /// Time + value.
    TimeSeries,
    /// Time + one column per sensor.
    Sensors,
    /// Position + value (+ time).
    Profiles,
}

/// What a dataset measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ObserveName {
    /// u at `position` (time series), at each sensor, or along the profile.
    Value,
    /// ∫ u dV.
    Amount,
    /// Amount minus amount at t = 0.
    AmountChange,
    /// (M_t − M_0)/(M_∞ − M_0).
    FractionalUptake,
    /// Amount / volume.
    Mean,
    /// Flux entering through `end`.
    FluxIn,
    /// Amount entered through `end`.
    CumulativeIn,
    /// Amount left through `end`.
    CumulativeOut,
}

/// Which end.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EndName {
    /// Left / inner.
    Left,
    /// Right / outer.
    Right,
}

/// Weighting.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum WeightingName {
    /// σ are absolute standard uncertainties.
    Absolute,
    /// σ are known up to one factor per dataset.
    Scaled,
    /// σ_i = relative_sigma · |y_i|.
    Relative,
}

/// A sensor column and its position.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorEntry {
    /// Column header.
    pub column: String,
    /// Position along the sample.
    pub position: Scalar,
}

/// `[[datasets]]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DatasetSpec {
    /// Name (unique).
    pub name: String,
    /// Data file, relative to the experiment file.
    pub file: String,
    /// Layout.
    pub layout: LayoutName,
    /// Observable.
    pub observe: ObserveName,
    /// End for flux/cumulative observables.
    pub end: Option<EndName>,
    /// Position for `value` of a time series.
    pub position: Option<Scalar>,
    /// Time column.
    pub time_column: Option<String>,
    /// Value column.
    pub value_column: Option<String>,
    /// Unit override of the value column.
    pub value_unit: Option<String>,
    /// Uncertainty column.
    pub sigma_column: Option<String>,
    /// Run/series column of a time-series file that holds several runs.
    pub run_column: Option<String>,
    /// Which run of the file (the label in `run_column`) this dataset is.
    pub run: Option<String>,
    /// Constant uncertainty.
    pub sigma: Option<Scalar>,
    /// Relative uncertainty for `weighting = "relative"`.
    pub relative_sigma: Option<f64>,
    /// Weighting.
    pub weighting: Option<WeightingName>,
    /// Time of the step on the file's clock.
    pub time_origin: Option<Scalar>,
    /// When the exposure began on the data's clock (after `time_origin`): a time or a
    /// parameter t0; the model is compared with the data at t − t0.
    pub exposure_start: Option<Scalar>,
    /// This run's sample size, replacing the top-level one.
    pub sample: Option<SampleOverride>,
    /// Prediction = offset + scale · observable.
    pub scale: Option<Scalar>,
    /// Prediction = offset + scale · observable.
    pub offset: Option<Scalar>,
    /// Sensors (layout `sensors`).
    pub sensors: Option<Vec<SensorEntry>>,
    /// Position column (layout `profiles`).
    pub position_column: Option<String>,
    /// One time for a profile file without time column.
    pub profile_time: Option<Scalar>,
    /// End conditions of this run.
    pub ends: Option<EndsOverride>,
    /// Initial state of this run.
    pub initial: Option<InitialSpec>,
    /// Start values of per-dataset parameters for this run.
    pub starts: Option<BTreeMap<String, Scalar>>,
    /// Detection limit of the instrument, in the measured column's unit.
    pub detection_limit: Option<Scalar>,
    /// What to do with readings at or below the detection limit.
    pub below_detection_limit: Option<BelowLimitName>,
}

/// Readings at or below a dataset's detection limit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BelowLimitName {
    /// Leave them out of the fit.
    Exclude,
    /// Keep them as censored readings: the model only has to stay at or below the limit there.
    Censor,
}

/// `[solver]`.
#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct SolverSpec {
    /// Local error tolerance.
    pub tolerance: Option<f64>,
    /// Smallest cell / layer thickness.
    pub smallest_cell: Option<f64>,
    /// Largest cell / layer thickness.
    pub largest_cell: Option<f64>,
    /// Growth ratio.
    pub growth: Option<f64>,
    /// Equal cells per layer.
    pub uniform_cells: Option<usize>,
    /// Step limit.
    pub maximum_steps: Option<usize>,
}

/// `[fit]`.
#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct FitSpec {
    /// Confidence level of intervals.
    pub interval_level: Option<f64>,
    /// Iteration limit.
    pub maximum_iterations: Option<usize>,
    /// Relative change of the sum of squares that ends the fit.
    pub tolerance: Option<f64>,
}
