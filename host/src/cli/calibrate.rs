//! `gleaner node calibrate`: two-point calibration of each channel on the
//! bench. At two levels per channel the node's mean over a burst is read and
//! the user types what a reference meter shows; the firmware's two-point
//! rule (through [`NodeSettings::apply`]) gives the new gain and offset.

use std::io::BufRead;
use std::path::PathBuf;

use anyhow::{bail, Context, Result};
use clap::Args;
use gleaner_firmware::calibration::{counts_q8_for, COUNT_FRACTION_BITS, SCALE_FRACTION_BITS};
use gleaner_protocol::{Calibration, Channel, ChannelCal, Sample};

use crate::failure::{FailedAs, Failure};
use crate::link::Session;
use crate::settings::{NodeSettings, TwoPoint, TwoPointTrims};

/// A channel as typed on the command line (`input-voltage`, ...).
fn parse_channel(text: &str) -> Result<Channel, String> {
    Channel::ALL
        .into_iter()
        .find(|c| label(*c).replace(' ', "-") == text)
        .ok_or_else(|| {
            format!("'{text}' is not a channel (input-voltage, input-current, output-voltage, output-current)")
        })
}

fn label(c: Channel) -> &'static str {
    match c {
        Channel::InputVoltage => "input voltage",
        Channel::InputCurrent => "input current",
        Channel::OutputVoltage => "output voltage",
        Channel::OutputCurrent => "output current",
    }
}

fn is_voltage(c: Channel) -> bool {
    matches!(c, Channel::InputVoltage | Channel::OutputVoltage)
}

/// People's unit (V or mA) and how many channel units (µV, nA) make one.
fn unit(c: Channel) -> (&'static str, f64) {
    if is_voltage(c) {
        ("V", 1e6)
    } else {
        ("mA", 1e6)
    }
}

fn hookup(c: Channel) -> &'static str {
    match c {
        Channel::InputVoltage => "a steady adjustable supply to the harvester input (no harvester), the reference voltmeter across the input terminals",
        Channel::InputCurrent => "a current source (or a supply through a resistor) into the harvester input, the reference ammeter in series",
        Channel::OutputVoltage => "a steady adjustable supply to the output terminals (converter unpowered, load removed), the reference voltmeter across them",
        Channel::OutputCurrent => "an adjustable electronic load (or resistor) on the output, the reference ammeter in series",
    }
}

/// The channel's reading in a sample, µV or nA.
fn reading(c: Channel, s: &Sample) -> u32 {
    match c {
        Channel::InputVoltage => s.input_uv,
        Channel::InputCurrent => s.input_na,
        Channel::OutputVoltage => s.output_uv,
        Channel::OutputCurrent => s.output_na,
    }
}

/// Two-point calibration of the channels on the bench, step by step: what to
/// connect, the node's mean over a burst at each of two levels, the
/// reference meter's value typed in, then the new gain and offset and the
/// residual at both points, sent to the node after you confirm.
#[derive(Debug, Args)]
pub struct Calibrate {
    /// A channel to calibrate (repeat for several; default: all four).
    #[arg(long = "channel", value_parser = parse_channel)]
    pub channels: Vec<Channel>,
    /// Samples averaged at each point.
    #[arg(long, default_value_t = 200)]
    pub samples: u32,
    /// Readings already taken, instead of asking: TOML with a table per
    /// channel (`[input_voltage]` with `reported_v` and `actual_v`, current
    /// channels with `reported_ma` and `actual_ma`; two values each).
    #[arg(long)]
    pub points: Option<PathBuf>,
    /// Send the result without asking.
    #[arg(long)]
    pub yes: bool,
}

