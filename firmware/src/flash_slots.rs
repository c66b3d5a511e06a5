//! The two configuration slots of [`config_store`](crate::config_store) on
//! two erase pages of a NOR flash.
//!
//! NOR flash is erased a page at a time and written in small words, and a
//! write can only clear bits. [`config_store::save`](crate::config_store::save)
//! writes one whole slot per call, so [`FlashSlots`] gives each slot a page of
//! its own: saving erases that page and writes the record, while the other
//! page (holding the previous record) is never touched. A power cut during
//! the erase or the write leaves a slot that fails its CRC, never a damaged
//! previous configuration.

use embedded_storage::nor_flash::NorFlash;
use embedded_storage::{ReadStorage, Storage};

use crate::config_store::{SLOT_LEN, STORE_LEN};

/// Largest flash write unit supported (bytes written at once).
pub const MAX_WRITE_SIZE: usize = 32;

/// Why a slot access failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FlashSlotsError {
    /// The access was outside the two slots, or a write did not start at a
    /// slot's first byte.
    NotASlot,
    /// The flash refused an erase, write or read.
    Flash,
}

impl core::fmt::Display for FlashSlotsError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            FlashSlotsError::NotASlot => "not a whole configuration slot",
            FlashSlotsError::Flash => "the flash refused an erase, write or read",
        })
    }
}

impl core::error::Error for FlashSlotsError {}

/// Two pages of a NOR flash seen as the [`Storage`] the configuration store needs.
#[derive(Debug)]
pub struct FlashSlots<F> {
    flash: F,
    first_page: u32,
}

impl<F: NorFlash> FlashSlots<F> {
    /// Uses the two erase pages starting at byte `first_page` of `flash`.
    ///
    /// None when `first_page` is not at a page boundary, the two pages do not
    /// fit in the flash, a page is smaller than a slot, the flash cannot be
    /// read byte by byte, or its write unit exceeds [`MAX_WRITE_SIZE`].
    pub fn new(flash: F, first_page: u32) -> Option<Self> {
        let page = u32::try_from(F::ERASE_SIZE).ok().filter(|&p| p > 0)?;
        let end = page.checked_mul(2)?.checked_add(first_page)?;
        let fits = usize::try_from(end).ok()? <= flash.capacity();
        let usable = first_page.is_multiple_of(page)
            && fits
            && F::ERASE_SIZE >= SLOT_LEN
            && F::READ_SIZE == 1
            && (1..=MAX_WRITE_SIZE).contains(&F::WRITE_SIZE);
        usable.then_some(FlashSlots { flash, first_page })
    }

    /// Gives the flash back.
    pub fn release(self) -> F {
        self.flash
    }

    /// Flash address of byte `offset` of a slot, with the bytes left in that slot.
    fn locate(&self, offset: usize) -> Option<(u32, usize)> {
        let slot = offset.checked_div(SLOT_LEN)?;
        let within = offset.checked_rem(SLOT_LEN)?;
        if slot > 1 {
            return None;
        }
        let page_start = u32::try_from(slot.checked_mul(F::ERASE_SIZE)?).ok()?;
        let address = self
            .first_page
            .checked_add(page_start)?
            .checked_add(u32::try_from(within).ok()?)?;
        Some((address, SLOT_LEN.checked_sub(within)?))
    }
}

impl<F: NorFlash> ReadStorage for FlashSlots<F> {
    type Error = FlashSlotsError;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        let mut offset = usize::try_from(offset).map_err(|_| FlashSlotsError::NotASlot)?;
        let mut rest = bytes;
        while !rest.is_empty() {
            let (address, left_in_slot) = self.locate(offset).ok_or(FlashSlotsError::NotASlot)?;
            let take = left_in_slot.min(rest.len());
            let (now, later) = rest.split_at_mut(take);
            self.flash
                .read(address, now)
                .map_err(|_| FlashSlotsError::Flash)?;
            offset = offset.checked_add(take).ok_or(FlashSlotsError::NotASlot)?;
            rest = later;
        }
        Ok(())
    }

    fn capacity(&self) -> usize {
        STORE_LEN
    }
}

