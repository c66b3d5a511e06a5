//! The report as readable text for the terminal.

use std::fmt::Write;

use super::RunReport;

/// Formats seconds as `1d 02:03:04`, `02:03:04` or `12.3 s`.
pub fn duration(seconds: f64) -> String {
    if !seconds.is_finite() {
        return "-".into();
    }
    if seconds < 60.0 {
        return format!("{seconds:.1} s");
    }
    let total = seconds.round() as u64;
    let (d, h, m, s) = (
        total / 86_400,
        total / 3600 % 24,
        total / 60 % 60,
        total % 60,
    );
    if d > 0 {
        format!("{d}d {h:02}:{m:02}:{s:02}")
    } else {
        format!("{h:02}:{m:02}:{s:02}")
    }
}

/// The report's sections, in order: the text report and the HTML page both
/// carry each (the text leaves out the harvest and sizing sections when the
/// log has nothing for them).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Section {
    /// What was recorded, from which node, for how long.
    Run,
    /// Energy drawn, delivered and stored, and the efficiency.
    Energy,
    /// Time in each converter state.
    States,
    /// When and why the load lost its supply.
    LoadOutages,
    /// When and why the converter stopped.
    ConverterOutages,
    /// Efficiency in bins of input voltage.
    EfficiencyByInput,
    /// Energy per day.
    DailyBudget,
    /// Hourly harvest against the node's predictions.
    HarvestPrediction,
    /// Storage and duty-cycle advice.
    StorageAndDutyCycle,
    /// Link quality and warnings.
    Link,
}

impl Section {
    /// Every section, in report order.
    pub const ALL: [Section; 10] = [
        Section::Run,
        Section::Energy,
        Section::States,
        Section::LoadOutages,
        Section::ConverterOutages,
        Section::EfficiencyByInput,
        Section::DailyBudget,
        Section::HarvestPrediction,
        Section::StorageAndDutyCycle,
        Section::Link,
    ];

    /// The heading (upper case in the text report).
    pub const fn title(self) -> &'static str {
        match self {
            Section::Run => "Run",
            Section::Energy => "Energy",
            Section::States => "States",
            Section::LoadOutages => "Load outages",
            Section::ConverterOutages => "Converter outages",
            Section::EfficiencyByInput => "Efficiency by input voltage",
            Section::DailyBudget => "Daily budget",
            Section::HarvestPrediction => "Harvest prediction",
            Section::StorageAndDutyCycle => "Storage and duty cycle",
            Section::Link => "Link",
        }
    }

    /// The id of its element on the HTML page.
    pub fn id(self) -> String {
        self.title().to_lowercase().replace(' ', "-")
    }
}

/// Writes a section's heading, with `detail` after it.
fn heading(o: &mut String, section: Section, detail: &str) -> std::fmt::Result {
    writeln!(o, "{}{detail}", section.title().to_uppercase())
}

/// The load's outages, each with its cause chain.
fn write_load_outages(o: &mut String, r: &RunReport) -> std::fmt::Result {
    heading(
        o,
        Section::LoadOutages,
        &format!(" ({})", r.load_outages.len()),
    )?;
    if r.load_outages.is_empty() {
        writeln!(o, "  none: the load kept its supply throughout")?;
    }
    for (i, out) in r.load_outages.iter().enumerate().take(50) {
        writeln!(
            o,
            "  {:>2}. at {:>11} for {:>11}  {:<15} {}{}",
            i + 1,
            duration(out.start_s),
            duration(out.duration_s),
            out.cause,
            out.chain,
            if out.ongoing {
                "; ongoing at end of log"
            } else {
                ""
            }
        )?;
    }
    if r.load_outages.len() > 50 {
        writeln!(
            o,
            "  ... and {} more (see --json)",
            r.load_outages.len() - 50
        )?;
    }
    writeln!(o)
}

/// Hourly harvest against the node's predictions (the last day of slots).
fn write_harvest(o: &mut String, r: &RunReport) -> std::fmt::Result {
    let h = &r.harvest;
    if h.slots.is_empty() {
        return Ok(());
    }
    heading(
        o,
        Section::HarvestPrediction,
        " (hour slots from the node's boot)",
    )?;
    let pct = |x: Option<f64>| x.map_or("-".to_string(), |v| format!("{:.1} %", v * 100.0));
    writeln!(
        o,
        "  mean error over slots with harvest: EWMA {}, WCMA {}",
        pct(h.ewma_mape),
        pct(h.wcma_mape)
    )?;
    if let Some(day) = h.next_day_j {
        writeln!(o, "  next 24 h predicted    {}", energy(day))?;
    }
    if let Some(duty) = h.energy_neutral_duty {
        writeln!(
            o,
            "  energy-neutral duty    {:.2} % (largest duty cycle that harvest sustains)",
            duty * 100.0
        )?;
    }
    let opt = |x: Option<f64>| x.map_or("-".to_string(), energy);
    for s in h.slots.iter().rev().take(24).rev() {
        writeln!(
            o,
            "  at {:>11} slot {:>2}  drawn {:>11}  EWMA {:>11}  WCMA {:>11}",
            duration(s.t_s),
            s.slot,
            energy(s.drawn_j),
            opt(s.ewma_j),
            opt(s.wcma_j)
        )?;
    }
    writeln!(o)
}

