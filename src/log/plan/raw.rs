//! The plan's TOML tables as written, before validation. Unknown keys are refused by
//! name (`deny_unknown_fields`), so that a typo never passes silently.

use std::path::PathBuf;

use serde::Deserialize;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawPlan {
    pub(super) article: Option<RawArticle>,
    /// One `[magnetometer]` table or several `[[magnetometer]]` entries.
    pub(super) magnetometer: Option<toml::Value>,
    pub(super) columns: Option<toml::Table>,
    pub(super) log: Option<RawLog>,
    pub(super) gyro: Option<RawGyro>,
    pub(super) probe: Option<RawProbe>,
    pub(super) site: Option<RawSite>,
    pub(super) cage: Option<RawCage>,
    #[serde(default)]
    pub(super) rod: Vec<RawRod>,
    pub(super) dipole_test: Option<RawDipoleTest>,
    pub(super) align_test: Option<super::align::RawAlignTest>,
    pub(super) rod_bench: Option<super::rod_bench::RawRodBench>,
    pub(super) orbit: Option<super::orbit::RawOrbit>,
    pub(super) control: Option<super::control::RawControl>,
    #[serde(default)]
    pub(super) step: Vec<RawStep>,
    #[serde(default)]
    pub(super) limits: RawLimits,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawArticle {
    pub(super) serial: String,
    pub(super) build: String,
    pub(super) operator: Option<String>,
    pub(super) facility: Option<String>,
    pub(super) notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawMagnetometer {
    pub(super) name: Option<String>,
    pub(super) columns: Option<[String; 3]>,
    pub(super) sensor_to_body: Option<toml::Value>,
    pub(super) position_m: Option<[f64; 3]>,
    pub(super) unit: Option<String>,
    pub(super) nt_per_count: Option<toml::Value>,
    pub(super) range_nt: Option<f64>,
    pub(super) serial: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawLog {
    pub(super) hold_commands: Option<bool>,
    pub(super) decimal: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawGyro {
    pub(super) sensor_to_body: Option<toml::Value>,
    pub(super) serial: Option<String>,
    pub(super) scale_tol: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawProbe {
    pub(super) position_m: [f64; 3],
    pub(super) sensor_to_body: Option<toml::Value>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSite {
    pub(super) lat_deg: f64,
    pub(super) lon_deg: f64,
    #[serde(default)]
    pub(super) alt_m: f64,
    pub(super) date: Option<String>,
    pub(super) reference_nt: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawCage {
    pub(super) article_to_cage: toml::Value,
    pub(super) nt_per_amp: Option<toml::Value>,
    pub(super) ambient_nt: Option<[f64; 3]>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawRod {
    pub(super) name: String,
    pub(super) axis_body: [f64; 3],
    pub(super) position_m: [f64; 3],
    pub(super) dipole_per_command_am2: Option<f64>,
    pub(super) length_m: Option<f64>,
    pub(super) settle_s: Option<f64>,
    pub(super) serial: Option<String>,
    pub(super) coupling_nt_per_command: Option<[f64; 3]>,
    pub(super) command_max: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawDipoleTest {
    pub(super) probe_position_m: Option<[f64; 3]>,
    #[serde(default)]
    pub(super) mount: Vec<RawMount>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawMount {
    pub(super) label: String,
    pub(super) body_to_table: toml::Value,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawStep {
    pub(super) kind: toml::Spanned<String>,
    pub(super) log: PathBuf,
    pub(super) sensor: Option<String>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub(super) struct RawLimits {
    pub(super) residual_dipole_max_am2: Option<f64>,
    pub(super) calibration_residual_max_nt: Option<f64>,
    pub(super) polarity_angle_max_deg: Option<f64>,
    pub(super) coverage_min: Option<f64>,
    pub(super) hard_iron_max_nt: Option<f64>,
    pub(super) soft_iron_min: Option<f64>,
    pub(super) soft_iron_max: Option<f64>,
    pub(super) residual_max_fraction: Option<f64>,
    pub(super) samples_used_min: Option<f64>,
    pub(super) rods_on_share_max: Option<f64>,
    pub(super) design_condition_max: Option<f64>,
    pub(super) alignment_max_deg: Option<f64>,
    pub(super) rod_current_max_a: Option<f64>,
    pub(super) rod_moment_min_am2: Option<f64>,
    pub(super) rod_remanence_max_pct: Option<f64>,
    pub(super) rod_linearity_max_pct: Option<f64>,
}
