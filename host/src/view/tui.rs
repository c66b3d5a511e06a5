//! The full-screen live view (ratatui). `q` or Esc quits.

use std::time::Duration;

use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph};
use ratatui::Frame;

use gleaner_protocol::ConverterState;

use super::plain::event_line;
use super::LiveState;
use crate::analysis::text::{duration, energy};

fn state_colour(state: Option<ConverterState>) -> Color {
    match state {
        Some(ConverterState::Harvesting) => Color::Green,
        Some(ConverterState::Sagging) => Color::Yellow,
        Some(ConverterState::CutOff) => Color::Red,
        Some(ConverterState::Stalled) => Color::Magenta,
        Some(ConverterState::ColdStart) => Color::Cyan,
        Some(ConverterState::Idle) | None => Color::Gray,
    }
}

/// Takes the colours out of a drawn screen, keeping bold and the like, for
/// users who asked for none (`NO_COLOR`).
pub fn without_colour(buffer: &mut ratatui::buffer::Buffer) {
    for cell in &mut buffer.content {
        cell.set_fg(Color::Reset);
        cell.set_bg(Color::Reset);
    }
}

fn volts(uv: u32) -> String {
    format!("{:.3} V", f64::from(uv) / 1e6)
}

fn milliamps(na: u32) -> String {
    format!("{:.3} mA", f64::from(na) / 1e6)
}

fn percent(x: Option<f64>) -> String {
    x.map_or("-".into(), |e| format!("{:.1} %", e * 100.0))
}

/// Draws the whole screen for `state`; `title` names the source.
pub fn draw(frame: &mut Frame, state: &LiveState, title: &str) {
    let rows = Layout::default()
        .direction(Direction::Vertical)
        .constraints([
            Constraint::Length(9),
            Constraint::Min(8),
            Constraint::Length(EVENT_ROWS),
        ])
        .split(frame.area());
    let top = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([
            Constraint::Percentage(40),
            Constraint::Percentage(30),
            Constraint::Percentage(30),
        ])
        .split(rows[0]);
    draw_channels(frame, top[0], state, title);
    draw_status(frame, top[1], state);
    draw_link(frame, top[2], state);
    let charts = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Percentage(50), Constraint::Percentage(50)])
        .split(rows[1]);
    draw_chart(frame, charts[0], state, "voltage (V)", |h| (h.1, h.2));
    draw_chart(frame, charts[1], state, "power (mW)", |h| (h.3, h.4));
    let events: Vec<Line> = state
        .events
        .iter()
        .rev()
        .map(|(t, e)| Line::from(event_line(*t, e)))
        .collect();
    frame.render_widget(
        Paragraph::new(events).block(
            Block::default()
                .borders(Borders::ALL)
                .title(" latest events (q quits) "),
        ),
        rows[2],
    );
}

const EVENT_ROWS: u16 = 7;

fn draw_channels(frame: &mut Frame, area: Rect, s: &LiveState, title: &str) {
    let mut lines = vec![];
    if let Some(r) = &s.report {
        let secs = f64::from(r.interval_ms.max(1)) / 1e3;
        lines.push(Line::from(format!(
            "input   {:>10} {:>11} {:>10.3} mW",
            volts(r.input_uv.mean),
            milliamps(r.input_na.mean),
            r.drawn_nj as f64 / 1e6 / secs
        )));
        lines.push(Line::from(format!(
            "output  {:>10} {:>11} {:>10.3} mW",
            volts(r.output_uv.mean),
            milliamps(r.output_na.mean),
            r.delivered_nj as f64 / 1e6 / secs
        )));
        lines.push(Line::from(format!(
            "efficiency  window {}   since reset {}",
            percent(s.window_efficiency()),
            percent(s.total_efficiency())
        )));
        lines.push(Line::from(format!(
            "energy      drawn {}   delivered {}   stored {}",
            energy(s.drawn_nj as f64 / 1e9),
            energy(s.delivered_nj as f64 / 1e9),
            energy(s.stored_nj as f64 / 1e9)
        )));
    } else {
        lines.push(Line::from(
            "waiting for the node's first interval report...",
        ));
    }
    frame.render_widget(
        Paragraph::new(lines).block(
            Block::default()
                .borders(Borders::ALL)
                .title(format!(" {title} ")),
        ),
        area,
    );
}

