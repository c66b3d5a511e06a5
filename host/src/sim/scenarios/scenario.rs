//! Scenarios: a source, a converter, a load and a front-end over a stretch of
//! time, written in TOML. The built-in ones live in `host/scenarios/` and are
//! invented for settings of our own; they double as examples of the format.

use serde::{Deserialize, Serialize};

use crate::front_end::FrontEndParams;
use crate::settings::{NodeSettings, SettingsError};
use crate::sim::models::cell::CellParams;
use crate::sim::models::converter::{ConverterParams, InputMode};
use crate::sim::models::environment::{DaylightParams, PipeParams};
use crate::sim::models::load::LoadParams;
use crate::sim::models::solar::PvCell;
use crate::sim::models::source::SourceParams;
use crate::sim::models::supercap::SupercapParams;
use crate::sim::models::teg::TegParams;

/// A complete simulated run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Short name.
    pub name: String,
    /// What it shows; say that it is invented.
    pub description: String,
    /// Simulated length, hours.
    pub duration_h: f64,
    /// Hour of day at the start (0-24).
    #[serde(default)]
    pub start_hour: f64,
    /// Time between samples, ms.
    pub sample_period_ms: u32,
    /// Seed of every random process (clouds, noise).
    #[serde(default = "default_seed")]
    pub seed: u64,
    /// The harvester.
    pub source: SourceParams,
    /// The step-up stage.
    pub converter: ConverterParams,
    /// What it feeds.
    pub load: LoadParams,
    /// The measuring front-end.
    #[serde(default = "FrontEndParams::default_board")]
    pub front_end: FrontEndParams,
    /// Overrides of the node's default configuration.
    #[serde(default)]
    pub node: NodeSettings,
}

fn default_seed() -> u64 {
    1
}

/// The built-in scenarios: name and TOML text.
pub const BUILTIN: &[(&str, &str)] = &[
    (
        "greenhouse-day",
        include_str!("../../../scenarios/greenhouse-day.toml"),
    ),
    (
        "crate-beacon",
        include_str!("../../../scenarios/crate-beacon.toml"),
    ),
    (
        "orchard-night",
        include_str!("../../../scenarios/orchard-night.toml"),
    ),
    (
        "boiler-pipe",
        include_str!("../../../scenarios/boiler-pipe.toml"),
    ),
    (
        "stalled-converter",
        include_str!("../../../scenarios/stalled-converter.toml"),
    ),
];

/// The scenario the demo runs when none is named.
pub const DEFAULT_SCENARIO: &str = "greenhouse-day";

/// Why a scenario cannot be used: each names the field at fault.
#[derive(Debug, thiserror::Error)]
pub enum ScenarioError {
    /// Neither a file nor a built-in name.
    #[error("no built-in scenario named '{name}'; choose one of: {known}")]
    Unknown {
        /// The name given.
        name: String,
        /// The built-in names, comma separated.
        known: String,
    },
    /// A scenario file that exists but cannot be read.
    #[error("cannot read scenario file {}", path.display())]
    Unreadable {
        /// The file.
        path: std::path::PathBuf,
        /// Why.
        #[source]
        source: std::io::Error,
    },
    /// Not a scenario: bad TOML, an unknown key, a wrong type.
    #[error("invalid scenario: {0}")]
    Syntax(String),
    /// A number that must be positive and is not.
    #[error("{field} must be a positive number, got {value}")]
    NotPositive {
        /// The field.
        field: String,
        /// The value given.
        value: f64,
    },
    /// A number outside its range.
    #[error("{field} must be between {low} and {high}, got {value}")]
    OutOfRange {
        /// The field.
        field: String,
        /// The value given.
        value: f64,
        /// The lowest accepted.
        low: f64,
        /// The highest accepted.
        high: f64,
    },
    /// The converter's stop voltage at or above its start voltage.
    #[error("converter.stop_v ({stop_v}) must be below converter.start_v ({start_v})")]
    StopNotBelowStart {
        /// The stop voltage, V.
        stop_v: f64,
        /// The start voltage, V.
        start_v: f64,
    },
    /// A front-end with a zero divider, shunt or gain.
    #[error("front_end: a divider, shunt or gain is zero or the scale overflows")]
    FrontEndInvalid,
    /// The `[node]` settings cannot be applied.
    #[error("[node] settings")]
    Settings(#[source] SettingsError),
    /// The node's own rules refuse the configuration.
    #[error("[node] settings are refused by the node: {0}")]
    Refused(gleaner_protocol::Refusal),
    /// An error in a named scenario or file (`what` says which).
    #[error("{what}")]
    In {
        /// `built-in scenario 'NAME'` or `scenario file PATH`.
        what: String,
        /// The error in it.
        #[source]
        source: Box<ScenarioError>,
    },
}

impl ScenarioError {
    /// True when the fault is in a file the user gave (an exit code of its own).
    pub fn in_a_file(&self) -> bool {
        match self {
            ScenarioError::Unreadable { .. } => true,
            ScenarioError::In { what, .. } => what.starts_with("scenario file"),
            _ => false,
        }
    }