/// Answers typed by the user (standard input), one per line.
struct Answers(std::io::StdinLock<'static>);

impl Answers {
    /// Shows `prompt` and returns the next line; the end of input abandons
    /// the calibration with the node unchanged.
    fn ask(&mut self, prompt: &str) -> Result<String> {
        say_part!("{prompt}")?;
        std::io::Write::flush(&mut std::io::stdout())?;
        let mut line = String::new();
        if self.0.read_line(&mut line)? == 0 {
            bail!("no answer (end of input): calibration abandoned, the node's calibration is unchanged");
        }
        Ok(line.trim().to_owned())
    }

    /// Asks until a number of at least 0 is typed.
    fn number(&mut self, prompt: &str) -> Result<f64> {
        loop {
            let text = self.ask(prompt)?;
            match text.replace(',', ".").parse::<f64>() {
                Ok(v) if v.is_finite() && v >= 0.0 => return Ok(v),
                _ => say!("  '{text}' is not a reading; type a number such as 0.1003")?,
            }
        }
    }
}

impl Calibrate {
    /// Runs the calibration on an open session.
    pub fn run(&self, session: &mut Session) -> Result<()> {
        let present = session.present_config()?;
        let channels = if self.channels.is_empty() {
            Channel::ALL.to_vec()
        } else {
            self.channels.clone()
        };
        let trims = match &self.points {
            Some(path) => read_points(path)?,
            None => self.measure(session, &present.calibration, &channels)?,
        };
        let settings = NodeSettings {
            two_point: Some(trims.clone()),
            ..NodeSettings::default()
        };
        let updated = settings
            .apply(&present)
            .map_err(anyhow::Error::new)
            .failed_as(Failure::BadInput)?;
        for channel in Channel::ALL {
            if let Some(trim) = trims.channel(channel) {
                show_result(
                    channel,
                    present.calibration.channel(channel),
                    updated.calibration.channel(channel),
                    &trim,
                )?;
            }
        }
        if !self.yes {
            let mut answers = Answers(std::io::stdin().lock());
            let answer = answers.ask("Send the new calibration to the node? [y/N] ")?;
            if !matches!(answer.to_lowercase().as_str(), "y" | "yes") {
                say!("not sent; the node's calibration is unchanged")?;
                return Ok(());
            }
        }
        session.configure(updated)?;
        say!("calibration accepted and stored by the node")?;
        Ok(())
    }

    /// Guides the user through two points per channel.
    fn measure(
        &self,
        session: &mut Session,
        calibration: &Calibration,
        channels: &[Channel],
    ) -> Result<TwoPointTrims> {
        if self.samples == 0 {
            bail!("--samples must be at least 1");
        }
        let mut answers = Answers(std::io::stdin().lock());
        let mut trims = TwoPointTrims::default();
        for &channel in channels {
            let (unit, per_unit) = unit(channel);
            let cal = *calibration.channel(channel);
            let max_count = (1u64 << calibration.adc_bits.min(31)) - 1;
            let full_scale = max_count as f64 * cal.units_per_count_q20 as f64
                / f64::from(1u32 << SCALE_FRACTION_BITS)
                / per_unit;
            say!("\n{}: connect {}.", label(channel), hookup(channel))?;
            say!(
                "  Two levels far apart work best: near 10 % and 80 % of the range you use (full scale {full_scale:.4} {unit})."
            )?;
            let mut reported = [0.0; 2];
            let mut actual = [0.0; 2];
            for point in 0..2 {
                answers.ask(&format!(
                    "  Set level {} of 2 and let it settle, then press Enter: ",
                    point + 1
                ))?;
                let (mean, low, high) = self.mean_reading(session, channel)?;
                say!(
                    "  node reads {:.6} {unit} (mean of {} samples, {:.6} to {:.6})",
                    mean / per_unit,
                    session.samples.len(),
                    low / per_unit,
                    high / per_unit
                )?;
                reported[point] = mean / per_unit;
                actual[point] = answers.number(&format!(
                    "  Reference meter reading at level {}, {unit}: ",
                    point + 1
                ))?;
            }
            *trims.channel_mut(channel) = Some(if is_voltage(channel) {
                TwoPoint {
                    reported_v: Some(reported),
                    actual_v: Some(actual),
                    ..TwoPoint::default()
                }
            } else {
                TwoPoint {
                    reported_ma: Some(reported),
                    actual_ma: Some(actual),
                    ..TwoPoint::default()
                }
            });
        }
        Ok(trims)
    }

    /// The channel's mean, lowest and highest reading over a burst, µV or nA.
    fn mean_reading(&self, session: &mut Session, channel: Channel) -> Result<(f64, f64, f64)> {
        session.progress = crate::progress::steps(u64::from(self.samples), "burst", "samples");
        let done = session.burst(self.samples);
        session.progress.finish_and_clear();
        done?;
        let readings: Vec<f64> = session
            .samples
            .iter()
            .map(|(_, s, _)| f64::from(reading(channel, s)))
            .collect();
        if readings.is_empty() {
            bail!("the node sent no samples");
        }
        let mean = readings.iter().sum::<f64>() / readings.len() as f64;
        let low = readings.iter().copied().fold(f64::INFINITY, f64::min);
        let high = readings.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        Ok((mean, low, high))
    }
}

/// Reads readings already taken.
fn read_points(path: &std::path::Path) -> Result<TwoPointTrims> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read {}", path.display()))
        .failed_as(Failure::BadInput)?;
    toml::from_str(&text)
        .with_context(|| format!("in {}", path.display()))
        .failed_as(Failure::BadInput)
}

/// Prints the old and new gain and offset and the residual at both points.
fn show_result(
    channel: Channel,
    before: &ChannelCal,
    after: &ChannelCal,
    trim: &TwoPoint,
) -> Result<()> {
    let (unit, per_unit) = unit(channel);
    let per_count = |c: &ChannelCal| c.units_per_count_q20 as f64 / f64::from(1u32 << 20);
    let small = if is_voltage(channel) { "µV" } else { "nA" };
    say!(
        "\n{}: gain x{:.5} ({:.4} {small} per count, was {:.4}), offset {:+.1} {small} (was {:+})",
        label(channel),
        per_count(after) / per_count(before),
        per_count(after),
        per_count(before),
        f64::from(after.offset),
        before.offset
    )?;
    let pairs = match (
        trim.reported_v,
        trim.actual_v,
        trim.reported_ma,
        trim.actual_ma,
    ) {
        (Some(r), Some(a), _, _) | (_, _, Some(r), Some(a)) => [(r[0], a[0]), (r[1], a[1])],
        _ => return Ok(()),
    };
    for (reported, actual) in pairs {
        // Where the old calibration read `reported`, the new one reads:
        let counts_q8 = counts_q8_for(before, (reported * per_unit).round() as u32).unwrap_or(0);
        let counts = counts_q8 as f64 / f64::from(1u32 << COUNT_FRACTION_BITS);
        let now = counts * per_count(after) + f64::from(after.offset);
        say!(
            "  at {actual:.6} {unit}: read {reported:.6} before, {:.6} now (residual {:+.1} {small})",
            now / per_unit,
            now - actual * per_unit
        )?;
    }
    Ok(())
}