impl<F: NorFlash> Storage for FlashSlots<F> {
    /// Erases the slot's page, then writes `bytes` from its start, the last
    /// partial word padded with `0xFF` (the erased value).
    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        let offset = usize::try_from(offset).map_err(|_| FlashSlotsError::NotASlot)?;
        let (address, room) = self.locate(offset).ok_or(FlashSlotsError::NotASlot)?;
        if !offset.is_multiple_of(SLOT_LEN) || bytes.len() > room {
            return Err(FlashSlotsError::NotASlot);
        }
        let page_end = u32::try_from(F::ERASE_SIZE)
            .ok()
            .and_then(|page| address.checked_add(page))
            .ok_or(FlashSlotsError::NotASlot)?;
        self.flash
            .erase(address, page_end)
            .map_err(|_| FlashSlotsError::Flash)?;
        let whole = bytes
            .len()
            .checked_div(F::WRITE_SIZE)
            .and_then(|words| words.checked_mul(F::WRITE_SIZE))
            .ok_or(FlashSlotsError::NotASlot)?;
        let (body, tail) = bytes.split_at(whole);
        if !body.is_empty() {
            self.flash
                .write(address, body)
                .map_err(|_| FlashSlotsError::Flash)?;
        }
        if !tail.is_empty() {
            let mut word = [0xFF_u8; MAX_WRITE_SIZE];
            let word = word
                .get_mut(..F::WRITE_SIZE)
                .ok_or(FlashSlotsError::NotASlot)?;
            word.get_mut(..tail.len())
                .ok_or(FlashSlotsError::NotASlot)?
                .copy_from_slice(tail);
            let at = u32::try_from(whole)
                .ok()
                .and_then(|w| address.checked_add(w))
                .ok_or(FlashSlotsError::NotASlot)?;
            self.flash
                .write(at, word)
                .map_err(|_| FlashSlotsError::Flash)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::default_config;
    use crate::config_store::{load, save};
    use embedded_storage::nor_flash::{ErrorType, NorFlashErrorKind, ReadNorFlash};
    use gleaner_protocol::ConfigSource;

    #[test]
    fn errors_say_what_failed_as_errors_do() {
        fn as_error(e: &dyn core::error::Error) -> String {
            e.to_string()
        }
        assert_eq!(
            as_error(&FlashSlotsError::NotASlot),
            "not a whole configuration slot"
        );
        assert_eq!(
            as_error(&crate::config_store::StoreError::Storage),
            "the storage refused a read or write"
        );
    }

    const PAGE: usize = 4096;

    /// A RAM model of NOR flash with the rules the nRF52840's NVMC follows
    /// (4 KiB pages, 4-byte aligned word writes that can only clear bits),
    /// and a power cut after a number of erased pages or written words.
    struct Nor {
        bytes: Vec<u8>,
        operations_left: Option<usize>,
        erases: usize,
    }

    impl Nor {
        fn new(pages: usize) -> Self {
            Nor {
                bytes: vec![0xFF; pages * PAGE],
                operations_left: None,
                erases: 0,
            }
        }

        /// Power fails during the `n`-th next operation (0: the very next).
        fn cut_during(&mut self, n: usize) {
            self.operations_left = Some(n);
        }

        fn step(&mut self) -> Result<bool, NorFlashErrorKind> {
            match self.operations_left {
                Some(0) => Ok(false),
                Some(n) => {
                    self.operations_left = Some(n - 1);
                    Ok(true)
                }
                None => Ok(true),
            }
        }
    }

    impl ErrorType for Nor {
        type Error = NorFlashErrorKind;
    }

    impl ReadNorFlash for Nor {
        const READ_SIZE: usize = 1;
        fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
            let start = offset as usize;
            let src = self
                .bytes
                .get(start..start + bytes.len())
                .ok_or(NorFlashErrorKind::OutOfBounds)?;
            bytes.copy_from_slice(src);
            Ok(())
        }
        fn capacity(&self) -> usize {
            self.bytes.len()
        }
    }