    /// The innermost error, past the names of the scenario or file.
    pub fn innermost(&self) -> &ScenarioError {
        match self {
            ScenarioError::In { source, .. } => source.innermost(),
            other => other,
        }
    }

    fn within(what: String) -> impl FnOnce(ScenarioError) -> ScenarioError {
        move |source| ScenarioError::In {
            what,
            source: Box::new(source),
        }
    }
}

fn positive(field: &str, value: f64) -> Result<(), ScenarioError> {
    if !(value.is_finite() && value > 0.0) {
        return Err(ScenarioError::NotPositive {
            field: field.to_string(),
            value,
        });
    }
    Ok(())
}

fn within(field: &str, value: f64, low: f64, high: f64) -> Result<(), ScenarioError> {
    if !(value.is_finite() && (low..=high).contains(&value)) {
        return Err(ScenarioError::OutOfRange {
            field: field.to_string(),
            value,
            low,
            high,
        });
    }
    Ok(())
}

impl Scenario {
    /// A built-in scenario by name.
    pub fn builtin(name: &str) -> Result<Self, ScenarioError> {
        let Some((_, text)) = BUILTIN.iter().find(|(n, _)| *n == name) else {
            let names: Vec<&str> = BUILTIN.iter().map(|(n, _)| *n).collect();
            return Err(ScenarioError::Unknown {
                name: name.to_string(),
                known: names.join(", "),
            });
        };
        Self::from_toml(text).map_err(ScenarioError::within(format!("built-in scenario '{name}'")))
    }

    /// Reads a built-in name, or a path to a TOML file.
    pub fn load(name_or_path: &str) -> Result<Self, ScenarioError> {
        if BUILTIN.iter().any(|(n, _)| *n == name_or_path) {
            return Self::builtin(name_or_path);
        }
        let path = std::path::Path::new(name_or_path);
        if !path.exists() {
            return Self::builtin(name_or_path);
        }
        let text = std::fs::read_to_string(path).map_err(|source| ScenarioError::Unreadable {
            path: path.to_path_buf(),
            source,
        })?;
        Self::from_toml(&text).map_err(ScenarioError::within(format!(
            "scenario file {}",
            path.display()
        )))
    }

    /// Parses and validates TOML text; errors name the field.
    pub fn from_toml(text: &str) -> Result<Self, ScenarioError> {
        let scenario: Scenario =
            toml::from_str(text).map_err(|e| ScenarioError::Syntax(e.to_string()))?;
        scenario.validate()?;
        Ok(scenario)
    }

    /// Checks every number for sense; the error names the field.
    pub fn validate(&self) -> Result<(), ScenarioError> {
        positive("duration_h", self.duration_h)?;
        within("duration_h", self.duration_h, 0.0, 24.0 * 366.0)?;
        within("start_hour", self.start_hour, 0.0, 24.0)?;
        within(
            "sample_period_ms",
            f64::from(self.sample_period_ms),
            1.0,
            60_000.0,
        )?;
        match &self.source {
            SourceParams::Cell { cell } => validate_cell(cell)?,
            SourceParams::Solar {
                cell,
                daylight,
                cell_celsius,
            } => validate_solar(cell, daylight, *cell_celsius)?,
            SourceParams::Supercap { cap } => validate_supercap(cap)?,
            SourceParams::Thermoelectric { generator, pipe } => validate_teg(generator, pipe)?,
        }
        self.validate_converter()?;
        self.validate_load()?;
        self.validate_front_end()?;
        self.node_config()?;
        Ok(())
    }

