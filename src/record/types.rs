//! The record's types, with an explicit, stable JSON shape (schema `fringegauge.record/1`).
//! Optional fields are left out when absent, never written as `null`.

use super::Timings;
use crate::photo::PhotoInfo;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// The schema id written in every record.
pub const SCHEMA_ID: &str = "fringegauge.record/1";

/// One measurement: the photo, the inputs, the scale, the features found, the fit and the
/// results with their uncertainty budgets.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Record {
    /// Always [`SCHEMA_ID`].
    pub schema: String,
    /// The program that wrote the record.
    pub tool: Tool,
    /// When the record was made, RFC 3339 in UTC.
    pub created: String,
    /// The photo file.
    pub photo: PhotoInfo,
    /// The experiment and its inputs.
    pub setup: Setup,
    /// How photo pixels were mapped to screen millimetres.
    pub scale: ScaleInfo,
    /// Spots, fringes, minima or rings found in the photo.
    #[serde(default)]
    pub features: Vec<Feature>,
    /// The model fitted to the features, when there was one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fit: Option<Fit>,
    /// The measured values.
    pub results: Vec<ResultEntry>,
    /// A measured size distribution (particle ensembles).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub distribution: Option<Distribution>,
    /// Things the technician should look at.
    #[serde(default)]
    pub warnings: Vec<String>,
    /// Defaults that were used because a value was not given.
    #[serde(default)]
    pub assumptions: Vec<String>,
    /// Wall time per stage in milliseconds, in pipeline order.
    #[serde(default)]
    pub timings_ms: Timings,
}

/// A size distribution free of an assumed shape, beside the fitted parametric one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Distribution {
    /// How the free distribution was solved, and its smoothing chosen.
    pub method: String,
    /// The parametric shape fitted beside it ("normal" or "lognormal").
    pub shape: String,
    /// Number-mean diameter of the free distribution, m.
    pub mean_m: f64,
    /// Its standard deviation, m.
    pub sd_m: f64,
    /// Diameter bins in increasing size.
    pub bins: Vec<DistributionBin>,
}

/// One diameter bin of a [`Distribution`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DistributionBin {
    /// Nominal diameter of the bin, m.
    pub diameter_m: f64,
    /// Lower edge, m.
    pub lower_m: f64,
    /// Upper edge, m.
    pub upper_m: f64,
    /// Share of the particles by number.
    pub number_fraction: f64,
    /// Share by volume.
    pub volume_fraction: f64,
    /// The fitted parametric distribution's share by number.
    pub parametric_fraction: f64,
}

/// The program that wrote a record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Tool {
    /// Always "fringegauge".
    pub name: String,
    /// The crate version.
    pub version: String,
}

/// The experiment and its inputs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Setup {
    /// The measuring subcommand: grating, two-slit, slit, pinhole, particles or electron.
    pub kind: String,
    /// Inputs by long flag name (`wavelength`, `distance`, ...), in name order.
    pub inputs: BTreeMap<String, Input>,
}

/// Where an input's value came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum InputSource {
    /// On the command line.
    Given,
    /// A default, also listed under assumptions.
    Assumed,
    /// From the `--setup` file.
    SetupFile,
}

/// One input value with its standard uncertainty.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Input {
    /// Value in SI base units.
    pub value: f64,
    /// Standard uncertainty (k = 1) in the same unit.
    pub u: f64,
    /// SI unit symbol: "m", "rad", "V", or "" for a pure number.
    pub unit: String,
    /// Where the value came from.
    pub source: InputSource,
}

impl Input {
    /// An input with its source.
    pub fn new(value: f64, u: f64, unit: &str, source: InputSource) -> Input {
        Input {
            value,
            u,
            unit: unit.to_string(),
            source,
        }
    }
    /// A value given on the command line.
    pub fn given(value: f64, u: f64, unit: &str) -> Input {
        Input::new(value, u, unit, InputSource::Given)
    }
    /// A default that was assumed.
    pub fn assumed(value: f64, u: f64, unit: &str) -> Input {
        Input::new(value, u, unit, InputSource::Assumed)
    }
    /// A value from the setup file.
    pub fn from_setup(value: f64, u: f64, unit: &str) -> Input {
        Input::new(value, u, unit, InputSource::SetupFile)
    }
}

/// A value with its standard uncertainty.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ValueU {
    /// The value.
    pub value: f64,
    /// Standard uncertainty (k = 1).
    pub u: f64,
}

/// How photo pixels were mapped to screen millimetres.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScaleInfo {
    /// ruler, ruler-auto, points, grid, sheet or mm-per-px.
    pub method: String,
    /// Screen millimetres per photo pixel (at the pattern centre for a homography).
    pub mm_per_px: ValueU,
    /// Photo px → screen mm homography, 3×3 row-major, when the view was corrected.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub homography: Option<[[f64; 3]; 3]>,
    /// RMS reprojection residual of the scale marks, px.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub residual_px: Option<f64>,
}

