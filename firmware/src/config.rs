//! Default configuration and the validation rules the node enforces.

use gleaner_protocol::{
    Calibration, Channel, ChannelCal, ConverterModel, NodeConfig, NodeName, Refusal, Thresholds,
};

use crate::front_end::DEFAULT_FRONT_END;

/// The limits the rules below enforce, written once in the protocol crate
/// (its refusal texts are formatted from them).
pub use gleaner_protocol::limits::*;

/// The calibration of the default front-end, worked out at compile time.
pub const DEFAULT_CALIBRATION: Calibration = match DEFAULT_FRONT_END.calibration() {
    Some(calibration) => calibration,
    // Never taken: the assertion below fails the build first.
    None => Calibration {
        adc_bits: DEFAULT_FRONT_END.result_bits,
        input_voltage: UNIT_SCALE,
        input_current: UNIT_SCALE,
        output_voltage: UNIT_SCALE,
        output_current: UNIT_SCALE,
    },
};
const _: () = assert!(
    DEFAULT_FRONT_END.calibration().is_some(),
    "the default front-end has a zero divider, shunt or gain"
);
const UNIT_SCALE: ChannelCal = ChannelCal {
    units_per_count_q20: 1 << 20,
    offset: 0,
};

/// The calibration of the default front-end ([`DEFAULT_CALIBRATION`]).
pub const fn default_calibration() -> Calibration {
    DEFAULT_CALIBRATION
}

/// Thresholds for a single-transistor or small boost stage: it starts near
/// 0.8 V and holds down to about 0.7 V (a silicon base-emitter junction needs
/// about 0.6 to 0.7 V: common practice).
pub const DEFAULT_THRESHOLDS: Thresholds = Thresholds {
    start_uv: 800_000,
    hold_uv: 700_000,
    sag_margin_uv: 50_000,
    output_up_uv: 2_000_000,
    output_down_uv: 1_600_000,
    debounce_ms: 200,
    cold_start_timeout_ms: 10_000,
    forecast_horizon_ms: 60_000,
    input_idle_na: 2_000,
    // A low-power microcontroller's brown-out level, restarting 0.2 V above
    // it (common practice for 1.8 V-class parts).
    load_min_uv: 1_800_000,
    load_restart_uv: 2_000_000,
    brownout_horizon_ms: 1_800_000,
};

/// The configuration a node starts with when nothing valid is stored.
pub fn default_config() -> NodeConfig {
    NodeConfig {
        calibration: default_calibration(),
        thresholds: DEFAULT_THRESHOLDS,
        report_interval_ms: 1_000,
        output_storage_uf: 0,
        load_restore_ms: 30_000,
        shed_load_na: 0,
        name: NodeName::new(),
        converter: ConverterModel::UNKNOWN,
    }
}

/// True for the characters a node name may hold: ASCII letters and digits,
/// space and `- _ . :`; no space at either end.
pub fn name_is_valid(name: &str) -> bool {
    let allowed = |c: char| c.is_ascii_alphanumeric() || matches!(c, ' ' | '-' | '_' | '.' | ':');
    name.chars().all(allowed) && !name.starts_with(' ') && !name.ends_with(' ')
}

