//! `gleaner node`: commands to a node, each answered by request id.

use std::io::Write;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use clap::{Args, Subcommand};
use gleaner_protocol::{Command, Hello};

use crate::failure::{FailedAs, Failure};
use crate::link::{explain, Session};
use crate::settings::NodeSettings;

/// Talk to a node.
#[derive(Debug, Args)]
pub struct Cmd {
    /// The port (`-p PORT`, a path or an alias) and line rate.
    #[command(flatten)]
    pub link: super::PortArgs,
    /// How long to wait for the node's answer (seconds, or with a unit: 500ms, 10s).
    #[arg(long, default_value = "3", value_parser = super::parse_seconds)]
    pub timeout: f64,
    /// Print JSON instead of text (ping, info, set-config, reset-energy).
    #[arg(long)]
    pub json: bool,
    /// What to ask.
    #[command(subcommand)]
    pub action: Action,
}

/// What `gleaner node info --json` prints (schema `gleaner.node-info.v1`).
#[derive(Debug, serde::Serialize)]
pub struct NodeInfo {
    /// Always `gleaner.node-info.v1`.
    pub schema: &'static str,
    /// The node's stable id, 16 hex digits (0: unknown).
    pub node_id: String,
    /// Firmware version.
    pub firmware: String,
    /// Protocol version.
    pub protocol: String,
    /// This boot's id, 8 hex digits.
    pub boot_id: String,
    /// Time between samples, µs.
    pub sample_period_us: u32,
    /// Where the configuration came from: defaults, stored or received.
    pub config_source: String,
    /// The configuration, with the keys of a settings file.
    pub settings: NodeSettings,
    /// The calibration, as the node holds it.
    pub calibration: gleaner_protocol::Calibration,
    /// Totals since boot or the last reset.
    pub totals: gleaner_protocol::EnergyTotals,
}

impl NodeInfo {
    /// The node's `Hello`, for scripts.
    pub fn from_hello(h: &Hello) -> Self {
        NodeInfo {
            schema: "gleaner.node-info.v1",
            node_id: format!("{:016x}", h.node_id),
            firmware: h.firmware.to_string(),
            protocol: h.protocol.to_string(),
            boot_id: format!("{:08x}", h.boot_id),
            sample_period_us: h.sample_period_us,
            config_source: format!("{:?}", h.config_source).to_lowercase(),
            settings: NodeSettings::from_config(&h.config),
            calibration: h.config.calibration,
            totals: h.totals,
        }
    }
}

/// What to ask the node.
#[derive(Debug, Subcommand)]
pub enum Action {
    /// Check that the node answers, and how fast.
    Ping,
    /// Show the node's versions, boot id and configuration.
    Info,
    /// Change the configuration; the node checks it and refuses a bad one with a reason.
    SetConfig(SetConfig),
    /// Zero the node's energy totals.
    ResetEnergy,
    /// Two-point calibration of the channels on the bench, guided step by step.
    Calibrate(super::calibrate::Calibrate),
    /// Record a burst of samples at the full sampling rate to CSV.
    Burst {
        /// Number of samples.
        samples: u32,
        /// CSV file to write (`-`: standard output).
        #[arg(long, default_value = "burst.csv")]
        out: PathBuf,
    },
}

/// New settings: from a TOML file, from flags, or both (flags win).
#[derive(Debug, Args)]
pub struct SetConfig {
    /// TOML file of settings (same keys as the flags, with underscores).
    #[arg(long)]
    pub file: Option<PathBuf>,
    /// Report interval, ms.
    #[arg(long)]
    pub report_interval_ms: Option<u32>,
    /// Start voltage: open-circuit input at which the converter cold-starts, V.
    #[arg(long)]
    pub start_v: Option<f64>,
    /// Stop voltage: input below which the converter stops, V.
    #[arg(long, alias = "hold-v")]
    pub stop_v: Option<f64>,
    /// Warning band above the stop voltage: input inside it is Sagging, V.
    #[arg(long, alias = "sag-margin-v")]
    pub warning_band_v: Option<f64>,
    /// Output good: output at or above it counts as delivering, V.
    #[arg(long, alias = "output-up-v")]
    pub output_good_v: Option<f64>,
    /// Output lost: output below it with a healthy input means the converter stalled, V.
    #[arg(long, alias = "output-down-v")]
    pub output_lost_v: Option<f64>,
    /// Debounce, ms.
    #[arg(long)]
    pub debounce_ms: Option<u32>,
    /// Output storage, µF (0: none).
    #[arg(long)]
    pub output_storage_uf: Option<u32>,
    /// The converter's MPPT fraction of the open-circuit voltage (0: none).
    #[arg(long)]
    pub mppt_fraction: Option<f64>,
    /// Whether the converter regulates its output voltage.
    #[arg(long)]
    pub output_regulated: Option<bool>,
    /// Current the load-shed pin switches off, µA (0: not known; the node learns it).
    #[arg(long)]
    pub shed_load_ua: Option<f64>,
}

