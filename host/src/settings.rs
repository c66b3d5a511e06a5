//! Node settings as people write them (TOML, volts and seconds), turned into
//! the wire's [`NodeConfig`] on top of a base configuration.

use anyhow::Result;
use gleaner_firmware::config::MAX_SCALE_Q20;
use gleaner_protocol::{Calibration, Channel, ChannelCal, NodeConfig, Thresholds};
use serde::{Deserialize, Serialize};

use crate::front_end::FrontEndParams;

/// Why settings cannot be applied: each names the key at fault.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SettingsError {
    /// Not a settings file: bad TOML, an unknown key, a wrong type.
    #[error("invalid node settings: {0}")]
    Syntax(String),
    /// A value outside what its key accepts.
    #[error("{key} = {value}{unit} is outside {range}")]
    OutOfRange {
        /// The key.
        key: String,
        /// The value given.
        value: f64,
        /// Its unit, with a leading space (empty for a plain number).
        unit: &'static str,
        /// What is accepted, in words.
        range: String,
    },
    /// A node name longer than the wire carries.
    #[error("name = {name:?} is longer than {max} bytes")]
    NameTooLong {
        /// The name given.
        name: String,
        /// The longest name, bytes.
        max: usize,
    },
    /// A front-end and two-point corrections in one file.
    #[error("front_end and two_point cannot be combined: send the front-end first, measure, then send the two-point corrections")]
    FrontEndWithTrim,
    /// A front-end with a zero divider, shunt or gain.
    #[error("front_end: a divider, shunt or gain is zero or the scale overflows")]
    FrontEndInvalid,
    /// A two-point correction that cannot be used, and why.
    #[error("{key}: {problem}")]
    Trim {
        /// The key (`two_point.CHANNEL`).
        key: String,
        /// What is wrong and what to do.
        problem: String,
    },
}

impl SettingsError {
    fn trim(key: &str, problem: impl Into<String>) -> Self {
        SettingsError::Trim {
            key: key.to_string(),
            problem: problem.into(),
        }
    }
}

/// Optional overrides of a node's configuration. Absent fields keep the base value.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NodeSettings {
    /// Length of a report interval, ms.
    pub report_interval_ms: Option<u32>,
    /// Input voltage at which the converter can cold-start, V.
    pub start_v: Option<f64>,
    /// The converter's stop voltage: below it on the input, the converter
    /// stops (`hold_v` before), V.
    #[serde(alias = "hold_v")]
    pub stop_v: Option<f64>,
    /// The warning band above the stop voltage: input inside it is Sagging
    /// (`sag_margin_v` before), V.
    #[serde(alias = "sag_margin_v")]
    pub warning_band_v: Option<f64>,
    /// Output good: at or above it the converter counts as delivering
    /// (`output_up_v` before), V.
    #[serde(alias = "output_up_v")]
    pub output_good_v: Option<f64>,
    /// Output lost: below it with a healthy input the converter has stalled
    /// (`output_down_v` before), V.
    #[serde(alias = "output_down_v")]
    pub output_lost_v: Option<f64>,
    /// Debounce of every transition, ms.
    pub debounce_ms: Option<u32>,
    /// Longest cold start, s.
    pub cold_start_timeout_s: Option<f64>,
    /// Sagging when cutoff is forecast within this time, s.
    pub forecast_horizon_s: Option<f64>,
    /// Input current floor: below it the converter counts as drawing no input
    /// current (cause `no-input-current`; `input_idle_ua` before), µA.
    #[serde(alias = "input_idle_ua")]
    pub input_floor_ua: Option<f64>,
    /// Output storage capacitance, µF (0: none).
    pub output_storage_uf: Option<u32>,
    /// Time with brown-out out of sight before shed load is restored, s.
    pub load_restore_s: Option<f64>,
    /// The load's own minimum supply voltage (it browns out below), V.
    pub load_min_v: Option<f64>,
    /// Supply voltage at which a browned-out load starts again, V.
    pub load_restart_v: Option<f64>,
    /// Shed load when brown-out is forecast within this time, s.
    pub brownout_horizon_s: Option<f64>,
    /// Current the load-shed pin switches off, from the load's design, µA
    /// (0: not known; the node learns it from its first shed).
    pub shed_load_ua: Option<f64>,
    /// The node's name (letters, digits, space and - _ . :).
    pub name: Option<String>,
    /// The fraction of the source's open-circuit voltage at which the
    /// converter holds its input (fractional open-circuit MPPT, from its data
    /// sheet or setting resistors); 0 when it has none. The node refuses a
    /// value outside its accepted range.
    pub mppt_fraction: Option<f64>,
    /// True when the converter regulates its output voltage.
    pub output_regulated: Option<bool>,
    /// The front-end, from which the calibration is computed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub front_end: Option<FrontEndParams>,
    /// Two-point corrections of the node's present calibration, per channel.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub two_point: Option<TwoPointTrims>,
}