impl ScaleInfo {
    /// A scale with no homography and no residual.
    pub fn new(method: &str, mm_per_px: f64, u_mm_per_px: f64) -> ScaleInfo {
        ScaleInfo {
            method: method.to_string(),
            mm_per_px: ValueU {
                value: mm_per_px,
                u: u_mm_per_px,
            },
            homography: None,
            residual_px: None,
        }
    }
    /// Adds the homography.
    pub fn with_homography(mut self, h: [[f64; 3]; 3]) -> ScaleInfo {
        self.homography = Some(h);
        self
    }
    /// Adds the RMS residual in px.
    pub fn with_residual_px(mut self, residual_px: f64) -> ScaleInfo {
        self.residual_px = Some(residual_px);
        self
    }
}

/// An ellipse in photo pixels.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Ellipse {
    /// Centre x, px.
    pub cx: f64,
    /// Centre y, px.
    pub cy: f64,
    /// Semi-axis along `angle`, px.
    pub a: f64,
    /// Other semi-axis, px.
    pub b: f64,
    /// Angle of the `a` axis from +x towards +y (y points down), rad.
    pub angle: f64,
}

/// A spot, fringe, minimum or ring found in the photo.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Feature {
    /// What it is: an order ("m=+1"), a minimum, a ring ("ring 2").
    pub label: String,
    /// Position in the upright photo, px.
    pub px: [f64; 2],
    /// Standard uncertainty of `px`, px.
    pub px_u: [f64; 2],
    /// Position on the screen, mm.
    pub screen_mm: [f64; 2],
    /// Ring radius in the photo, px.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub radius_px: Option<f64>,
    /// Ring radius on the screen, mm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub radius_mm: Option<f64>,
    /// Ellipse fitted to the ring, px.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ellipse: Option<Ellipse>,
}

impl Feature {
    /// A point feature.
    pub fn point(label: &str, px: [f64; 2], px_u: [f64; 2], screen_mm: [f64; 2]) -> Feature {
        Feature {
            label: label.to_string(),
            px,
            px_u,
            screen_mm,
            radius_px: None,
            radius_mm: None,
            ellipse: None,
        }
    }
    /// Adds a ring radius in px and mm.
    pub fn with_radius(mut self, radius_px: f64, radius_mm: f64) -> Feature {
        self.radius_px = Some(radius_px);
        self.radius_mm = Some(radius_mm);
        self
    }
    /// Adds the ellipse fitted to a ring.
    pub fn with_ellipse(mut self, ellipse: Ellipse) -> Feature {
        self.ellipse = Some(ellipse);
        self
    }
}

/// A fitted parameter.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FitParameter {
    /// Parameter name.
    pub name: String,
    /// Fitted value.
    pub value: f64,
    /// Standard uncertainty from the covariance.
    pub u: f64,
}

/// The model fitted to the features.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Fit {
    /// Model name.
    pub model: String,
    /// Fitted parameters, in covariance order.
    pub parameters: Vec<FitParameter>,
    /// Covariance matrix of the parameters, row-major, n×n.
    pub covariance: Vec<Vec<f64>>,
    /// RMS of the residuals, in the unit of the fitted data.
    pub rms_residual: f64,
    /// Number of data points fitted.
    pub points: usize,
}

/// One input's share of a result's uncertainty.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BudgetLine {
    /// Input name.
    pub input: String,
    /// Sensitivity coefficient ∂y/∂x, result unit per input unit.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sensitivity: Option<f64>,
    /// Contribution |c|·u(x) to the result's standard uncertainty, result unit.
    pub contribution: f64,
}

impl BudgetLine {
    /// A budget line.
    pub fn new(input: &str, sensitivity: Option<f64>, contribution: f64) -> BudgetLine {
        BudgetLine {
            input: input.to_string(),
            sensitivity,
            contribution: contribution.abs(),
        }
    }
}

/// A measured value.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ResultEntry {
    /// pitch, wavelength, separation, width, diameter, mean_diameter, size_spread,
    /// d_spacing, lattice_a, camera_length.
    pub name: String,
    /// Which one, when there are several of a name (e.g. "ring 3").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// Miller index of a ring ("111", "10.0").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub index: Option<String>,
    /// Value in SI base units.
    pub value: f64,
    /// SI unit symbol.
    pub unit: String,
    /// Combined standard uncertainty.
    pub u: f64,
    /// Coverage factor.
    pub k: f64,
    /// Expanded uncertainty k·u.
    pub expanded: f64,
    /// Contributions to u.
    pub budget: Vec<BudgetLine>,
}