/// Formats joules with a fitting prefix.
pub fn energy(joules: f64) -> String {
    let a = joules.abs();
    if a >= 1.0 {
        format!("{joules:.3} J")
    } else if a >= 1e-3 {
        format!("{:.3} mJ", joules * 1e3)
    } else {
        format!("{:.3} µJ", joules * 1e6)
    }
}

/// Formats watts with a fitting prefix.
pub fn power(watts: f64) -> String {
    let a = watts.abs();
    if a >= 1.0 {
        format!("{watts:.3} W")
    } else if a >= 1e-3 {
        format!("{:.3} mW", watts * 1e3)
    } else {
        format!("{:.2} µW", watts * 1e6)
    }
}

fn percent(x: Option<f64>) -> String {
    x.map_or("-".into(), |v| format!("{:.1} %", v * 100.0))
}

/// Renders the whole report.
pub fn render(report: &RunReport) -> String {
    let mut o = String::new();
    let _ = write_report(&mut o, report);
    o
}

fn write_report(o: &mut String, r: &RunReport) -> std::fmt::Result {
    write_run(o, r)?;
    write_energy(o, r)?;
    write_states(o, r)?;
    write_load_outages(o, r)?;
    write_converter_outages(o, r)?;
    write_efficiency(o, r)?;
    write_days(o, r)?;
    write_harvest(o, r)?;
    if let Some(s) = &r.sizing {
        write_sizing(o, s)?;
    }
    write_link(o, r)
}

/// The run: when, which node and boots, how much was covered.
fn write_run(o: &mut String, r: &RunReport) -> std::fmt::Result {
    heading(o, Section::Run, "")?;
    if let Some(h) = &r.header {
        writeln!(
            o,
            "  recorded     {} on {} from {}",
            h.started, h.host, h.source
        )?;
    }
    for b in &r.boots {
        writeln!(
            o,
            "  boot {}       node {}{}, id {:08x}, firmware {}, protocol {}, config {} (start {:.3} V, stop {:.3} V, load minimum {:.3} V, storage {} F, {}{})",
            b.index,
            b.node_id,
            if b.node_name.is_empty() { String::new() } else { format!(" \"{}\"", b.node_name) },
            b.boot_id,
            b.firmware,
            b.protocol,
            b.config_source,
            b.start_v,
            b.stop_v,
            b.load_min_v,
            b.storage_f,
            b.converter_words(),
            b.shed_load_words()
                .map(|w| format!(", shed load {w}"))
                .unwrap_or_default()
        )?;
    }
    writeln!(o, "  duration     {}", duration(r.duration_s))?;
    writeln!(
        o,
        "  coverage     {:.1} % ({} with data, {} recording gaps)",
        r.coverage * 100.0,
        duration(r.covered_s),
        r.recording_gaps
    )?;
    writeln!(o, "  reboots      {}", r.link.reboots)?;
    writeln!(o)?;
    Ok(())
}

/// Energy totals and efficiency.
fn write_energy(o: &mut String, r: &RunReport) -> std::fmt::Result {
    heading(o, Section::Energy, "")?;
    writeln!(o, "  drawn from harvester   {}", energy(r.energy.drawn_j))?;
    writeln!(
        o,
        "  delivered to load      {}",
        energy(r.energy.delivered_j)
    )?;
    writeln!(o, "  stored (net)           {}", energy(r.energy.stored_j))?;
    writeln!(
        o,
        "  efficiency             {}   (energy ratio: (delivered + stored) / drawn)",
        percent(r.energy.efficiency)
    )?;
    writeln!(o)?;
    Ok(())
}

/// Time in each converter state.
fn write_states(o: &mut String, r: &RunReport) -> std::fmt::Result {
    heading(o, Section::States, "")?;
    for s in r.states.iter().filter(|s| s.seconds > 0.0) {
        writeln!(
            o,
            "  {:<12} {:>14} {:>7.1} %",
            s.state,
            duration(s.seconds),
            s.share * 100.0
        )?;
    }
    writeln!(o)?;
    Ok(())
}