fn draw_status(frame: &mut Frame, area: Rect, s: &LiveState) {
    let name = s.state.map_or("unknown", |st| st.name());
    let mut lines = vec![Line::from(vec![
        Span::raw("state  "),
        Span::styled(
            name.to_uppercase(),
            Style::default()
                .fg(state_colour(s.state))
                .add_modifier(Modifier::BOLD),
        ),
    ])];
    lines.push(Line::from(format!(
        "for    {}",
        s.time_in_state_s().map_or("-".into(), duration)
    )));
    if let Some(r) = &s.report {
        lines.push(Line::from(format!(
            "cutoff in   {}",
            r.input_cutoff_in_ms
                .map_or("-".into(), |ms| duration(f64::from(ms) / 1e3))
        )));
        lines.push(Line::from(format!(
            "brown-out   {}",
            match (r.load_powered, r.brownout_in_ms) {
                (false, _) => "NO POWER".into(),
                (true, None) => "not while charging".into(),
                (true, Some(ms)) => format!("in {}", duration(f64::from(ms) / 1e3)),
            }
        )));
        lines.push(Line::from(format!(
            "load        {} {:.3} mW, net {:+.3} mW",
            if r.load_shed { "SHED" } else { "on" },
            r.load_nw as f64 / 1e6,
            r.net_nw as f64 / 1e6
        )));
    }
    lines.push(Line::from(format!(
        "uptime {}",
        duration(s.uptime_ms as f64 / 1e3)
    )));
    frame.render_widget(
        Paragraph::new(lines).block(Block::default().borders(Borders::ALL).title(" node ")),
        area,
    );
}

fn draw_link(frame: &mut Frame, area: Rect, s: &LiveState) {
    let l = &s.link;
    let mut lines = vec![
        Line::from(format!("frames   {}", l.frames)),
        Line::from(format!("lost     {}", l.lost_frames)),
        Line::from(format!("crc err  {}", l.crc_errors)),
        Line::from(format!("framing  {}", l.framing_errors)),
        Line::from(format!("reboots  {}", l.reboots)),
    ];
    if l.likely_wrong_baud() {
        lines.push(Line::styled(
            "mostly errors: wrong baud rate?",
            Style::default().fg(Color::Red),
        ));
    }
    if let Some(h) = &s.hello {
        lines.push(Line::from(format!(
            "fw {} proto {}",
            h.firmware, h.protocol
        )));
    }
    frame.render_widget(
        Paragraph::new(lines).block(Block::default().borders(Borders::ALL).title(" link ")),
        area,
    );
}

fn draw_chart(
    frame: &mut Frame,
    area: Rect,
    s: &LiveState,
    title: &str,
    pick: fn(&super::HistoryPoint) -> (f64, f64),
) {
    let input: Vec<(f64, f64)> = s.history.iter().map(|h| (h.0, pick(h).0)).collect();
    let output: Vec<(f64, f64)> = s.history.iter().map(|h| (h.0, pick(h).1)).collect();
    let x0 = input.first().map_or(0.0, |p| p.0);
    let x1 = input.last().map_or(1.0, |p| p.0).max(x0 + 1.0);
    let y1 = input
        .iter()
        .chain(&output)
        .map(|p| p.1)
        .fold(0.0, f64::max)
        .max(1e-3)
        * 1.1;
    let datasets = vec![
        Dataset::default()
            .name("input")
            .marker(Marker::Braille)
            .graph_type(GraphType::Line)
            .style(Style::default().fg(Color::Cyan))
            .data(&input),
        Dataset::default()
            .name("output")
            .marker(Marker::Braille)
            .graph_type(GraphType::Line)
            .style(Style::default().fg(Color::Red))
            .data(&output),
    ];
    let chart = Chart::new(datasets)
        .block(
            Block::default()
                .borders(Borders::ALL)
                .title(format!(" {title}, last {} reports ", s.history.len())),
        )
        .x_axis(
            Axis::default()
                .bounds([x0, x1])
                .labels(vec![Span::raw(duration(x0)), Span::raw(duration(x1))]),
        )
        .y_axis(
            Axis::default()
                .bounds([0.0, y1])
                .labels(vec![Span::raw("0"), Span::raw(format!("{y1:.2}"))]),
        );
    frame.render_widget(chart, area);
}