impl SetConfig {
    fn settings(&self) -> Result<NodeSettings> {
        let mut s = match &self.file {
            Some(path) => NodeSettings::from_toml(
                &std::fs::read_to_string(path)
                    .with_context(|| format!("cannot read {}", path.display()))?,
            )
            .with_context(|| format!("in {}", path.display()))
            .failed_as(Failure::BadInput)?,
            None => NodeSettings::default(),
        };
        macro_rules! take {
            ($($f:ident),*) => { $( if self.$f.is_some() { s.$f = self.$f; } )* };
        }
        take!(
            report_interval_ms,
            start_v,
            stop_v,
            warning_band_v,
            output_good_v,
            output_lost_v,
            debounce_ms,
            output_storage_uf,
            mppt_fraction,
            output_regulated,
            shed_load_ua
        );
        Ok(s)
    }
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let mut session = {
            let reach = self.link.require(None)?;
            Session::open(
                &reach.port,
                reach.baud,
                Duration::from_secs_f64(self.timeout),
            )?
        };
        let json = self.json;
        match self.action {
            Action::Ping => ping(&mut session, json)?,
            Action::Info => {
                explain(session.request(Command::GetInfo, Duration::ZERO)?)?;
                let hello = session
                    .hello
                    .context("the node accepted but sent no Hello")?;
                if json {
                    say!(
                        "{}",
                        serde_json::to_string_pretty(&NodeInfo::from_hello(&hello))?
                    )?;
                } else {
                    print_hello(&hello)?;
                }
            }
            Action::SetConfig(set) => {
                let config = session.apply_settings(&set.settings()?)?;
                if json {
                    say!(
                        "{}",
                        serde_json::json!({ "accepted": true, "settings": NodeSettings::from_config(&config) })
                    )?;
                } else {
                    say!("configuration accepted and stored")?;
                }
            }
            Action::ResetEnergy => {
                explain(session.request(Command::ResetEnergy, Duration::ZERO)?)?;
                if json {
                    say!("{}", serde_json::json!({ "accepted": true }))?;
                } else {
                    say!("energy totals reset")?;
                }
            }
            Action::Calibrate(calibrate) => calibrate.run(&mut session)?,
            Action::Burst { samples, out } => burst(&mut session, samples, &out)?,
        }
        Ok(())
    }
}

/// `node ping`: the round trip of one ping.
fn ping(session: &mut Session, json: bool) -> Result<()> {
    let started = Instant::now();
    explain(session.request(Command::Ping, Duration::ZERO)?)?;
    let round_trip_ms = started.elapsed().as_secs_f64() * 1e3;
    if json {
        say!(
            "{}",
            serde_json::json!({ "answered": true, "round_trip_ms": round_trip_ms })
        )?;
    } else {
        say!("pong in {round_trip_ms:.1} ms")?;
    }
    Ok(())
}

/// `node burst`: `samples` samples at the full rate, as CSV to `out`.
fn burst(session: &mut Session, samples: u32, out: &std::path::Path) -> Result<()> {
    session.progress = crate::progress::steps(u64::from(samples), "burst", "samples");
    let done = session.burst(samples);
    session.progress.finish_and_clear();
    done?;
    let mut csv = Vec::new();
    writeln!(csv, "index,time_us,input_uv,input_na,output_uv,output_na")?;
    for (i, s, period) in &session.samples {
        writeln!(
            csv,
            "{i},{},{},{},{},{}",
            u64::from(*i) * u64::from(*period),
            s.input_uv,
            s.input_na,
            s.output_uv,
            s.output_na
        )?;
    }
    if crate::files::is_stdio(out) {
        std::io::stdout().write_all(&csv)?;
        return Ok(());
    }
    crate::files::write_atomic(out, &csv)?;
    say!(
        "{} of {samples} samples written to {}",
        session.samples.len(),
        out.display()
    )?;
    Ok(())
}

/// Prints a `Hello` for people.
pub fn print_hello(h: &Hello) -> std::io::Result<()> {
    say!(
        "node {:016x}{}",
        h.node_id,
        if h.config.name.is_empty() {
            String::new()
        } else {
            format!(" '{}'", h.config.name)
        }
    )?;
    say!(
        "firmware {}  protocol {}  boot id {:08x}  sample period {} µs",
        h.firmware,
        h.protocol,
        h.boot_id,
        h.sample_period_us
    )?;
    say!("configuration from {:?}", h.config_source)?;
    print_config(&h.config)?;
    say!(
        "totals since reset: drawn {} nJ, delivered {} nJ, stored {} nJ",
        h.totals.drawn_nj,
        h.totals.delivered_nj,
        h.totals.stored_nj
    )
}

/// Prints a configuration's settings, one group per line.
fn print_config(config: &gleaner_protocol::NodeConfig) -> std::io::Result<()> {
    let t = &config.thresholds;
    say!("  report interval   {} ms", config.report_interval_ms)?;
    say!(
        "  start / stop      {:.3} V / {:.3} V (warning band {:.3} V)",
        f64::from(t.start_uv) / 1e6,
        f64::from(t.hold_uv) / 1e6,
        f64::from(t.sag_margin_uv) / 1e6
    )?;
    say!(
        "  output good / lost {:.3} V / {:.3} V",
        f64::from(t.output_up_uv) / 1e6,
        f64::from(t.output_down_uv) / 1e6
    )?;
    say!(
        "  debounce {} ms, cold-start timeout {} ms, forecast horizon {} ms, input floor {:.1} µA",
        t.debounce_ms,
        t.cold_start_timeout_ms,
        t.forecast_horizon_ms,
        f64::from(t.input_idle_na) / 1e3
    )?;
    say!(
        "  output storage    {} µF, load restored after {} ms, shed load {}",
        config.output_storage_uf,
        config.load_restore_ms,
        match config.shed_load_na {
            0 => "not stated".to_owned(),
            na => format!("{:.1} µA", f64::from(na) / 1e3),
        }
    )?;
    let converter = &config.converter;
    say!(
        "  converter         {}",
        crate::analysis::converter_words(
            crate::analysis::mppt_fraction(converter),
            converter.output_regulated
        )
    )?;
    Ok(())
}