/// Two-point corrections, one table per channel that needs one.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TwoPointTrims {
    /// Harvester voltage.
    pub input_voltage: Option<TwoPoint>,
    /// Harvester current.
    pub input_current: Option<TwoPoint>,
    /// Load voltage.
    pub output_voltage: Option<TwoPoint>,
    /// Load current.
    pub output_current: Option<TwoPoint>,
}

impl TwoPointTrims {
    /// The correction of `channel`, if given.
    pub fn channel_mut(&mut self, channel: Channel) -> &mut Option<TwoPoint> {
        match channel {
            Channel::InputVoltage => &mut self.input_voltage,
            Channel::InputCurrent => &mut self.input_current,
            Channel::OutputVoltage => &mut self.output_voltage,
            Channel::OutputCurrent => &mut self.output_current,
        }
    }

    /// The settings key of `channel`'s correction (under `two_point`).
    pub const fn key(channel: Channel) -> &'static str {
        match channel {
            Channel::InputVoltage => "input_voltage",
            Channel::InputCurrent => "input_current",
            Channel::OutputVoltage => "output_voltage",
            Channel::OutputCurrent => "output_current",
        }
    }

    /// The correction of `channel`, if given.
    pub fn channel(&self, channel: Channel) -> Option<TwoPoint> {
        self.clone().channel_mut(channel).take()
    }
}

/// What the node reported at two known inputs, and what a reference meter
/// read there. Voltage channels take `_v` fields, current channels `_ma`.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TwoPoint {
    /// The node's readings, V.
    pub reported_v: Option<[f64; 2]>,
    /// The reference readings, V.
    pub actual_v: Option<[f64; 2]>,
    /// The node's readings, mA.
    pub reported_ma: Option<[f64; 2]>,
    /// The reference readings, mA.
    pub actual_ma: Option<[f64; 2]>,
}

impl TwoPoint {
    /// The pair in channel units (µV or nA) for a voltage or current channel.
    fn points(&self, field: &str, voltage: bool) -> Result<([f64; 2], [f64; 2]), SettingsError> {
        let (reported, actual, unit, other) = if voltage {
            let other = self.reported_ma.or(self.actual_ma);
            (self.reported_v, self.actual_v, "_v", other)
        } else {
            let other = self.reported_v.or(self.actual_v);
            (self.reported_ma, self.actual_ma, "_ma", other)
        };
        if other.is_some() {
            return Err(SettingsError::trim(
                field,
                format!("this channel takes reported{unit} and actual{unit}"),
            ));
        }
        let (Some(reported), Some(actual)) = (reported, actual) else {
            return Err(SettingsError::trim(
                field,
                format!("give both reported{unit} and actual{unit}"),
            ));
        };
        let all = reported.iter().chain(&actual);
        if all.clone().any(|v| !v.is_finite() || *v < 0.0) {
            return Err(SettingsError::trim(
                field,
                "values must be finite and not negative",
            ));
        }
        // V to µV and mA to nA are both a factor of 10^6.
        Ok((reported.map(|v| v * 1e6), actual.map(|v| v * 1e6)))
    }
}