/// The converter's outages, the first 50 listed.
fn write_converter_outages(o: &mut String, r: &RunReport) -> std::fmt::Result {
    heading(
        o,
        Section::ConverterOutages,
        &format!(" ({})", r.outages.len()),
    )?;
    if r.outages.is_empty() {
        writeln!(o, "  none: the converter ran throughout")?;
    }
    for (i, out) in r.outages.iter().enumerate().take(50) {
        let cause = out.cause.words();
        writeln!(
            o,
            "  {:>2}. at {:>11} for {:>11}  {:<17} ({}); input {:.3} V, storage {:.3} V before{}",
            i + 1,
            duration(out.start_s),
            duration(out.duration_s),
            cause,
            out.node_cause,
            out.input_v_before,
            out.storage_v_before,
            if out.ongoing {
                ", ongoing at end of log"
            } else {
                ""
            }
        )?;
    }
    if r.outages.len() > 50 {
        writeln!(o, "  ... and {} more (see --json)", r.outages.len() - 50)?;
    }
    writeln!(o)?;
    Ok(())
}

/// Efficiency by input voltage, with a bar each.
fn write_efficiency(o: &mut String, r: &RunReport) -> std::fmt::Result {
    heading(o, Section::EfficiencyByInput, "")?;
    for b in r.efficiency_by_input.iter().filter(|b| b.drawn_j > 0.0) {
        let bar = b
            .efficiency
            .map_or(0, |e| (e.clamp(0.0, 1.0) * 40.0).round() as usize);
        writeln!(
            o,
            "  {:.2}-{:.2} V {:>10} {:>8}  {}",
            b.input_v_low,
            b.input_v_high,
            duration(b.seconds),
            percent(b.efficiency),
            "#".repeat(bar)
        )?;
    }
    writeln!(o)?;
    Ok(())
}

/// Daily budgets.
fn write_days(o: &mut String, r: &RunReport) -> std::fmt::Result {
    heading(
        o,
        Section::DailyBudget,
        " (24 h blocks from the first interval report)",
    )?;
    for d in &r.days {
        writeln!(
            o,
            "  day {:<3} drawn {:>11}  delivered {:>11}  stored {:>11}  outage {:>10}  {}",
            d.day,
            energy(d.drawn_j),
            energy(d.delivered_j),
            energy(d.stored_j),
            duration(d.outage_s),
            d.neutrality()
        )?;
    }
    writeln!(o)?;
    Ok(())
}

/// Storage and duty-cycle advice.
fn write_sizing(o: &mut String, s: &super::sizing::SizingAdvice) -> std::fmt::Result {
    heading(o, Section::StorageAndDutyCycle, "")?;
    if s.outage_s > 0.0 {
        writeln!(o, "  longest outage        {}", duration(s.outage_s))?;
        writeln!(o, "  load while supplied   {}", power(s.load_w))?;
        writeln!(o, "  energy to bridge it   {}", energy(s.energy_needed_j))?;
        match s.capacitance_f {
            Some(c) => writeln!(
                o,
                "  capacitance needed    {:.3} F between {:.2} V and {:.2} V (C = 2E / (Vmax² - Vmin²) = {:.3} F, times a {:.0} % margin)",
                c,
                s.v_max,
                s.v_min,
                s.capacitance_exact_f.unwrap_or(0.0),
                (s.margin - 1.0) * 100.0
            )?,
            None => writeln!(o, "  capacitance needed    - (the highest storage voltage seen is not above the lowest usable one)")?,
        }
    } else {
        writeln!(o, "  no outage: the present storage was enough")?;
    }
    writeln!(o, "  mean converted        {}", power(s.converted_w))?;
    writeln!(
        o,
        "  load asleep / active  {} / {}",
        power(s.sleep_w),
        power(s.active_w)
    )?;
    writeln!(
        o,
        "  largest duty cycle    {}",
        s.max_duty_cycle.map_or(
            "- (the converted power does not cover even the sleep power)".into(),
            |d| format!("{:.2} %", d * 100.0)
        )
    )?;
    Ok(())
}

/// Link quality and warnings.
fn write_link(o: &mut String, r: &RunReport) -> std::fmt::Result {
    writeln!(o)?;
    heading(o, Section::Link, "")?;
    let l = &r.link;
    writeln!(o, "  frames {}, lost {}, CRC errors {}, framing errors {}, undecodable {}, duplicates {}, reboots {}", l.frames, l.lost_frames, l.crc_errors, l.framing_errors, l.decode_errors, l.duplicates, l.reboots)?;
    for w in &r.warnings {
        writeln!(o, "  warning: {w}")?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durations_read_naturally() {
        assert_eq!(duration(12.34), "12.3 s");
        assert_eq!(duration(3_723.0), "01:02:03");
        assert_eq!(duration(90_061.0), "1d 01:01:01");
    }

    #[test]
    fn units_get_prefixes() {
        assert_eq!(energy(0.0123), "12.300 mJ");
        assert_eq!(power(2.5e-5), "25.00 µW");
    }
}
