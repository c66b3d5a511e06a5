//! Connects the recorder's port loop to the live view.

use std::io::Write;
use std::time::{Duration, Instant};

use ratatui::DefaultTerminal;

use super::plain::{event_line, load_line, report_line};
use super::{tui, LiveState};
use crate::link::{LinkStats, Tracked};
use crate::recorder::PortObserver;

/// How the live view is shown.
pub enum Display {
    /// One line per report (or per `every`, when set), events as they come.
    Plain {
        /// Print a report line at most this often (None: every report).
        every: Option<Duration>,
    },
    /// Full screen.
    Screen {
        /// The terminal, in full-screen mode.
        terminal: DefaultTerminal,
        /// False when the user asked for no colour (`NO_COLOR`).
        colour: bool,
    },
    /// Nothing (tests, headless recording with its own status).
    Silent,
}

impl Display {
    /// The full screen when standard output is a terminal that can draw it
    /// and `plain` was not asked for, in colour unless `NO_COLOR` is set
    /// (no-color.org); plain lines (at most one per `every`) otherwise.
    pub fn choose(plain: bool, every: Option<Duration>) -> Self {
        use std::io::IsTerminal;
        let term = std::env::var("TERM").ok();
        if full_screen_possible(plain, std::io::stdout().is_terminal(), term.as_deref()) {
            Display::Screen {
                terminal: ratatui::init(),
                colour: colour_allowed(std::env::var_os("NO_COLOR").as_deref()),
            }
        } else {
            Display::Plain { every }
        }
    }
}

/// Whether to draw the full screen: not asked for plain lines, writing to a
/// terminal, and the terminal is not a dumb one (`TERM=dumb`: an editor's
/// shell buffer, a serial console) that cannot move the cursor.
pub fn full_screen_possible(plain: bool, is_terminal: bool, term: Option<&str>) -> bool {
    !plain && is_terminal && term != Some("dumb")
}

/// Colour unless `NO_COLOR` is set to something non-empty (no-color.org).
pub fn colour_allowed(no_color: Option<&std::ffi::OsStr>) -> bool {
    no_color.is_none_or(|value| value.is_empty())
}

/// Decides from the link counters and the time without data whether to stop.
pub type DoneFn<'a> = Box<dyn FnMut(&LinkStats, Duration) -> bool + 'a>;

/// A port observer that keeps a [`LiveState`] and shows it.
pub struct LiveObserver<'a> {
    /// The live model.
    pub state: LiveState,
    display: Display,
    title: String,
    last_line: Option<Instant>,
    last_draw: Instant,
    out: Box<dyn Write + 'a>,
    done: DoneFn<'a>,
    /// Set when the user quit from the full screen.
    pub quit: bool,
}

impl<'a> LiveObserver<'a> {
    /// An observer printing to `out`; `done` decides when to stop.
    pub fn new(display: Display, title: &str, out: Box<dyn Write + 'a>, done: DoneFn<'a>) -> Self {
        LiveObserver {
            state: LiveState::default(),
            display,
            title: title.into(),
            last_line: None,
            last_draw: Instant::now()
                .checked_sub(Duration::from_secs(1))
                .unwrap_or_else(Instant::now),
            out,
            done,
            quit: false,
        }
    }

    /// Restores the terminal if the full screen was used.
    pub fn close(&mut self) {
        if matches!(self.display, Display::Screen { .. }) {
            ratatui::restore();
            self.display = Display::Silent;
        }
    }
}

impl Drop for LiveObserver<'_> {
    fn drop(&mut self) {
        self.close();
    }
}

impl PortObserver for LiveObserver<'_> {
    fn message(&mut self, tracked: &Tracked, _host_time_us: u64, stats: &LinkStats) {
        self.state.update(tracked, stats);
        if let Display::Plain { every } = self.display {
            match &tracked.message.body {
                gleaner_protocol::UplinkBody::Event(e) => {
                    let _ = writeln!(self.out, "{}", event_line(tracked.message.uptime_ms, e));
                }
                gleaner_protocol::UplinkBody::Load(e) => {
                    let _ = writeln!(self.out, "{}", load_line(tracked.message.uptime_ms, e));
                }
                gleaner_protocol::UplinkBody::Report(_) => {
                    let due = match (every, self.last_line) {
                        (None, _) | (_, None) => true,
                        (Some(every), Some(last)) => last.elapsed() >= every,
                    };
                    if due {
                        if let Some(line) = report_line(&self.state) {
                            let _ = writeln!(self.out, "{line}");
                        }
                        self.last_line = Some(Instant::now());
                    }
                }
                gleaner_protocol::UplinkBody::Hello(h) => {
                    let _ = writeln!(
                        self.out,
                        "node boot {:08x}: firmware {}, protocol {}, report every {} ms",
                        h.boot_id, h.firmware, h.protocol, h.config.report_interval_ms
                    );
                }
                _ => {}
            }
            let _ = self.out.flush();
        }
    }

    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool {
        self.state.link = *stats;
        if let Display::Screen { terminal, colour } = &mut self.display {
            if self.last_draw.elapsed() >= Duration::from_millis(100) {
                let (state, title, colour) = (&self.state, &self.title, *colour);
                let _ = terminal.draw(|f| {
                    tui::draw(f, state, title);
                    if !colour {
                        tui::without_colour(f.buffer_mut());
                    }
                });
                self.last_draw = Instant::now();
            }
            if tui::quit_requested(Duration::ZERO) {
                self.quit = true;
                return true;
            }
        }
        (self.done)(stats, idle_for)
    }

    fn link_changed(&mut self, connected: bool, detail: &str, _host_time_us: u64) {
        if !matches!(self.display, Display::Screen { .. } | Display::Silent) {
            let _ = writeln!(
                self.out,
                "{} {detail}",
                if connected {
                    "port back:"
                } else {
                    "port lost, waiting for it to return:"
                }
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn full_screen_only_on_a_terminal_that_can_draw_it() {
        assert!(full_screen_possible(false, true, Some("xterm-256color")));
        assert!(full_screen_possible(false, true, None));
        assert!(!full_screen_possible(false, true, Some("dumb")));
        assert!(!full_screen_possible(false, false, Some("xterm")));
        assert!(!full_screen_possible(true, true, Some("xterm")));
    }

    #[test]
    fn no_color_set_to_anything_but_empty_turns_colour_off() {
        use std::ffi::OsStr;
        assert!(colour_allowed(None));
        assert!(colour_allowed(Some(OsStr::new(""))));
        assert!(!colour_allowed(Some(OsStr::new("1"))));
        assert!(!colour_allowed(Some(OsStr::new("yes"))));
    }
}
