//! What the boards' front-end tests share: a calibration's size of one code
//! per channel, and the `[front_end]` block a board's guide gives users.

use gleaner::front_end::FrontEndParams;
use gleaner_protocol::Calibration;

/// One code of each channel in its units (µV, nA, µV, nA), from the Q20
/// scales of `cal`.
pub fn one_code(cal: &Calibration) -> [f64; 4] {
    let lsb = |q20: u64| q20 as f64 / f64::from(1u32 << 20);
    [
        lsb(cal.input_voltage.units_per_count_q20),
        lsb(cal.input_current.units_per_count_q20),
        lsb(cal.output_voltage.units_per_count_q20),
        lsb(cal.output_current.units_per_count_q20),
    ]
}

/// Asserts that each channel's code is `expected` to one part in a million.
pub fn assert_one_code(cal: &Calibration, expected: [f64; 4]) {
    let got = one_code(cal);
    for (g, e) in got.iter().zip(expected) {
        assert!((g - e).abs() / e < 1e-6, "{got:?} vs {expected:?}");
    }
}

/// The `[front_end]` table of the toml block under the guide's "The same
/// front-end in a settings file" heading, read as a user's settings file.
pub fn guide_front_end(guide: &str) -> FrontEndParams {
    let section = guide
        .split("## The same front-end in a settings file")
        .nth(1)
        .expect("the guide has the settings section");
    let block = section
        .split("```toml\n")
        .nth(1)
        .and_then(|rest| rest.split("```").next())
        .expect("a toml block in the section");
    let settings = gleaner::settings::NodeSettings::from_toml(block).unwrap();
    settings.front_end.expect("a front_end table")
}
