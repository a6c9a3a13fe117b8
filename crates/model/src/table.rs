//! The slot table: `2^bits` slots of two `f32`s, zeroed, in one anonymous
//! memory mapping.
//!
//! Scoring and learning touch a few dozen slots scattered over the whole
//! table (32 MiB at 22 bits), so the cost of a message is mostly page
//! faults on first touch and TLB misses after. An anonymous mapping is
//! zero-filled by the kernel, and on Linux the table asks for transparent
//! huge pages (`madvise(MADV_HUGEPAGE)`), which turns thousands of 4 KiB
//! faults into a few dozen 2 MiB ones and keeps the whole table in a
//! handful of TLB entries. Where the advice is refused the table works the
//! same, only slower; nothing here changes a value. Every page is touched
//! when the table is made, so the one-off cost of mapping it is paid at
//! start-up (a few milliseconds at 22 bits), not by the first messages.

use std::ops::{Deref, DerefMut};

use memmap2::MmapMut;

use crate::update::Slot;

pub(crate) struct SlotTable {
    map: MmapMut,
}

impl SlotTable {
    /// A zeroed table of `len` slots. Fails only when the system has no
    /// memory to map.
    pub(crate) fn zeroed(len: usize) -> std::io::Result<SlotTable> {
        let bytes = len * std::mem::size_of::<Slot>();
        let map = MmapMut::map_anon(bytes)?;
        #[cfg(target_os = "linux")]
        {
            // Advice only: a refusal (huge pages disabled) changes nothing
            // but speed, so the error is deliberately ignored.
            let _ = map.advise(memmap2::Advice::HugePage);
        }
        let mut table = SlotTable { map };
        table.touch_pages();
        Ok(table)
    }

    /// Writes one slot per 4 KiB page so the kernel maps (and zeroes) the
    /// whole table now, at start-up, rather than one page fault at a time
    /// in the middle of scoring. The values written are the zeros already
    /// there.
    fn touch_pages(&mut self) {
        const SLOTS_PER_PAGE: usize = 4096 / std::mem::size_of::<Slot>();
        for slot in self.iter_mut().step_by(SLOTS_PER_PAGE) {
            *slot = [0.0, 0.0];
        }
    }

    /// Bytes of address space the table spans.
    pub(crate) fn byte_len(&self) -> usize {
        self.map.len()
    }
}

impl Deref for SlotTable {
    type Target = [Slot];

    fn deref(&self) -> &[Slot] {
        // A mapping starts on a page boundary and spans whole slots, so the
        // cast cannot fail.
        bytemuck::cast_slice(&self.map[..])
    }
}

impl DerefMut for SlotTable {
    fn deref_mut(&mut self) -> &mut [Slot] {
        bytemuck::cast_slice_mut(&mut self.map[..])
    }
}

impl Clone for SlotTable {
    fn clone(&self) -> SlotTable {
        let mut copy = match SlotTable::zeroed(self.len()) {
            Ok(copy) => copy,
            Err(err) => panic!(
                "out of memory copying a {} byte model: {err}",
                self.byte_len()
            ),
        };
        copy.copy_from_slice(self);
        copy
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_starts_zeroed_and_keeps_writes() {
        let mut table = SlotTable::zeroed(1 << 12).unwrap();
        assert_eq!(table.len(), 1 << 12);
        assert!(table.iter().all(|slot| *slot == [0.0, 0.0]));
        table[7] = [1.5, -2.0];
        let copy = table.clone();
        assert_eq!(copy[7], [1.5, -2.0]);
        assert_eq!(copy.byte_len(), 8 << 12);
    }
}
