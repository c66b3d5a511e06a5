//! What a node accepts: the one place each limit is written. The firmware
//! enforces them, the refusal texts and the host's messages are formatted
//! from them.

/// Fewest ADC result bits.
pub const MIN_ADC_BITS: u8 = 8;
/// Most ADC result bits.
pub const MAX_ADC_BITS: u8 = 24;
/// Largest channel scale: 10^9 units per count, in Q20.
pub const MAX_SCALE_Q20: u64 = 1_000_000_000 << 20;
/// Shortest report interval.
pub const MIN_REPORT_INTERVAL_MS: u32 = 100;
/// Longest report interval (one hour).
pub const MAX_REPORT_INTERVAL_MS: u32 = 3_600_000;
/// Longest debounce time.
pub const MAX_DEBOUNCE_MS: u32 = 60_000;
/// Longest timeout or horizon (one day); the shortest is 1 ms.
pub const MAX_TIMEOUT_MS: u32 = 86_400_000;
/// Largest sag margin (1 V).
pub const MAX_SAG_MARGIN_UV: u32 = 1_000_000;
/// Largest storage capacitance (1000 F).
pub const MAX_STORAGE_UF: u32 = 1_000_000_000;
/// Highest load voltage threshold (60 V).
pub const MAX_LOAD_UV: u32 = 60_000_000;
/// Largest shed load, nA (1 A: far above any load a harvesting node
/// switches, so a larger value is a unit mistake).
pub const MAX_SHED_LOAD_NA: u32 = 1_000_000_000;
/// Longest burst, in samples.
pub const MAX_BURST_SAMPLES: u32 = 1_000_000;