    fn validate_converter(&self) -> Result<(), ScenarioError> {
        let c = &self.converter;
        positive("converter.start_v", c.start_v)?;
        positive("converter.stop_v", c.stop_v)?;
        if c.stop_v >= c.start_v {
            return Err(ScenarioError::StopNotBelowStart {
                stop_v: c.stop_v,
                start_v: c.start_v,
            });
        }
        match c.input {
            InputMode::Resistive { ohms } => positive("converter.input.ohms", ohms)?,
            InputMode::FractionalVoc { fraction } => {
                within("converter.input.fraction", fraction, 0.05, 0.99)?
            }
        }
        within("converter.peak_efficiency", c.peak_efficiency, 0.0, 1.0)?;
        within(
            "converter.efficiency_floor_v",
            c.efficiency_floor_v,
            0.0,
            100.0,
        )?;
        positive("converter.efficiency_knee_v", c.efficiency_knee_v)?;
        within("converter.quiescent_w", c.quiescent_w, 0.0, 10.0)?;
        positive("converter.output_capacitance_f", c.output_capacitance_f)?;
        within("converter.initial_output_v", c.initial_output_v, 0.0, 100.0)?;
        if let Some(v) = c.regulation_v {
            positive("converter.regulation_v", v)?;
        }
        if let Some(v) = c.fault_at_s {
            within("converter.fault_at_s", v, 0.0, 1e9)?;
        }
        if let Some(v) = c.fault_for_s {
            positive("converter.fault_for_s", v)?;
        }
        Ok(())
    }

    fn validate_load(&self) -> Result<(), ScenarioError> {
        match self.load {
            LoadParams::SensorNode {
                sleep_a,
                active_a,
                period_s,
                active_s,
                min_v,
                sheddable_a,
            } => {
                within("load.sleep_a", sleep_a, 0.0, 10.0)?;
                within("load.active_a", active_a, 0.0, 10.0)?;
                positive("load.period_s", period_s)?;
                within("load.active_s", active_s, 0.0, period_s)?;
                within("load.min_v", min_v, 0.0, 100.0)?;
                within("load.sheddable_a", sheddable_a, 0.0, 10.0)?;
            }
            LoadParams::Led { saturation_a, n_vt } => {
                positive("load.saturation_a", saturation_a)?;
                positive("load.n_vt", n_vt)?;
            }
        }
        Ok(())
    }

    fn validate_front_end(&self) -> Result<(), ScenarioError> {
        use gleaner_protocol::limits::{MAX_ADC_BITS, MIN_ADC_BITS};
        within(
            "front_end.adc_bits",
            f64::from(self.front_end.adc_bits),
            f64::from(MIN_ADC_BITS),
            f64::from(MAX_ADC_BITS),
        )?;
        positive("front_end.reference_v", self.front_end.reference_v)?;
        within("front_end.noise_lsb", self.front_end.noise_lsb, 0.0, 1000.0)?;
        let e = &self.front_end.errors;
        for (name, error) in [
            ("input_voltage", e.input_voltage),
            ("input_current", e.input_current),
            ("output_voltage", e.output_voltage),
            ("output_current", e.output_current),
        ] {
            within(
                &format!("front_end.errors.{name}.gain_error_ppm"),
                error.gain_error_ppm,
                -500_000.0,
                500_000.0,
            )?;
            within(
                &format!("front_end.errors.{name}.offset"),
                error.offset,
                -10.0,
                10.0,
            )?;
        }
        let own = &self.front_end.channel_adc;
        for (name, adc) in [
            ("input_voltage", own.input_voltage),
            ("input_current", own.input_current),
            ("output_voltage", own.output_voltage),
            ("output_current", own.output_current),
        ] {
            if let Some(adc) = adc {
                let bits = f64::from(adc.bits);
                let field = format!("front_end.channel_adc.{name}");
                within(
                    &format!("{field}.bits"),
                    bits,
                    1.0,
                    f64::from(self.front_end.adc_bits),
                )?;
                positive(&format!("{field}.full_scale_v"), adc.full_scale_v)?;
            }
        }
        if self.front_end.calibration().is_none() {
            return Err(ScenarioError::FrontEndInvalid);
        }
        Ok(())
    }

