//! Configuration that survives brown-outs.
//!
//! Two slots hold alternating records `magic, sequence, length, postcard bytes,
//! CRC-32`. A save writes the slot that does not hold the newest record, so a
//! power cut at any byte of a write leaves the previous record intact; at boot
//! the newest record whose CRC checks is taken, else the defaults.

use embedded_storage::{ReadStorage, Storage};
use gleaner_protocol::{frame_crc, ConfigSource, MaxSize, NodeConfig};

use crate::config::{default_config, validate};

const MAGIC: [u8; 4] = *b"GLC1";
const HEADER_LEN: usize = 4 + 4 + 2;
const CRC_LEN: usize = 4;
/// Bytes of one slot.
pub const SLOT_LEN: usize = HEADER_LEN + NodeConfig::POSTCARD_MAX_SIZE + CRC_LEN;
/// Bytes the store needs from the storage, starting at offset 0.
pub const STORE_LEN: usize = 2 * SLOT_LEN;

/// Why a save failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum StoreError {
    /// The storage is smaller than [`STORE_LEN`].
    TooSmall,
    /// The storage refused a read or write.
    Storage,
    /// The configuration did not encode.
    Encode,
}

impl core::fmt::Display for StoreError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            StoreError::TooSmall => "the storage is smaller than the configuration store",
            StoreError::Storage => "the storage refused a read or write",
            StoreError::Encode => "the configuration did not encode",
        })
    }
}

impl core::error::Error for StoreError {}

/// What was loaded at boot.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Loaded {
    /// The configuration to use.
    pub config: NodeConfig,
    /// `Stored` or `Defaults`.
    pub source: ConfigSource,
    sequence: Option<u32>,
}

/// Reads slot `index`; None when it does not hold a valid record.
fn read_slot<S: ReadStorage>(storage: &mut S, index: usize) -> Option<(u32, NodeConfig)> {
    let mut buf = [0u8; SLOT_LEN];
    let offset = u32::try_from(index.checked_mul(SLOT_LEN)?).ok()?;
    storage.read(offset, &mut buf).ok()?;
    let (header, rest) = buf.split_at(HEADER_LEN);
    let (magic, rest_header) = header.split_at(4);
    if magic != MAGIC {
        return None;
    }
    let (seq_bytes, len_bytes) = rest_header.split_at(4);
    let sequence = u32::from_le_bytes(seq_bytes.try_into().ok()?);
    let len = usize::from(u16::from_le_bytes(len_bytes.try_into().ok()?));
    let body = rest.get(..len)?;
    let crc_bytes = rest.get(len..len.checked_add(CRC_LEN)?)?;
    let covered = buf.get(..HEADER_LEN.checked_add(len)?)?;
    if u32::from_le_bytes(crc_bytes.try_into().ok()?) != frame_crc(covered) {
        return None;
    }
    let config: NodeConfig = postcard::from_bytes(body).ok()?;
    validate(&config).ok()?;
    Some((sequence, config))
}

/// True when sequence `a` is newer than `b` (wrapping comparison).
const fn newer(a: u32, b: u32) -> bool {
    let diff = a.wrapping_sub(b);
    diff != 0 && diff < (1 << 31)
}

/// Loads the newest valid configuration, else the defaults.
pub fn load<S: ReadStorage>(storage: &mut S) -> Loaded {
    let newest = match (read_slot(storage, 0), read_slot(storage, 1)) {
        (Some(a), Some(b)) => Some(if newer(b.0, a.0) { b } else { a }),
        (a, b) => a.or(b),
    };
    match newest {
        Some((sequence, config)) => Loaded {
            config,
            source: ConfigSource::Stored,
            sequence: Some(sequence),
        },
        None => Loaded {
            config: default_config(),
            source: ConfigSource::Defaults,
            sequence: None,
        },
    }
}

/// Writes `config` to the slot not holding the newest record.
pub fn save<S: Storage>(storage: &mut S, config: &NodeConfig) -> Result<(), StoreError> {
    if storage.capacity() < STORE_LEN {
        return Err(StoreError::TooSmall);
    }
    let (target, sequence): (usize, u32) = match (read_slot(storage, 0), read_slot(storage, 1)) {
        (Some(a), Some(b)) if newer(b.0, a.0) => (0, b.0.wrapping_add(1)),
        (Some(a), Some(_)) => (1, a.0.wrapping_add(1)),
        (Some(a), None) => (1, a.0.wrapping_add(1)),
        (None, Some(b)) => (0, b.0.wrapping_add(1)),
        (None, None) => (0, 1),
    };
    let mut buf = [0u8; SLOT_LEN];
    let (header, rest) = buf.split_at_mut(HEADER_LEN);
    let used = postcard::to_slice(config, rest)
        .map_err(|_| StoreError::Encode)?
        .len();
    let len = u16::try_from(used).map_err(|_| StoreError::Encode)?;
    let (magic, header) = header.split_at_mut(4);
    let (seq, len_bytes) = header.split_at_mut(4);
    magic.copy_from_slice(&MAGIC);
    seq.copy_from_slice(&sequence.to_le_bytes());
    len_bytes.copy_from_slice(&len.to_le_bytes());
    let end = HEADER_LEN.checked_add(used).ok_or(StoreError::Encode)?;
    let record_end = end.checked_add(CRC_LEN).ok_or(StoreError::Encode)?;
    let crc = frame_crc(buf.get(..end).ok_or(StoreError::Encode)?);
    buf.get_mut(end..record_end)
        .ok_or(StoreError::Encode)?
        .copy_from_slice(&crc.to_le_bytes());
    let offset = target
        .checked_mul(SLOT_LEN)
        .and_then(|o| u32::try_from(o).ok());
    let offset = offset.ok_or(StoreError::TooSmall)?;
    // Only the record itself is written, CRC last: a cut before its final byte
    // leaves a record that fails its CRC, and the other slot stays the newest.
    let record = buf.get(..record_end).ok_or(StoreError::Encode)?;
    storage
        .write(offset, record)
        .map_err(|_| StoreError::Storage)
}

