//! The set of words already seen in one field of one message.
//!
//! A long body repeats most of its words (`the`, `and`, names, product
//! words), and each word costs its own SipHash plus one per n-gram. Since
//! feature values are binary, a repeated word adds nothing to the vector:
//! its word and n-gram indices are already there. The extractor therefore
//! skips the word and n-gram features of a word this set has seen (pairs
//! are still taken, they depend on the neighbour). The set is emptied for
//! every field, and the explanation path does not use it at all; the
//! property tests check that both paths give the same indices.
//!
//! The table is open addressing with linear probing over a fast unkeyed
//! hash. Text is attacker-controlled, so probes stop after [`MAX_PROBES`]:
//! a word that finds no place is treated as new and computed again, so
//! crafted collisions cost no more than having no set.

/// Slots looked at before giving up on a lookup or an insertion.
const MAX_PROBES: usize = 8;

/// Fewest slots in the table.
const MIN_SLOTS: usize = 64;

#[derive(Debug, Clone, Copy)]
struct Entry {
    hash: u64,
    word_start: usize,
    word_len: usize,
}

/// Words seen so far in one field; see the module doc.
#[derive(Debug, Clone, Default)]
pub(crate) struct SeenWords {
    /// 0 for an empty slot, else entry number + 1.
    slots: Vec<u32>,
    entries: Vec<Entry>,
}

fn word_hash(bytes: &[u8]) -> u64 {
    const MULTIPLIER: u64 = 0x517c_c1b7_2722_0a95;
    let mut hash = bytes.len() as u64;
    let mut chunks = bytes.chunks_exact(8);
    for chunk in &mut chunks {
        let mut block = [0u8; 8];
        block.copy_from_slice(chunk);
        hash = (hash.rotate_left(5) ^ u64::from_le_bytes(block)).wrapping_mul(MULTIPLIER);
    }
    let mut last = 0u64;
    for (i, &byte) in chunks.remainder().iter().enumerate() {
        last |= u64::from(byte) << (8 * i);
    }
    hash = (hash.rotate_left(5) ^ last).wrapping_mul(MULTIPLIER);
    hash ^ (hash >> 29)
}

impl SeenWords {
    /// Empties the set for a field of about `expected_words` words.
    pub(crate) fn reset(&mut self, expected_words: usize) {
        self.entries.clear();
        let wanted = (expected_words * 2).max(MIN_SLOTS).next_power_of_two();
        self.slots.clear();
        self.slots.resize(wanted, 0);
    }

    /// Adds `word`, found at byte `word_start` of `text` (the field all
    /// words of this set come from). True if it was not seen before, or if
    /// the table could not tell.
    pub(crate) fn insert(&mut self, text: &str, word_start: usize, word: &str) -> bool {
        let hash = word_hash(word.as_bytes());
        let mask = self.slots.len().wrapping_sub(1);
        for probe in 0..MAX_PROBES.min(self.slots.len()) {
            let slot = (hash as usize).wrapping_add(probe) & mask;
            let Some(number) = self.slots[slot].checked_sub(1) else {
                self.place(
                    slot,
                    Entry {
                        hash,
                        word_start,
                        word_len: word.len(),
                    },
                );
                return true;
            };
            let entry = self.entries[number as usize];
            if entry.hash == hash
                && text.get(entry.word_start..entry.word_start + entry.word_len) == Some(word)
            {
                return false;
            }
        }
        true
    }

    fn place(&mut self, slot: usize, entry: Entry) {
        let Ok(number) = u32::try_from(self.entries.len() + 1) else {
            return;
        };
        self.entries.push(entry);
        self.slots[slot] = number;
        if self.entries.len() * 2 > self.slots.len() {
            self.grow();
        }
    }

    /// Doubles the table and re-inserts every entry (an entry that finds
    /// no place is forgotten, which only costs a recomputation).
    fn grow(&mut self) {
        let size = self.slots.len() * 2;
        self.slots.clear();
        self.slots.resize(size, 0);
        let mask = size - 1;
        for (number, entry) in self.entries.iter().enumerate() {
            for probe in 0..MAX_PROBES {
                let slot = (entry.hash as usize).wrapping_add(probe) & mask;
                if self.slots[slot] == 0 {
                    self.slots[slot] = number as u32 + 1;
                    break;
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn repeats_are_seen_and_new_words_are_not() {
        let text = "the cat saw the dog the";
        let mut seen = SeenWords::default();
        seen.reset(6);
        assert!(seen.insert(text, 0, "the"));
        assert!(seen.insert(text, 4, "cat"));
        assert!(seen.insert(text, 8, "saw"));
        assert!(!seen.insert(text, 12, "the"));
        assert!(seen.insert(text, 16, "dog"));
        assert!(!seen.insert(text, 20, "the"));
        seen.reset(6);
        assert!(seen.insert(text, 12, "the"), "reset forgets");
    }

    #[test]
    fn growth_keeps_what_was_seen() {
        let words: Vec<String> = (0..2000).map(|i| format!("w{i}")).collect();
        let text = words.join(" ");
        let mut seen = SeenWords::default();
        seen.reset(1);
        let mut start = 0;
        let mut spans = Vec::new();
        for word in &words {
            assert!(seen.insert(&text, start, word), "{word}");
            spans.push((start, word.as_str()));
            start += word.len() + 1;
        }
        let remembered = spans
            .iter()
            .filter(|&&(start, word)| !seen.insert(&text, start, word))
            .count();
        assert!(remembered > 1900, "{remembered}");
    }

    #[test]
    fn hash_uses_every_byte() {
        assert_ne!(word_hash(b"abcdefgh1"), word_hash(b"abcdefgh2"));
        assert_ne!(word_hash(b"a"), word_hash(b"a\0"));
        assert_ne!(word_hash(b""), word_hash(b"\0"));
    }
}