/// Checks every rule; the first broken one is returned as the refusal reason.
pub fn validate(config: &NodeConfig) -> Result<(), Refusal> {
    let cal = &config.calibration;
    if !(MIN_ADC_BITS..=MAX_ADC_BITS).contains(&cal.adc_bits) {
        return Err(Refusal::AdcBitsOutOfRange);
    }
    for channel in Channel::ALL {
        let scale = cal.channel(channel).units_per_count_q20;
        if scale == 0 || scale > MAX_SCALE_Q20 {
            return Err(Refusal::ChannelScaleOutOfRange(channel));
        }
    }
    let t = &config.thresholds;
    if t.hold_uv >= t.start_uv {
        return Err(Refusal::HoldNotBelowStart);
    }
    if t.output_down_uv >= t.output_up_uv {
        return Err(Refusal::OutputThresholdsInverted);
    }
    if t.sag_margin_uv > t.hold_uv || t.sag_margin_uv > MAX_SAG_MARGIN_UV {
        return Err(Refusal::SagMarginOutOfRange);
    }
    if t.debounce_ms > MAX_DEBOUNCE_MS {
        return Err(Refusal::DebounceOutOfRange);
    }
    if t.load_min_uv >= t.load_restart_uv || t.load_restart_uv > MAX_LOAD_UV {
        return Err(Refusal::LoadThresholdsOutOfRange);
    }
    let timeouts = [
        t.cold_start_timeout_ms,
        t.forecast_horizon_ms,
        t.brownout_horizon_ms,
        config.load_restore_ms,
    ];
    if timeouts.iter().any(|&ms| ms == 0 || ms > MAX_TIMEOUT_MS) {
        return Err(Refusal::TimeoutOutOfRange);
    }
    if !(MIN_REPORT_INTERVAL_MS..=MAX_REPORT_INTERVAL_MS).contains(&config.report_interval_ms) {
        return Err(Refusal::ReportIntervalOutOfRange);
    }
    if config.output_storage_uf > MAX_STORAGE_UF {
        return Err(Refusal::StorageCapacitanceOutOfRange);
    }
    if !name_is_valid(&config.name) {
        return Err(Refusal::NodeNameInvalid);
    }
    let fraction = config.converter.mppt_fraction_ppm;
    let accepted = ConverterModel::MIN_MPPT_FRACTION_PPM..=ConverterModel::MAX_MPPT_FRACTION_PPM;
    if fraction != 0 && !accepted.contains(&fraction) {
        return Err(Refusal::MpptFractionOutOfRange);
    }
    if config.shed_load_na > MAX_SHED_LOAD_NA {
        return Err(Refusal::ShedLoadOutOfRange);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_valid() {
        assert_eq!(validate(&default_config()), Ok(()));
    }

    /// Every rule, with the smallest change that breaks it.
    /// A node name from a short test string (longer ones are cut).
    fn name(text: &str) -> NodeName {
        let mut out = NodeName::new();
        for ch in text.chars() {
            let _ = out.push(ch);
        }
        out
    }

    #[test]
    fn each_rule_refuses_its_bad_case_with_its_reason() {
        type Breaker = fn(&mut NodeConfig);
        let cases: [(Breaker, Refusal); 22] = [
            (|c| c.calibration.adc_bits = 7, Refusal::AdcBitsOutOfRange),
            (|c| c.calibration.adc_bits = 25, Refusal::AdcBitsOutOfRange),
            (
                |c| c.calibration.input_current.units_per_count_q20 = 0,
                Refusal::ChannelScaleOutOfRange(Channel::InputCurrent),
            ),
            (
                |c| c.calibration.output_voltage.units_per_count_q20 = MAX_SCALE_Q20 + 1,
                Refusal::ChannelScaleOutOfRange(Channel::OutputVoltage),
            ),
            (
                |c| c.thresholds.hold_uv = c.thresholds.start_uv,
                Refusal::HoldNotBelowStart,
            ),
            (
                |c| c.thresholds.output_down_uv = c.thresholds.output_up_uv,
                Refusal::OutputThresholdsInverted,
            ),
            (
                |c| c.thresholds.sag_margin_uv = c.thresholds.hold_uv + 1,
                Refusal::SagMarginOutOfRange,
            ),
            (
                |c| c.thresholds.debounce_ms = MAX_DEBOUNCE_MS + 1,
                Refusal::DebounceOutOfRange,
            ),
            (
                |c| c.thresholds.cold_start_timeout_ms = 0,
                Refusal::TimeoutOutOfRange,
            ),
            (
                |c| c.thresholds.forecast_horizon_ms = MAX_TIMEOUT_MS + 1,
                Refusal::TimeoutOutOfRange,
            ),
            (|c| c.load_restore_ms = 0, Refusal::TimeoutOutOfRange),
            (
                |c| c.report_interval_ms = 99,
                Refusal::ReportIntervalOutOfRange,
            ),
            (
                |c| c.report_interval_ms = MAX_REPORT_INTERVAL_MS + 1,
                Refusal::ReportIntervalOutOfRange,
            ),
            (
                |c| c.output_storage_uf = MAX_STORAGE_UF + 1,
                Refusal::StorageCapacitanceOutOfRange,
            ),
            (
                |c| c.thresholds.load_restart_uv = c.thresholds.load_min_uv,
                Refusal::LoadThresholdsOutOfRange,
            ),
            (
                |c| {
                    c.thresholds.load_min_uv = MAX_LOAD_UV;
                    c.thresholds.load_restart_uv = MAX_LOAD_UV + 1;
                },
                Refusal::LoadThresholdsOutOfRange,
            ),
            (
                |c| c.thresholds.brownout_horizon_ms = 0,
                Refusal::TimeoutOutOfRange,
            ),
            (|c| c.name = name("bad\nname"), Refusal::NodeNameInvalid),
            (|c| c.name = name(" padded"), Refusal::NodeNameInvalid),
            (
                |c| c.converter.mppt_fraction_ppm = ConverterModel::MIN_MPPT_FRACTION_PPM - 1,
                Refusal::MpptFractionOutOfRange,
            ),
            (
                |c| c.converter.mppt_fraction_ppm = ConverterModel::MAX_MPPT_FRACTION_PPM + 1,
                Refusal::MpptFractionOutOfRange,
            ),
            (
                |c| c.shed_load_na = MAX_SHED_LOAD_NA + 1,
                Refusal::ShedLoadOutOfRange,
            ),
        ];
        for (break_it, reason) in cases {
            let mut config = default_config();
            break_it(&mut config);
            assert_eq!(validate(&config), Err(reason));
        }
    }

    #[test]
    fn edges_of_ranges_are_accepted() {
        let mut c = default_config();
        c.report_interval_ms = MIN_REPORT_INTERVAL_MS;
        c.thresholds.debounce_ms = MAX_DEBOUNCE_MS;
        c.thresholds.hold_uv = c.thresholds.start_uv - 1;
        c.output_storage_uf = MAX_STORAGE_UF;
        c.thresholds.load_restart_uv = MAX_LOAD_UV;
        c.thresholds.load_min_uv = MAX_LOAD_UV - 1;
        c.name = name("greenhouse-3 row:B_2.1");
        assert_eq!(validate(&c), Ok(()));
        c.converter.mppt_fraction_ppm = ConverterModel::MIN_MPPT_FRACTION_PPM;
        assert_eq!(validate(&c), Ok(()));
        c.converter.mppt_fraction_ppm = ConverterModel::MAX_MPPT_FRACTION_PPM;
        assert_eq!(validate(&c), Ok(()));
        c.shed_load_na = MAX_SHED_LOAD_NA;
        assert_eq!(validate(&c), Ok(()));
        c.name = name(&"x".repeat(gleaner_protocol::NODE_NAME_LEN));
        assert_eq!(validate(&c), Ok(()));
    }
}