impl Loaded {
    /// The sequence number of the record loaded, if any.
    pub const fn sequence(&self) -> Option<u32> {
        self.sequence
    }
}

/// RAM-backed storage: for the virtual node, tests and boards without flash.
/// Can simulate a power cut after a given number of written bytes.
#[derive(Debug, Clone)]
pub struct MemoryStorage<const N: usize> {
    bytes: [u8; N],
    cut_after: Option<usize>,
}

impl<const N: usize> Default for MemoryStorage<N> {
    fn default() -> Self {
        Self::new()
    }
}

/// A write stopped by a simulated power cut.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PowerCut;

impl<const N: usize> MemoryStorage<N> {
    /// Erased storage (all bytes `0xFF`).
    pub const fn new() -> Self {
        MemoryStorage {
            bytes: [0xFF; N],
            cut_after: None,
        }
    }

    /// The next writes stop (as a power cut would) after `bytes` more bytes.
    pub fn cut_power_after(&mut self, bytes: usize) {
        self.cut_after = Some(bytes);
    }

    /// Power is back: writes complete again.
    pub fn restore_power(&mut self) {
        self.cut_after = None;
    }
}

impl<const N: usize> ReadStorage for MemoryStorage<N> {
    type Error = PowerCut;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        let start = usize::try_from(offset).map_err(|_| PowerCut)?;
        let end = start.checked_add(bytes.len()).ok_or(PowerCut)?;
        bytes.copy_from_slice(self.bytes.get(start..end).ok_or(PowerCut)?);
        Ok(())
    }

    fn capacity(&self) -> usize {
        N
    }
}

impl<const N: usize> Storage for MemoryStorage<N> {
    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        let start = usize::try_from(offset).map_err(|_| PowerCut)?;
        for (i, &byte) in bytes.iter().enumerate() {
            if let Some(left) = self.cut_after {
                if left == 0 {
                    return Err(PowerCut);
                }
                self.cut_after = Some(left.saturating_sub(1));
            }
            let slot = self
                .bytes
                .get_mut(start.saturating_add(i))
                .ok_or(PowerCut)?;
            *slot = byte;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    type Flash = MemoryStorage<STORE_LEN>;

    fn config_with_interval(ms: u32) -> NodeConfig {
        NodeConfig {
            report_interval_ms: ms,
            ..default_config()
        }
    }

    #[test]
    fn empty_storage_gives_defaults() {
        let loaded = load(&mut Flash::new());
        assert_eq!(
            (loaded.config, loaded.source),
            (default_config(), ConfigSource::Defaults)
        );
    }

    #[test]
    fn the_newest_save_wins_and_slots_alternate() {
        let mut flash = Flash::new();
        for ms in [1_000, 2_000, 3_000, 4_000, 5_000] {
            assert_eq!(save(&mut flash, &config_with_interval(ms)), Ok(()));
            let loaded = load(&mut flash);
            assert_eq!(loaded.config.report_interval_ms, ms);
            assert_eq!(loaded.source, ConfigSource::Stored);
        }
        assert_eq!(load(&mut flash).sequence(), Some(5));
    }

    #[test]
    fn a_power_cut_at_every_byte_leaves_a_valid_configuration() {
        let old = config_with_interval(2_000);
        let new = config_with_interval(7_000);
        for cut in 0..=SLOT_LEN {
            let mut flash = Flash::new();
            assert_eq!(save(&mut flash, &config_with_interval(1_000)), Ok(()));
            assert_eq!(save(&mut flash, &old), Ok(()));
            flash.cut_power_after(cut);
            let result = save(&mut flash, &new);
            flash.restore_power();
            let loaded = load(&mut flash).config;
            if result.is_ok() {
                assert_eq!(loaded, new, "cut at {cut}");
            } else {
                assert_eq!(loaded, old, "cut at {cut} must keep the previous record");
            }
        }
    }

    #[test]
    fn sequence_comparison_wraps() {
        assert!(newer(0, u32::MAX));
        assert!(newer(5, 4));
        assert!(!newer(4, 5));
        assert!(!newer(7, 7));
    }

    #[test]
    fn too_small_storage_is_an_error() {
        let mut tiny = MemoryStorage::<16>::new();
        assert_eq!(
            save(&mut tiny, &default_config()),
            Err(StoreError::TooSmall)
        );
        assert_eq!(load(&mut tiny).source, ConfigSource::Defaults);
    }
}
