//! The Gleaner host tool as a library: everything the `gleaner` binary does,
//! usable from tests and other programs.
//!
//! * [`link`]: serial ports and link health;
//! * [`log`]: the recording format, writer and reader;
//! * [`recorder`]: bytes from a port into a log, reconnecting;
//! * [`view`]: the live view (plain lines or full screen);
//! * [`analysis`]: reports, plots and storage advice from recorded runs;
//! * [`export`]: CSV export;
//! * [`sim`]: the virtual node (physics models driving the real firmware);
//! * [`settings`]: node settings as people write them;
//! * [`failure`]: the failures scripts tell apart by exit code;
//! * [`cli`]: the command-line interface.
//!
//! # Example
//!
//! Simulate a scenario in-process, decode its frames and analyse them:
//!
//! ```
//! use gleaner::analysis::Analyzer;
//! use gleaner::link::LinkTracker;
//! use gleaner::sim::{Scenario, VirtualNode};
//!
//! let mut scenario = Scenario::builtin("stalled-converter").unwrap();
//! scenario.duration_h = 0.1; // six simulated minutes
//! let mut node = VirtualNode::new(scenario, 7).unwrap();
//! let (mut tracker, mut analyzer, mut bytes) = (LinkTracker::new(), Analyzer::new(), Vec::new());
//! while !node.finished() {
//!     node.step();
//!     node.drain_frames(&mut bytes);
//! }
//! for frame in bytes.split(|&b| b == 0).filter(|f| !f.is_empty()) {
//!     if let Ok(Some(tracked)) = tracker.accept_encoded(frame) {
//!         analyzer.add_tracked(0, &tracked);
//!     }
//! }
//! let report = analyzer.finish();
//! assert!(report.energy.drawn_j > 0.0);
//! assert_eq!(report.outages.len(), 0);
//! ```
pub mod analysis;
pub mod cli;
pub mod columns;
pub mod dataset;
pub mod export;
pub mod failure;
pub mod files;
pub mod front_end;
pub mod link;
pub mod log;
pub mod parallel;
pub mod progress;
pub mod record_status;
pub mod recorder;
pub mod rotation;
pub mod settings;
pub mod sim;
pub mod stream;
pub mod upkeep;
pub mod user_config;
pub mod view;
