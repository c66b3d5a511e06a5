//! The converter's efficiency by input voltage: where it loses energy at
//! low input.

use std::collections::BTreeMap;

use gleaner_firmware::meter::efficiency_ppm;
use gleaner_protocol::Report;

use super::energy::joules;
use super::report::EfficiencyBin;

/// Width of the efficiency-by-input-voltage bins, V.
pub const EFFICIENCY_BIN_V: f64 = EFFICIENCY_BIN_UV as f64 / 1e6;
/// Width of the efficiency-by-input-voltage bins, µV: an interval goes to
/// bin `input_uv_mean / EFFICIENCY_BIN_UV` (integer division, as
/// host/sql/efficiency_by_input.sql does).
pub const EFFICIENCY_BIN_UV: u32 = 50_000;

#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
struct Bin {
    seconds: f64,
    drawn_nj: u128,
    converted_nj: i128,
}

/// Energy drawn and converted per input-voltage bin, over intervals spent
/// at least 90 % converting (`Harvesting` or `Sagging`) that drew energy.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct EfficiencyBins {
    bins: BTreeMap<i64, Bin>,
}

/// True when the report's interval says something about the converter:
/// it drew energy and spent at least 90 % of the interval converting.
pub fn mostly_converting(r: &Report) -> bool {
    let converting_ms = r.state_ms.harvesting_ms + r.state_ms.sagging_ms;
    r.drawn_nj > 0 && u64::from(converting_ms) * 10 >= u64::from(r.interval_ms) * 9
}

impl EfficiencyBins {
    /// Adds one report (ignored unless [`mostly_converting`]).
    pub fn push(&mut self, r: &Report) {
        if !mostly_converting(r) {
            return;
        }
        let bin = i64::from(r.input_uv.mean / EFFICIENCY_BIN_UV);
        let b = self.bins.entry(bin).or_default();
        b.seconds += f64::from(r.interval_ms) / 1e3;
        b.drawn_nj += u128::from(r.drawn_nj);
        b.converted_nj += i128::from(r.delivered_nj) + i128::from(r.stored_nj);
    }

    /// The bins, lowest input first.
    pub fn finish(&self) -> Vec<EfficiencyBin> {
        self.bins
            .iter()
            .map(|(&bin, b)| {
                let drawn = u64::try_from(b.drawn_nj).unwrap_or(u64::MAX);
                let converted = i64::try_from(b.converted_nj).unwrap_or(i64::MAX);
                EfficiencyBin {
                    input_v_low: bin as f64 * EFFICIENCY_BIN_V,
                    input_v_high: (bin + 1) as f64 * EFFICIENCY_BIN_V,
                    seconds: b.seconds,
                    drawn_j: b.drawn_nj as f64 / 1e9,
                    converted_j: joules(b.converted_nj),
                    efficiency: efficiency_ppm(drawn, 0, converted).map(|ppm| f64::from(ppm) / 1e6),
                }
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::report;

    fn converting(input_uv: u32, drawn_nj: u64, delivered_nj: u64, harvesting_ms: u32) -> Report {
        let mut r = report(drawn_nj, delivered_nj, 0);
        r.input_uv.mean = input_uv;
        r.state_ms.harvesting_ms = harvesting_ms;
        r.state_ms.idle_ms = r.interval_ms - harvesting_ms;
        r
    }

    #[test]
    fn intervals_go_to_their_50_mv_bin() {
        let mut bins = EfficiencyBins::default();
        // 0.449 V and 0.401 V share the 0.40-0.45 V bin; 0.45 V starts the next.
        bins.push(&converting(449_000, 1_000_000_000, 600_000_000, 10_000));
        bins.push(&converting(401_000, 1_000_000_000, 800_000_000, 10_000));
        bins.push(&converting(450_000, 2_000_000_000, 1_800_000_000, 10_000));
        let out = bins.finish();
        assert_eq!(out.len(), 2);
        assert!(
            (out[0].input_v_low - 0.40).abs() < 1e-12 && (out[0].input_v_high - 0.45).abs() < 1e-12
        );
        // (0.6 + 0.8) J of 2 J drawn: 70 %; the next bin 1.8 of 2: 90 %.
        assert_eq!(
            (out[0].seconds, out[0].drawn_j, out[0].converted_j),
            (20.0, 2.0, 1.4)
        );
        assert_eq!(out[0].efficiency, Some(0.7));
        assert_eq!(out[1].efficiency, Some(0.9));
    }

    #[test]
    fn only_intervals_at_least_90_percent_converting_count() {
        let mut bins = EfficiencyBins::default();
        bins.push(&converting(500_000, 1_000_000_000, 500_000_000, 8_999)); // 89.99 %
        bins.push(&converting(500_000, 0, 0, 10_000)); // nothing drawn
        assert!(bins.finish().is_empty());
        bins.push(&converting(500_000, 1_000_000_000, 500_000_000, 9_000)); // 90 %
        assert_eq!(bins.finish().len(), 1);
    }
}