    /// The configuration this scenario gives its node, checked by the node's own rules.
    pub fn node_config(&self) -> Result<gleaner_protocol::NodeConfig, ScenarioError> {
        let mut base = gleaner_firmware::config::default_config();
        base.calibration = self
            .front_end
            .calibration()
            .ok_or(ScenarioError::FrontEndInvalid)?;
        // The node is told the storage on the output and the load's own
        // supply window, unless [node] says otherwise, ...
        base.output_storage_uf = (self.converter.output_capacitance_f * 1e6).round() as u32;
        if let Some((min_v, restart_v)) = self.load.supply_window_v() {
            base.thresholds.load_min_uv = (min_v * 1e6).round() as u32;
            base.thresholds.load_restart_uv = (restart_v * 1e6).round() as u32;
        }
        // ... and what its shed pin switches off, as the load's designer knows ...
        base.shed_load_na = (self.load.sheddable_a() * 1e9).round() as u32;
        // ... and how its converter holds its input and output, as its data sheet would.
        base.converter = gleaner_protocol::ConverterModel {
            mppt_fraction_ppm: match self.converter.input {
                InputMode::FractionalVoc { fraction } => (fraction * 1e6).round() as u32,
                InputMode::Resistive { .. } => 0,
            },
            output_regulated: self.converter.regulation_v.is_some(),
        };
        let config = self.node.apply(&base).map_err(ScenarioError::Settings)?;
        gleaner_firmware::config::validate(&config).map_err(ScenarioError::Refused)?;
        Ok(config)
    }

    /// The virtual node's stable id: FNV-1a (64 bit) of the scenario's name
    /// and seed, so two runs of one scenario are one node.
    pub fn node_id(&self) -> u64 {
        const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
        const FNV_PRIME: u64 = 0x0000_0100_0000_01b3;
        self.name
            .bytes()
            .chain(self.seed.to_le_bytes())
            .fold(FNV_OFFSET, |h, b| {
                (h ^ u64::from(b)).wrapping_mul(FNV_PRIME)
            })
    }