/// The calibration that turns what `present` reported into what was actually
/// there: readings are mapped back to ADC counts (fractions kept) and the
/// firmware's two-point rule gives the new scale and offset.
pub fn trimmed(
    field: &str,
    present: &ChannelCal,
    trim: &TwoPoint,
    voltage: bool,
) -> Result<ChannelCal, SettingsError> {
    use gleaner_firmware::calibration::{
        counts_q8_for, two_point, ReferencePoint, COUNT_FRACTION_BITS,
    };
    let (reported, actual) = trim.points(field, voltage)?;
    let unit = if voltage { "µV" } else { "nA" };
    let mut points = [(0u64, 0u32); 2];
    for ((r, a), point) in reported.iter().zip(&actual).zip(&mut points) {
        let whole = |x: f64| {
            u32::try_from(x.round() as i64)
                .map_err(|_| SettingsError::trim(field, format!("{x} {unit} is out of range")))
        };
        let counts = counts_q8_for(present, whole(*r)?).ok_or_else(|| {
            SettingsError::trim(field, format!("a reading of {r:.0} {unit} is at or below the channel's zero; use points well above it"))
        })?;
        *point = (counts, whole(*a)?);
    }
    let [(c1, a1), (c2, a2)] = points;
    if c1.abs_diff(c2) < 1 << COUNT_FRACTION_BITS {
        return Err(SettingsError::trim(field, "the two reported readings are less than one ADC count apart; use points far apart (near 20 % and 80 % of the range)"));
    }
    let ((c1, a1), (c2, a2)) = if c1 < c2 {
        ((c1, a1), (c2, a2))
    } else {
        ((c2, a2), (c1, a1))
    };
    if a2 <= a1 {
        return Err(SettingsError::trim(
            field,
            "the actual values do not rise with the reported ones",
        ));
    }
    let cal = two_point(
        ReferencePoint {
            counts_q8: c1,
            value: a1,
        },
        ReferencePoint {
            counts_q8: c2,
            value: a2,
        },
    )
    .ok_or_else(|| SettingsError::trim(field, "the corrected scale or offset is out of range"))?;
    if cal.units_per_count_q20 > MAX_SCALE_Q20 {
        return Err(SettingsError::trim(
            field,
            "the corrected scale is out of range",
        ));
    }
    Ok(cal)
}

/// `value` when it lies in `range`, else the error naming `key`.
fn within(
    key: &str,
    value: f64,
    unit: &'static str,
    range: std::ops::RangeInclusive<f64>,
    words: &str,
) -> Result<f64, SettingsError> {
    if range.contains(&value) {
        Ok(value)
    } else {
        Err(SettingsError::OutOfRange {
            key: key.to_string(),
            value,
            unit,
            range: words.to_string(),
        })
    }
}

fn volts_to_uv(field: &str, v: f64) -> Result<u32, SettingsError> {
    let v = within(field, v, " V", 0.0..=4000.0, "0 to 4000 V")?;
    Ok((v * 1e6).round() as u32)
}

fn seconds_to_ms(field: &str, s: f64) -> Result<u32, SettingsError> {
    let s = within(field, s, " s", 0.0..=4.0e6, "0 to 4,000,000 s")?;
    Ok((s * 1e3).round() as u32)
}

