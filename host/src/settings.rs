//! Node settings as people write them (TOML, volts and seconds), turned into
//! the wire's [`NodeConfig`] on top of a base configuration.

use anyhow::{bail, Context, Result};
use gleaner_protocol::NodeConfig;
use serde::{Deserialize, Serialize};

use crate::sim::adc::FrontEndParams;

/// Optional overrides of a node's configuration. Absent fields keep the base value.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NodeSettings {
    /// Length of a report interval, ms.
    pub report_interval_ms: Option<u32>,
    /// Input voltage at which the converter can cold-start, V.
    pub start_v: Option<f64>,
    /// Input voltage below which the converter stops, V.
    pub hold_v: Option<f64>,
    /// Margin above hold that counts as sagging, V.
    pub sag_margin_v: Option<f64>,
    /// Output voltage that counts as delivering, V.
    pub output_up_v: Option<f64>,
    /// Output voltage below which a healthy-input converter has stalled, V.
    pub output_down_v: Option<f64>,
    /// Debounce of every transition, ms.
    pub debounce_ms: Option<u32>,
    /// Longest cold start, s.
    pub cold_start_timeout_s: Option<f64>,
    /// Sag when cutoff is forecast within this time, s.
    pub forecast_horizon_s: Option<f64>,
    /// Input current below which the converter counts as not drawing, µA.
    pub input_idle_ua: Option<f64>,
    /// Output storage capacitance, µF (0: none).
    pub output_storage_uf: Option<u32>,
    /// Time in Harvesting before shed load is restored, s.
    pub load_restore_s: Option<f64>,
    /// The front-end, from which the calibration is computed.
    pub front_end: Option<FrontEndParams>,
}

fn volts_to_uv(field: &str, v: f64) -> Result<u32> {
    if !(0.0..=4000.0).contains(&v) {
        bail!("{field} = {v} V is outside 0 to 4000 V");
    }
    Ok((v * 1e6).round() as u32)
}

fn seconds_to_ms(field: &str, s: f64) -> Result<u32> {
    if !(0.0..=4.0e6).contains(&s) {
        bail!("{field} = {s} s is outside 0 to 4,000,000 s");
    }
    Ok((s * 1e3).round() as u32)
}

impl NodeSettings {
    /// Reads settings from TOML text; errors name the field and line.
    pub fn from_toml(text: &str) -> Result<Self> {
        toml::from_str(text).context("invalid node settings")
    }

    /// Applies the overrides to `base`. Unit and range errors name the field;
    /// the node itself checks the rules between fields.
    pub fn apply(&self, base: &NodeConfig) -> Result<NodeConfig> {
        let mut c = *base;
        let t = &mut c.thresholds;
        if let Some(v) = self.report_interval_ms {
            c.report_interval_ms = v;
        }
        if let Some(v) = self.start_v {
            t.start_uv = volts_to_uv("start_v", v)?;
        }
        if let Some(v) = self.hold_v {
            t.hold_uv = volts_to_uv("hold_v", v)?;
        }
        if let Some(v) = self.sag_margin_v {
            t.sag_margin_uv = volts_to_uv("sag_margin_v", v)?;
        }
        if let Some(v) = self.output_up_v {
            t.output_up_uv = volts_to_uv("output_up_v", v)?;
        }
        if let Some(v) = self.output_down_v {
            t.output_down_uv = volts_to_uv("output_down_v", v)?;
        }
        if let Some(v) = self.debounce_ms {
            t.debounce_ms = v;
        }
        if let Some(v) = self.cold_start_timeout_s {
            t.cold_start_timeout_ms = seconds_to_ms("cold_start_timeout_s", v)?;
        }
        if let Some(v) = self.forecast_horizon_s {
            t.forecast_horizon_ms = seconds_to_ms("forecast_horizon_s", v)?;
        }
        if let Some(v) = self.input_idle_ua {
            if !(0.0..=4.0e6).contains(&v) {
                bail!("input_idle_ua = {v} µA is outside 0 to 4,000,000 µA");
            }
            t.input_idle_na = (v * 1e3).round() as u32;
        }
        if let Some(v) = self.output_storage_uf {
            c.output_storage_uf = v;
        }
        if let Some(v) = self.load_restore_s {
            c.load_restore_ms = seconds_to_ms("load_restore_s", v)?;
        }
        if let Some(fe) = &self.front_end {
            c.calibration = fe
                .calibration()
                .context("front_end: a divider, shunt or gain is zero or the scale overflows")?;
        }
        Ok(c)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use gleaner_firmware::config::default_config;

    #[test]
    fn overrides_apply_in_wire_units() {
        let s = NodeSettings::from_toml(
            "hold_v = 0.65\nreport_interval_ms = 5000\nforecast_horizon_s = 90",
        )
        .unwrap();
        let c = s.apply(&default_config()).unwrap();
        assert_eq!(c.thresholds.hold_uv, 650_000);
        assert_eq!(c.report_interval_ms, 5_000);
        assert_eq!(c.thresholds.forecast_horizon_ms, 90_000);
        assert_eq!(c.thresholds.start_uv, default_config().thresholds.start_uv);
    }

    #[test]
    fn errors_name_the_field() {
        let err = NodeSettings::from_toml("hold_volts = 0.6").unwrap_err();
        assert!(format!("{err:#}").contains("hold_volts"), "{err:#}");
        let err = NodeSettings {
            start_v: Some(-1.0),
            ..Default::default()
        }
        .apply(&default_config())
        .unwrap_err();
        assert!(err.to_string().contains("start_v"));
    }
}