impl ResultEntry {
    /// A result; `expanded` is k·u.
    pub fn new(name: &str, value: f64, u: f64, unit: &str, k: f64) -> ResultEntry {
        ResultEntry {
            name: name.to_string(),
            label: None,
            index: None,
            value,
            unit: unit.to_string(),
            u,
            k,
            expanded: k * u,
            budget: Vec::new(),
        }
    }
    /// Adds a label.
    pub fn with_label(mut self, label: &str) -> ResultEntry {
        self.label = Some(label.to_string());
        self
    }
    /// Adds a Miller index.
    pub fn with_index(mut self, index: &str) -> ResultEntry {
        self.index = Some(index.to_string());
        self
    }
    /// Sets the budget.
    pub fn with_budget(mut self, budget: Vec<BudgetLine>) -> ResultEntry {
        self.budget = budget;
        self
    }
    /// The budget, largest contribution first, each with its share of u² in per cent.
    /// The shares add up to 100 % when the inputs are uncorrelated and the model is
    /// linear enough (GUM 5.1.2); otherwise their sum shows how far off that is.
    pub fn ranked_budget(&self) -> Vec<(&BudgetLine, f64)> {
        let var = self.u * self.u;
        let mut lines: Vec<(&BudgetLine, f64)> = self
            .budget
            .iter()
            .map(|b| {
                let share = if var > 0.0 && var.is_finite() {
                    100.0 * b.contribution * b.contribution / var
                } else {
                    0.0
                };
                (b, share)
            })
            .collect();
        lines.sort_by(|a, b| b.0.contribution.total_cmp(&a.0.contribution));
        lines
    }
    /// The name with its label or index, for reports.
    pub fn display_name(&self) -> String {
        let mut s = self.name.clone();
        if let Some(label) = &self.label {
            s.push_str(&format!(" ({label})"));
        }
        if let Some(index) = &self.index {
            s.push_str(&format!(" [{index}]"));
        }
        s
    }
}
impl Record {
    /// A record of a measurement of `kind` on a photo with a scale, stamped now, with no
    /// inputs, features or results yet.
    pub fn new(kind: &str, photo: PhotoInfo, scale: ScaleInfo) -> Record {
        Record {
            schema: SCHEMA_ID.to_string(),
            tool: Tool {
                name: env!("CARGO_PKG_NAME").to_string(),
                version: env!("CARGO_PKG_VERSION").to_string(),
            },
            created: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
            photo,
            setup: Setup {
                kind: kind.to_string(),
                inputs: BTreeMap::new(),
            },
            scale,
            features: Vec::new(),
            fit: None,
            results: Vec::new(),
            distribution: None,
            warnings: Vec::new(),
            assumptions: Vec::new(),
            timings_ms: Timings::default(),
        }
    }

    /// Sets an input by its long flag name.
    pub fn set_input(&mut self, name: &str, input: Input) -> &mut Record {
        self.setup.inputs.insert(name.to_string(), input);
        self
    }
    /// Adds a feature.
    pub fn push_feature(&mut self, feature: Feature) -> &mut Record {
        self.features.push(feature);
        self
    }
    /// Adds a result.
    pub fn push_result(&mut self, result: ResultEntry) -> &mut Record {
        self.results.push(result);
        self
    }
    /// Adds a warning.
    pub fn warn(&mut self, text: impl Into<String>) -> &mut Record {
        self.warnings.push(text.into());
        self
    }
    /// Adds an assumption.
    pub fn assume(&mut self, text: impl Into<String>) -> &mut Record {
        self.assumptions.push(text.into());
        self
    }
    /// Adds a stage's wall time.
    pub fn time(&mut self, stage: &str, ms: f64) -> &mut Record {
        self.timings_ms.add(stage, ms);
        self
    }
    /// The first result of a name.
    pub fn result(&self, name: &str) -> Option<&ResultEntry> {
        self.results.iter().find(|r| r.name == name)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::fixture;

    #[test]
    fn expanded_is_k_times_u() {
        let r = ResultEntry::new("pitch", 1.6e-6, 3.0e-9, "m", 2.0);
        assert_eq!(r.expanded, 6.0e-9);
        assert_eq!(
            ResultEntry::new("d_spacing", 2.1e-10, 1e-12, "m", 2.0)
                .with_label("ring 1")
                .with_index("10.0")
                .display_name(),
            "d_spacing (ring 1) [10.0]"
        );
    }

    #[test]
    fn ranked_budget_is_sorted_and_shares_add_up() {
        let r = fixture::grating_record();
        let pitch = r.result("pitch").unwrap();
        let ranked = pitch.ranked_budget();
        assert!(
            ranked
                .windows(2)
                .all(|w| w[0].0.contribution >= w[1].0.contribution)
        );
        let total: f64 = ranked.iter().map(|(_, s)| s).sum();
        assert!((total - 100.0).abs() < 1e-9, "{total}");
    }
}