impl NodeSettings {
    /// The settings a configuration holds, in people's units (every field but
    /// the calibration's, which stays as the node reports it): what
    /// `gleaner node info --json` shows, and what [`NodeSettings::apply`]
    /// turns back into the same configuration.
    pub fn from_config(c: &NodeConfig) -> Self {
        let t = &c.thresholds;
        let v = |uv: u32| Some(f64::from(uv) / 1e6);
        let s = |ms: u32| Some(f64::from(ms) / 1e3);
        NodeSettings {
            report_interval_ms: Some(c.report_interval_ms),
            start_v: v(t.start_uv),
            stop_v: v(t.hold_uv),
            warning_band_v: v(t.sag_margin_uv),
            output_good_v: v(t.output_up_uv),
            output_lost_v: v(t.output_down_uv),
            debounce_ms: Some(t.debounce_ms),
            cold_start_timeout_s: s(t.cold_start_timeout_ms),
            forecast_horizon_s: s(t.forecast_horizon_ms),
            input_floor_ua: Some(f64::from(t.input_idle_na) / 1e3),
            output_storage_uf: Some(c.output_storage_uf),
            load_restore_s: s(c.load_restore_ms),
            load_min_v: v(t.load_min_uv),
            load_restart_v: v(t.load_restart_uv),
            brownout_horizon_s: s(t.brownout_horizon_ms),
            shed_load_ua: Some(f64::from(c.shed_load_na) / 1e3),
            name: Some(c.name.as_str().to_owned()),
            mppt_fraction: Some(f64::from(c.converter.mppt_fraction_ppm) / 1e6),
            output_regulated: Some(c.converter.output_regulated),
            front_end: None,
            two_point: None,
        }
    }

    /// Reads settings from TOML text; errors name the field and line.
    pub fn from_toml(text: &str) -> Result<Self, SettingsError> {
        toml::from_str(text).map_err(|e| SettingsError::Syntax(e.to_string()))
    }

    /// Applies the overrides to `base`. Unit and range errors name the field;
    /// the node itself checks the rules between fields.
    pub fn apply(&self, base: &NodeConfig) -> Result<NodeConfig, SettingsError> {
        let mut c = base.clone();
        if let Some(v) = self.report_interval_ms {
            c.report_interval_ms = v;
        }
        self.apply_converter_thresholds(&mut c.thresholds)?;
        self.apply_load(&mut c)?;
        self.apply_converter_model(&mut c)?;
        if let Some(name) = &self.name {
            c.name = gleaner_protocol::NodeName::try_from(name.as_str()).map_err(|_| {
                SettingsError::NameTooLong {
                    name: name.clone(),
                    max: gleaner_protocol::NODE_NAME_LEN,
                }
            })?;
        }
        self.apply_calibration(&mut c.calibration)?;
        Ok(c)
    }