    /// Simulated length in seconds.
    pub fn duration_s(&self) -> f64 {
        self.duration_h * 3600.0
    }
}

fn validate_cell(cell: &CellParams) -> Result<(), ScenarioError> {
    positive("source.capacity_mah", cell.capacity_mah)?;
    positive("source.fresh_resistance_ohm", cell.fresh_resistance_ohm)?;
    within("source.initial_depth", cell.initial_depth, 0.0, 1.2)?;
    Ok(())
}

fn validate_solar(
    cell: &PvCell,
    daylight: &DaylightParams,
    cell_celsius: f64,
) -> Result<(), ScenarioError> {
    positive("source.cell.photocurrent_ref_a", cell.photocurrent_ref_a)?;
    positive(
        "source.cell.saturation_current_ref_a",
        cell.saturation_current_ref_a,
    )?;
    within("source.cell.series_ohm", cell.series_ohm, 0.0, 1e6)?;
    positive("source.cell.shunt_ref_ohm", cell.shunt_ref_ohm)?;
    positive(
        "source.cell.ideality_voltage_ref_v",
        cell.ideality_voltage_ref_v,
    )?;
    within("source.cell_celsius", cell_celsius, -60.0, 120.0)?;
    within(
        "source.daylight.sunrise_hour",
        daylight.sunrise_hour,
        0.0,
        24.0,
    )?;
    within(
        "source.daylight.sunset_hour",
        daylight.sunset_hour,
        daylight.sunrise_hour,
        24.0,
    )?;
    within("source.daylight.peak_w_m2", daylight.peak_w_m2, 0.0, 1500.0)?;
    within(
        "source.daylight.night_w_m2",
        daylight.night_w_m2,
        0.0,
        1500.0,
    )?;
    within(
        "source.daylight.clouds_per_hour",
        daylight.clouds_per_hour,
        0.0,
        60.0,
    )?;
    positive("source.daylight.cloud_minutes", daylight.cloud_minutes)?;
    within(
        "source.daylight.cloud_transmission",
        daylight.cloud_transmission,
        0.0,
        1.0,
    )?;
    Ok(())
}

fn validate_supercap(cap: &SupercapParams) -> Result<(), ScenarioError> {
    positive("source.capacitance_f", cap.capacitance_f)?;
    positive("source.series_ohm", cap.series_ohm)?;
    positive("source.leakage_ohm", cap.leakage_ohm)?;
    within("source.initial_v", cap.initial_v, 0.0, 100.0)?;
    Ok(())
}

fn validate_teg(generator: &TegParams, pipe: &PipeParams) -> Result<(), ScenarioError> {
    positive(
        "source.generator.seebeck_v_per_k",
        generator.seebeck_v_per_k,
    )?;
    positive("source.generator.internal_ohm", generator.internal_ohm)?;
    within(
        "source.pipe.running_delta_k",
        pipe.running_delta_k,
        0.0,
        500.0,
    )?;
    within("source.pipe.idle_delta_k", pipe.idle_delta_k, 0.0, 500.0)?;
    positive("source.pipe.cycle_minutes", pipe.cycle_minutes)?;
    within("source.pipe.duty", pipe.duty, 0.0, 1.0)?;
    positive(
        "source.pipe.time_constant_minutes",
        pipe.time_constant_minutes,
    )?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_builtin_parses_and_validates() {
        for (name, _) in BUILTIN {
            let s = Scenario::builtin(name).unwrap();
            assert_eq!(&s.name, name);
            assert!(
                s.description.to_lowercase().contains("invented"),
                "{name} must say it is invented"
            );
        }
    }

    #[test]
    fn errors_name_the_bad_field() {
        let text = BUILTIN[0].1.replacen("stop_v = 0.7", "stop_v = 0.99", 1);
        let err = Scenario::from_toml(&text).unwrap_err();
        assert!(format!("{err:#}").contains("converter.stop_v"), "{err:#}");
        assert!(
            matches!(err, ScenarioError::StopNotBelowStart { stop_v, start_v } if stop_v == 0.99 && start_v < stop_v),
            "{err:?}"
        );
        let text = BUILTIN[0].1.replace("start_v = 0.9\n", "start_v = 0.6\n");
        let err = Scenario::from_toml(&text).unwrap_err();
        assert!(
            matches!(
                err,
                ScenarioError::Refused(gleaner_protocol::Refusal::HoldNotBelowStart)
            ),
            "{err:?}"
        );
        assert!(
            format!("{err:#}")
                .contains("[node] settings are refused by the node: the stop voltage"),
            "{err:#}"
        );
        // A channel's own scale may not have more bits than the converter's results.
        let (_, with_front_end) = BUILTIN
            .iter()
            .find(|(_, text)| text.contains("[front_end]"))
            .expect("a built-in scenario describes its front-end");
        let text = format!(
            "{with_front_end}\n[front_end.channel_adc.input_current]\nbits = 30\nfull_scale_v = 0.15\n"
        );
        let err = Scenario::from_toml(&text).unwrap_err();
        assert!(
            format!("{err:#}").contains("front_end.channel_adc.input_current.bits"),
            "{err:#}"
        );
        assert!(
            matches!(&err, ScenarioError::OutOfRange { field, value, .. } if field.ends_with("input_current.bits") && *value == 30.0),
            "{err:?}"
        );
        let text = format!("{}\nbogus = 1\n", BUILTIN[0].1);
        let err = Scenario::from_toml(&text).unwrap_err();
        assert!(format!("{err:#}").contains("bogus"), "{err:#}");
        assert!(matches!(err, ScenarioError::Syntax(_)), "{err:?}");
        let err = Scenario::builtin("nope").unwrap_err();
        assert!(err.to_string().contains("greenhouse-day"));
        assert!(matches!(err, ScenarioError::Unknown { ref name, .. } if name == "nope"));
        assert!(!err.in_a_file());
    }

    #[test]
    fn a_fault_in_a_file_names_the_file_and_is_marked_as_such() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("mine.toml");
        let text = BUILTIN[0].1.replacen("stop_v = 0.7", "stop_v = 0.99", 1);
        std::fs::write(&path, text).unwrap();
        let err = Scenario::load(path.to_str().unwrap()).unwrap_err();
        assert!(err.in_a_file());
        assert!(matches!(
            err.innermost(),
            ScenarioError::StopNotBelowStart { .. }
        ));
        let shown = format!("{:#}", anyhow::Error::new(err));
        assert!(shown.starts_with("scenario file "), "{shown}");
        assert!(
            shown.contains(": converter.stop_v (0.99) must be below converter.start_v"),
            "{shown}"
        );
    }

    #[test]
    fn the_node_is_told_its_load_as_its_designer_knows_it() {
        // greenhouse-day's load: minimum 1.9 V, 60 µA on the shed pin.
        let config = Scenario::builtin("greenhouse-day")
            .unwrap()
            .node_config()
            .unwrap();
        assert_eq!(config.thresholds.load_min_uv, 1_900_000);
        assert_eq!(config.shed_load_na, 60_000);
        // An LED has no shed pin.
        let config = Scenario::builtin("crate-beacon")
            .unwrap()
            .node_config()
            .unwrap();
        assert_eq!(config.shed_load_na, 0);
    }
}