/// True when the user asked to quit (q, Esc or Ctrl-C) within `wait`.
pub fn quit_requested(wait: Duration) -> bool {
    use ratatui::crossterm::event::{self, Event, KeyCode, KeyModifiers};
    if let Ok(true) = event::poll(wait) {
        if let Ok(Event::Key(key)) = event::read() {
            return matches!(key.code, KeyCode::Char('q') | KeyCode::Esc)
                || (key.code == KeyCode::Char('c')
                    && key.modifiers.contains(KeyModifiers::CONTROL));
        }
    }
    false
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::link::{LinkTracker, Tracked};
    use gleaner_protocol::*;
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;

    fn report() -> Report {
        Report {
            interval_ms: 1000,
            sample_count: 100,
            input_uv: ChannelStats::from_min_mean_max(740_000, 750_000, 760_000),
            input_na: ChannelStats::from_min_mean_max(1_000_000, 2_000_000, 3_000_000),
            output_uv: ChannelStats::from_min_mean_max(3_200_000, 3_300_000, 3_300_000),
            output_na: ChannelStats::from_min_mean_max(0, 300_000, 4_000_000),
            drawn_nj: 1_500_000,
            delivered_nj: 990_000,
            stored_nj: 0,
            state: ConverterState::Sagging,
            state_ms: StateDurations {
                sagging_ms: 1000,
                ..Default::default()
            },
            input_cutoff_in_ms: Some(125_000),
            brownout_in_ms: None,
            load_nw: 0,
            net_nw: 0,
            load_powered: true,
            load_shed: true,
            flags: ReportFlags::default(),
        }
    }

    /// The full screen drawn for `state`, as text.
    fn screen_of(state: &LiveState) -> String {
        let mut terminal = Terminal::new(TestBackend::new(140, 30)).unwrap();
        terminal.draw(|f| draw(f, state, "virtual node")).unwrap();
        terminal
            .backend()
            .buffer()
            .content()
            .iter()
            .map(|c| c.symbol())
            .collect()
    }

    /// The state after one report arrives.
    fn state_after(report: Report) -> LiveState {
        let mut state = LiveState::default();
        let mut tracker = LinkTracker::new();
        let msg = Uplink {
            seq: 0,
            uptime_ms: 60_000,
            body: UplinkBody::Report(report),
        };
        let tracked: Tracked = tracker.accept(msg).unwrap().unwrap();
        state.update(&tracked, tracker.stats());
        state
    }

    #[test]
    fn an_idle_window_shows_no_efficiency_above_100_percent() {
        // Idle: noise draws 5 µJ, the load lives on storage (50 µJ delivered,
        // the storage estimate 40 µJ lower): 200 % would be noise.
        let state = state_after(Report {
            drawn_nj: 5_000,
            delivered_nj: 50_000,
            stored_nj: -40_000,
            state: ConverterState::CutOff,
            ..report()
        });
        assert_eq!(state.window_efficiency(), None);
        assert_eq!(state.total_efficiency(), None);
        let screen = screen_of(&state);
        assert!(!screen.contains("200.0"), "{screen}");
    }

    #[test]
    fn no_colour_leaves_the_text_and_drops_every_colour() {
        let state = state_after(report());
        let mut terminal = Terminal::new(TestBackend::new(140, 30)).unwrap();
        terminal.draw(|f| draw(f, &state, "virtual node")).unwrap();
        let coloured = terminal.backend().buffer().clone();
        assert!(
            coloured.content.iter().any(|c| c.fg == Color::Yellow),
            "sagging is yellow"
        );
        terminal
            .draw(|f| {
                draw(f, &state, "virtual node");
                without_colour(f.buffer_mut());
            })
            .unwrap();
        let plain = terminal.backend().buffer();
        assert!(plain
            .content
            .iter()
            .all(|c| c.fg == Color::Reset && c.bg == Color::Reset));
        let text = |b: &ratatui::buffer::Buffer| -> String {
            b.content.iter().map(|c| c.symbol()).collect()
        };
        assert_eq!(text(plain), text(&coloured));
    }

    #[test]
    fn the_screen_shows_state_efficiency_and_forecast() {
        let state = state_after(report());
        let screen = screen_of(&state);
        assert!(screen.contains("SAGGING"), "state");
        assert!(screen.contains("66.0 %"), "efficiency 0.99 / 1.5 mJ");
        assert!(screen.contains("00:02:05"), "forecast of 125 s");
        assert!(screen.contains("SHED"));
        assert!(screen.contains("0.750 V"));
    }
}