    impl NorFlash for Nor {
        const WRITE_SIZE: usize = 4;
        const ERASE_SIZE: usize = PAGE;
        fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
            let (from, to) = (from as usize, to as usize);
            if !from.is_multiple_of(PAGE) || !to.is_multiple_of(PAGE) || to > self.bytes.len() {
                return Err(NorFlashErrorKind::NotAligned);
            }
            self.erases += 1;
            for page in (from..to).step_by(PAGE) {
                if !self.step()? {
                    // Cut mid-erase: half the page erased, the rest garbage-ish.
                    self.bytes[page..page + PAGE / 2].fill(0xFF);
                    self.bytes[page + PAGE / 2..page + PAGE].fill(0x5A);
                    return Err(NorFlashErrorKind::Other);
                }
                self.bytes[page..page + PAGE].fill(0xFF);
            }
            Ok(())
        }
        fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
            let start = offset as usize;
            if !start.is_multiple_of(4) || !bytes.len().is_multiple_of(4) {
                return Err(NorFlashErrorKind::NotAligned);
            }
            for (i, word) in bytes.chunks(4).enumerate() {
                if !self.step()? {
                    return Err(NorFlashErrorKind::Other);
                }
                for (j, b) in word.iter().enumerate() {
                    // NOR: programming can only clear bits.
                    self.bytes[start + 4 * i + j] &= b;
                }
            }
            Ok(())
        }
    }

    fn changed(seed: u32) -> gleaner_protocol::NodeConfig {
        let mut config = default_config();
        config.report_interval_ms = 1_000 + seed;
        config
    }

    #[test]
    fn refuses_flash_it_cannot_use() {
        assert!(FlashSlots::new(Nor::new(2), 0).is_some());
        assert!(
            FlashSlots::new(Nor::new(2), 4).is_none(),
            "not page aligned"
        );
        assert!(
            FlashSlots::new(Nor::new(2), PAGE as u32).is_none(),
            "one page short"
        );
        assert!(FlashSlots::new(Nor::new(1), 0).is_none());
    }

    #[test]
    fn erased_flash_loads_defaults_and_saves_alternate_pages() -> Result<(), &'static str> {
        let mut slots = FlashSlots::new(Nor::new(4), 2 * PAGE as u32).ok_or("usable")?;
        assert_eq!(load(&mut slots).source, ConfigSource::Defaults);
        for round in 1..=5u32 {
            assert_eq!(save(&mut slots, &changed(round)), Ok(()));
            let loaded = load(&mut slots);
            assert_eq!(loaded.source, ConfigSource::Stored);
            assert_eq!(loaded.config, changed(round));
            assert_eq!(loaded.sequence(), Some(round));
        }
        let nor = slots.release();
        assert_eq!(nor.erases, 5);
        // The first two pages, outside the slots, were never written.
        assert!(nor.bytes[..2 * PAGE].iter().all(|&b| b == 0xFF));
        // Both slot pages start with the record magic.
        assert_eq!(&nor.bytes[2 * PAGE..2 * PAGE + 4], b"GLC1");
        assert_eq!(&nor.bytes[3 * PAGE..3 * PAGE + 4], b"GLC1");
        Ok(())
    }

    #[test]
    fn power_cut_at_every_step_keeps_the_previous_configuration() -> Result<(), &'static str> {
        // Erase + one write per 4-byte word of the record (+1 for a tail word).
        let steps = 1 + SLOT_LEN.div_ceil(4) + 1;
        let mut interrupted = 0;
        for cut in 0..steps {
            let mut slots = FlashSlots::new(Nor::new(2), 0).ok_or("usable")?;
            assert_eq!(save(&mut slots, &changed(1)), Ok(()));
            assert_eq!(save(&mut slots, &changed(2)), Ok(()));
            let mut nor = slots.release();
            nor.cut_during(cut);
            let mut slots = FlashSlots::new(nor, 0).ok_or("usable")?;
            let finished = save(&mut slots, &changed(3)).is_ok();
            let loaded = load(&mut slots);
            assert_eq!(loaded.source, ConfigSource::Stored, "cut at step {cut}");
            let expected = if finished { changed(3) } else { changed(2) };
            assert_eq!(loaded.config, expected, "cut at step {cut}");
            interrupted += usize::from(!finished);
        }
        // Every step of the save (the erase and each word) was cut once; the
        // last cuts came after the save had finished.
        assert!(
            interrupted >= 2 && interrupted < steps,
            "{interrupted} of {steps}"
        );
        Ok(())
    }

    #[test]
    fn reads_and_writes_outside_the_slots_are_refused() -> Result<(), &'static str> {
        let mut slots = FlashSlots::new(Nor::new(2), 0).ok_or("usable")?;
        let mut buf = [0u8; 8];
        assert_eq!(
            slots.read(STORE_LEN as u32, &mut buf),
            Err(FlashSlotsError::NotASlot)
        );
        assert_eq!(slots.write(1, &[0; 4]), Err(FlashSlotsError::NotASlot));
        assert_eq!(
            slots.write(0, &[0; SLOT_LEN + 1]),
            Err(FlashSlotsError::NotASlot)
        );
        // A read across the slot boundary joins the end of page 0 to the start of page 1.
        assert_eq!(slots.write(0, &[1; SLOT_LEN]), Ok(()));
        assert_eq!(slots.write(SLOT_LEN as u32, &[2; 5]), Ok(()));
        let mut across = [0u8; 4];
        assert_eq!(slots.read(SLOT_LEN as u32 - 2, &mut across), Ok(()));
        assert_eq!(across, [1, 1, 2, 2]);
        Ok(())
    }
}