    /// The converter's voltages, timings and forecast horizon.
    fn apply_converter_thresholds(&self, t: &mut Thresholds) -> Result<(), SettingsError> {
        if let Some(v) = self.start_v {
            t.start_uv = volts_to_uv("start_v", v)?;
        }
        if let Some(v) = self.stop_v {
            t.hold_uv = volts_to_uv("stop_v", v)?;
        }
        if let Some(v) = self.warning_band_v {
            t.sag_margin_uv = volts_to_uv("warning_band_v", v)?;
        }
        if let Some(v) = self.output_good_v {
            t.output_up_uv = volts_to_uv("output_good_v", v)?;
        }
        if let Some(v) = self.output_lost_v {
            t.output_down_uv = volts_to_uv("output_lost_v", v)?;
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
        if let Some(v) = self.input_floor_ua {
            let v = within("input_floor_ua", v, " µA", 0.0..=4.0e6, "0 to 4,000,000 µA")?;
            t.input_idle_na = (v * 1e3).round() as u32;
        }
        Ok(())
    }

    /// The load: its storage, minimum and restart voltages, brown-out
    /// horizon and shedding.
    fn apply_load(&self, c: &mut NodeConfig) -> Result<(), SettingsError> {
        if let Some(v) = self.output_storage_uf {
            c.output_storage_uf = v;
        }
        if let Some(v) = self.load_restore_s {
            c.load_restore_ms = seconds_to_ms("load_restore_s", v)?;
        }
        if let Some(v) = self.load_min_v {
            c.thresholds.load_min_uv = volts_to_uv("load_min_v", v)?;
        }
        if let Some(v) = self.load_restart_v {
            c.thresholds.load_restart_uv = volts_to_uv("load_restart_v", v)?;
        }
        if let Some(v) = self.brownout_horizon_s {
            c.thresholds.brownout_horizon_ms = seconds_to_ms("brownout_horizon_s", v)?;
        }
        if let Some(v) = self.shed_load_ua {
            let max_ua = f64::from(gleaner_protocol::MAX_SHED_LOAD_NA) / 1e3;
            let words = format!("0 to {max_ua} µA");
            let v = within("shed_load_ua", v, " µA", 0.0..=max_ua, &words)?;
            c.shed_load_na = (v * 1e3).round() as u32;
        }
        Ok(())
    }

    /// How the converter treats its input and output.
    fn apply_converter_model(&self, c: &mut NodeConfig) -> Result<(), SettingsError> {
        if let Some(f) = self.mppt_fraction {
            let words = "0 to 1 (a share of the open-circuit voltage)";
            let f = within("mppt_fraction", f, "", 0.0..=1.0, words)?;
            c.converter.mppt_fraction_ppm = (f * 1e6).round() as u32;
        }
        if let Some(regulated) = self.output_regulated {
            c.converter.output_regulated = regulated;
        }
        Ok(())
    }

    /// A new front-end, or two-point corrections of the present calibration.
    fn apply_calibration(&self, cal: &mut Calibration) -> Result<(), SettingsError> {
        if let Some(fe) = &self.front_end {
            if self.two_point.is_some() {
                return Err(SettingsError::FrontEndWithTrim);
            }
            *cal = fe.calibration().ok_or(SettingsError::FrontEndInvalid)?;
        }
        let Some(trims) = &self.two_point else {
            return Ok(());
        };
        for channel in Channel::ALL {
            if let Some(trim) = trims.channel(channel) {
                let field = format!("two_point.{}", TwoPointTrims::key(channel));
                let voltage = matches!(channel, Channel::InputVoltage | Channel::OutputVoltage);
                let present = *cal.channel(channel);
                *cal.channel_mut(channel) = trimmed(&field, &present, &trim, voltage)?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_configuration_read_as_settings_applies_back_to_itself() {
        let mut config = gleaner_firmware::config::default_config();
        config.thresholds.hold_uv = 312_345;
        config.thresholds.input_idle_na = 1_234;
        config.load_restore_ms = 90_500;
        config.name = gleaner_protocol::NodeName::try_from("greenhouse 3").unwrap();
        config.converter.mppt_fraction_ppm = 780_000;
        config.converter.output_regulated = true;
        config.shed_load_na = 45_500;
        let settings = NodeSettings::from_config(&config);
        assert_eq!(settings.shed_load_ua, Some(45.5));
        assert_eq!(settings.stop_v, Some(0.312345));
        assert_eq!(
            (settings.mppt_fraction, settings.output_regulated),
            (Some(0.78), Some(true))
        );
        assert_eq!(settings.load_restore_s, Some(90.5));
        let other = gleaner_firmware::config::default_config();
        assert_eq!(settings.apply(&other).unwrap(), config);
    }
    use gleaner_firmware::config::default_config;

    #[test]
    fn overrides_apply_in_wire_units() {
        let s = NodeSettings::from_toml(
            "stop_v = 0.65\nreport_interval_ms = 5000\nforecast_horizon_s = 90",
        )
        .unwrap();
        let c = s.apply(&default_config()).unwrap();
        assert_eq!(c.thresholds.hold_uv, 650_000);
        // Settings files written with the earlier key names still read.
        let old = NodeSettings::from_toml("hold_v = 0.65\noutput_down_v = 1.5").unwrap();
        assert_eq!((old.stop_v, old.output_lost_v), (Some(0.65), Some(1.5)));
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
        let err = NodeSettings::from_toml("mppt_fraction = 78")
            .unwrap()
            .apply(&default_config())
            .unwrap_err();
        assert!(err.to_string().contains("mppt_fraction = 78"), "{err}");
        let err = NodeSettings::from_toml("shed_load_ua = -3")
            .unwrap()
            .apply(&default_config())
            .unwrap_err();
        assert!(err.to_string().contains("shed_load_ua = -3"), "{err}");
        // Callers match on the kind and the key, not the words.
        assert!(
            matches!(&err, SettingsError::OutOfRange { key, value, .. } if key == "shed_load_ua" && *value == -3.0),
            "{err:?}"
        );
        let err = NodeSettings::from_toml("name = \"a name far too long for the wire\"")
            .unwrap()
            .apply(&default_config())
            .unwrap_err();
        assert!(matches!(err, SettingsError::NameTooLong { .. }), "{err:?}");
        assert!(matches!(
            NodeSettings::from_toml("hold_volts = 0.6"),
            Err(SettingsError::Syntax(_))
        ));
    }

    #[test]
    fn two_point_trim_removes_gain_and_offset_error() {
        use gleaner_firmware::calibration::apply;
        // A 14-bit channel with a 1.2 V span (73.2421875 µV per count) whose
        // front-end reads 1.5 % high with a 2 mV offset: at 0.200 V and
        // 0.900 V on a reference meter the node showed 0.205 V and 0.9155 V.
        let mut base = default_config();
        base.calibration.input_voltage = ChannelCal {
            units_per_count_q20: (73.242_187_5 * 1_048_576.0) as u64,
            offset: 0,
        };
        let s = NodeSettings::from_toml(
            "[two_point.input_voltage]\nreported_v = [0.205, 0.9155]\nactual_v = [0.200, 0.900]",
        )
        .unwrap();
        let trimmed = s.apply(&base).unwrap().calibration.input_voltage;
        // Other channels are untouched.
        assert_eq!(
            s.apply(&base).unwrap().calibration.input_current,
            base.calibration.input_current
        );
        for actual_mv in [50u32, 200, 450, 700, 900, 1100] {
            let shown_uv = f64::from(actual_mv) * 1e3 * 1.015 + 2_000.0;
            let counts = (shown_uv / 73.242_187_5).round() as u32;
            let (corrected, _) = apply(&trimmed, counts);
            // Within one count (73 µV) of the truth, where the untrimmed
            // channel was off by 2.8 mV to 18.5 mV.
            assert!(
                corrected.abs_diff(actual_mv * 1_000) <= 74,
                "{actual_mv} mV -> {corrected} µV"
            );
        }
    }

    #[test]
    fn two_point_mistakes_are_named() {
        let base = default_config();
        let err = |text: &str| {
            NodeSettings::from_toml(text)
                .and_then(|s| s.apply(&base))
                .unwrap_err()
                .to_string()
        };
        let e = err("[two_point.input_current]\nreported_v = [0.1, 0.5]\nactual_v = [0.1, 0.5]");
        assert!(e.contains("reported_ma"), "{e}");
        let e = err("[two_point.output_voltage]\nreported_v = [2.0, 2.0]\nactual_v = [2.0, 3.0]");
        assert!(e.contains("less than one ADC count"), "{e}");
        let e = err("[two_point.output_voltage]\nreported_v = [2.0, 3.0]\nactual_v = [3.0, 2.0]");
        assert!(e.contains("do not rise"), "{e}");
        let e = err("[two_point.input_voltage]\nreported_v = [0.2, 0.9]");
        assert!(e.contains("both"), "{e}");
        let typed = NodeSettings::from_toml("[two_point.output_current]\nreported_ma = [1.0]")
            .map(|s| s.apply(&base));
        assert!(matches!(typed, Err(SettingsError::Syntax(_))), "{typed:?}");
        let typed = NodeSettings::from_toml("[two_point.output_current]\nreported_ma = [1.0, 2.0]")
            .unwrap()
            .apply(&base);
        assert!(
            matches!(&typed, Err(SettingsError::Trim { key, .. }) if key == "two_point.output_current"),
            "{typed:?}"
        );
        let mut s = NodeSettings::from_toml(
            "[two_point.input_voltage]\nreported_v = [0.2, 0.9]\nactual_v = [0.2, 0.9]",
        )
        .unwrap();
        s.front_end = Some(FrontEndParams::default_board());
        assert_eq!(s.apply(&base), Err(SettingsError::FrontEndWithTrim));
        assert!(SettingsError::FrontEndWithTrim
            .to_string()
            .contains("cannot be combined"));
    }
}
