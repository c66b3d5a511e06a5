//! `gleaner plan`: storage and duty cycle from numbers you give.

use anyhow::Result;
use clap::Args;

use crate::analysis::sizing::{PlanInputs, DEFAULT_MARGIN};
use crate::analysis::text::{duration, energy, power};
use crate::failure::FailedAs;

/// Size storage and duty cycle before the first deployment: how much
/// capacitance rides through an outage, and the largest duty cycle a harvest
/// sustains.
///
/// Negative numbers are read as values (and refused by the checks), not as flags.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Mean power out of the converter (what the harvest gives the node after
    /// conversion), W.
    #[arg(long, alias = "harvest-w", allow_negative_numbers = true)]
    pub converted_w: f64,
    /// Load power asleep, W.
    #[arg(long, allow_negative_numbers = true)]
    pub sleep_w: f64,
    /// Load power active, W.
    #[arg(long, allow_negative_numbers = true)]
    pub active_w: f64,
    /// Planned duty cycle, 0 to 1.
    #[arg(long, default_value_t = 0.01, allow_negative_numbers = true)]
    pub duty_cycle: f64,
    /// Longest outage to ride through, hours.
    #[arg(long, allow_negative_numbers = true)]
    pub outage_h: f64,
    /// Highest storage voltage, V.
    #[arg(long, allow_negative_numbers = true)]
    pub v_max: f64,
    /// Lowest voltage the load still runs on, V.
    #[arg(long, allow_negative_numbers = true)]
    pub v_min: f64,
    /// Margin on the capacitance (1.3 = 30 %).
    #[arg(long, default_value_t = DEFAULT_MARGIN, allow_negative_numbers = true)]
    pub margin: f64,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let inputs = PlanInputs {
            converted_w: self.converted_w,
            sleep_w: self.sleep_w,
            active_w: self.active_w,
            duty_cycle: self.duty_cycle,
            outage_h: self.outage_h,
            v_max: self.v_max,
            v_min: self.v_min,
            margin: self.margin,
        };
        let a = inputs.advise().failed_as(crate::failure::Failure::Usage)?;
        if self.json {
            say!("{}", serde_json::to_string_pretty(&a)?)?;
            return Ok(());
        }
        say!(
            "load at {:.2} % duty      {}",
            self.duty_cycle * 100.0,
            power(a.load_w)
        )?;
        say!("outage to ride through   {}", duration(a.outage_s))?;
        say!("energy needed            {}", energy(a.energy_needed_j))?;
        say!(
            "storage                  {:.4} F between {:.2} V and {:.2} V ({:.4} F by C = 2E / (Vmax² - Vmin²), plus {:.0} % margin)",
            a.capacitance_f.unwrap_or(f64::NAN),
            a.v_max,
            a.v_min,
            a.capacitance_exact_f.unwrap_or(f64::NAN),
            (a.margin - 1.0) * 100.0
        )?;
        match a.max_duty_cycle {
            Some(d) => say!("largest duty cycle       {:.3} % for a mean converted power of {}", d * 100.0, power(a.converted_w))?,
            None => say!("largest duty cycle       none: the converted power ({}) does not cover even the sleep power", power(a.converted_w))?,
        }
        if a.max_duty_cycle.is_some_and(|d| d < self.duty_cycle) {
            say!("warning: the planned duty cycle is above what the harvest sustains; the node will run its storage down")?;
        }
        Ok(())
    }
}
