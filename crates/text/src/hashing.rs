//! Keyed feature hashing: from a feature's bytes to its slot in the weight vector.
//!
//! Every feature is a namespace tag and zero or more payload parts. Its index
//! is
//!
//! ```text
//! bytes = tag ‖ 0x1F … 0x1F ‖ part₁ ‖ 0x1F ‖ part₂ ‖ …      (0x1F = ASCII unit separator)
//! index = SipHash-2-4(key, bytes) & (2^bits − 1)
//! ```
//!
//! where
//!
//! * `tag` is the ASCII tag from the table in [`crate::extract`], followed
//!   by one or more 0x1F bytes so that tag and separators together fill a
//!   whole number of 8-byte SipHash blocks (`bias` is followed by four,
//!   `body.word` by seven, `subject.exclaim` by one);
//! * the parts are UTF-8 and a single 0x1F is written between parts, none
//!   after the last (a feature without parts hashes the padded tag alone);
//! * SipHash-2-4 is the function of Aumasson and Bernstein (2012), fed
//!   exactly these bytes and nothing else: no length prefixes, so only
//!   `Hasher::write` and the byte-slice `SipHasher24::hash` are used, never
//!   `write_str` or `Hash::hash`;
//! * the 64-bit result is cut to `bits` by the mask: the feature hashing of
//!   Weinberger et al. (2009), without a sign hash.
//!
//! The padding lets the extractor hash each tag once per key, keep the
//! SipHash state after it, and finish every feature from that state with
//! one call over the payload alone; most features cost a single
//! finalisation.
//!
//! Tags are only ever added. The respelling kinds (`<f>.skeleton`,
//! `<f>.joined`, `<f>.digitmap`, `<f>.mixed`, see [`crate::extract`]) came
//! after the others under the same rule; a model's feature settings say
//! whether they are extracted at all, and the features that existed before
//! them kept their bytes.
//!
//! What must stay true: these bytes never change. Saved models are only
//! meaningful under the byte layout, key and `bits` they were trained with;
//! the golden test in [`crate::extract`] fails loudly if the layout drifts.
//!
//! The key is secret so that an outsider cannot craft words that collide
//! with a known good feature. [`HashKey::key_id`] names a key without
//! revealing it, so checkpoints can record which key they need.

use std::fmt;
use std::hash::Hasher;

use siphasher::sip::SipHasher24;

/// Separator written after the tag and between payload parts.
pub(crate) const SEP: u8 = 0x1F;

/// The fixed message whose SipHash-2-4 under the key is the key id.
const KEY_ID_LABEL: &[u8] = b"chaffgate key id";

/// The secret 128-bit SipHash key that decides every feature index.
#[derive(Clone, PartialEq, Eq)]
pub struct HashKey([u8; 16]);

/// Why a hex string is not a hash key.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum KeyError {
    /// The text is not exactly 32 hex digits long.
    #[error("hash key must be 32 hex digits, found {len} characters")]
    WrongLength {
        /// Number of characters found.
        len: usize,
    },
    /// A character is not a hex digit (`0-9`, `a-f`, `A-F`).
    #[error("hash key has a non-hex character at position {position}")]
    NotHex {
        /// Zero-based character position of the first bad character.
        position: usize,
    },
}

impl HashKey {
    /// The key from its 16 raw bytes.
    pub fn from_bytes(bytes: [u8; 16]) -> Self {
        HashKey(bytes)
    }

    /// The 16 raw bytes.
    pub fn as_bytes(&self) -> &[u8; 16] {
        &self.0
    }

    /// 32 lowercase hex digits, first byte first.
    pub fn to_hex(&self) -> String {
        const DIGITS: &[u8; 16] = b"0123456789abcdef";
        let mut hex = String::with_capacity(32);
        for byte in self.0 {
            hex.push(char::from(DIGITS[usize::from(byte >> 4)]));
            hex.push(char::from(DIGITS[usize::from(byte & 0x0f)]));
        }
        hex
    }

    /// Parses 32 hex digits (either case), as written by [`HashKey::to_hex`].
    pub fn from_hex(text: &str) -> Result<Self, KeyError> {
        let len = text.chars().count();
        if len != 32 {
            return Err(KeyError::WrongLength { len });
        }
        let mut bytes = [0u8; 16];
        for (position, digit) in text.chars().enumerate() {
            let Some(value) = digit.to_digit(16) else {
                return Err(KeyError::NotHex { position });
            };
            let byte = &mut bytes[position / 2];
            *byte = (*byte << 4) | value as u8;
        }
        Ok(HashKey(bytes))
    }

    /// A stable id for this key that does not reveal it: SipHash-2-4 under
    /// the key of the fixed label `chaffgate key id`.
    pub fn key_id(&self) -> u64 {
        let mut hasher = self.hasher();
        hasher.write(KEY_ID_LABEL);
        hasher.finish()
    }

    /// A fresh SipHash-2-4 state under this key.
    pub(crate) fn hasher(&self) -> SipHasher24 {
        SipHasher24::new_with_key(&self.0)
    }
}

/// Shows only the key id, so the key never lands in a log.
impl fmt::Debug for HashKey {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "HashKey(id {id:016x})", id = self.key_id())
    }
}

/// The tag followed by its 0x1F padding, as hashed.
pub(crate) fn padded_tag(tag: &str) -> Vec<u8> {
    let mut bytes = Vec::from(tag.as_bytes());
    bytes.push(SEP);
    while bytes.len() % 8 != 0 {
        bytes.push(SEP);
    }
    bytes
}

/// Size of the stack buffer that joins a feature's payload before hashing.
const PAYLOAD_BYTES: usize = 64;

/// The SipHash state after one padded tag: start of every feature in the
/// tag's namespace.
#[derive(Clone, Copy)]
pub(crate) struct TagState(SipHasher24);

impl TagState {
    pub(crate) fn new(key: &HashKey, tag: &str) -> Self {
        let mut hasher = key.hasher();
        hasher.write(&padded_tag(tag));
        TagState(hasher)
    }

    /// Hash of the padded tag followed by `payload`.
    #[inline]
    pub(crate) fn hash(&self, payload: &[u8]) -> u64 {
        // The state holds whole blocks only, so the one-shot form applies
        // and equals `write(payload)` then `finish()` (tested below).
        self.0.hash(payload)
    }

    /// Hash with `parts` joined by single separators.
    #[inline]
    pub(crate) fn hash_parts(&self, parts: &[&[u8]]) -> u64 {
        match parts {
            [] => self.hash(&[]),
            [part] => self.hash(part),
            _ => {
                let mut joined = [0u8; PAYLOAD_BYTES];
                let mut len = 0;
                for (i, part) in parts.iter().enumerate() {
                    let needed = usize::from(i > 0) + part.len();
                    if len + needed > PAYLOAD_BYTES {
                        return self.hash_parts_streamed(parts);
                    }
                    if i > 0 {
                        joined[len] = SEP;
                        len += 1;
                    }
                    joined[len..len + part.len()].copy_from_slice(part);
                    len += part.len();
                }
                self.hash(&joined[..len])
            }
        }
    }

    /// [`TagState::hash_parts`] for payloads too long for the stack buffer.
    #[cold]
    fn hash_parts_streamed(&self, parts: &[&[u8]]) -> u64 {
        let mut hasher = self.0;
        for (i, part) in parts.iter().enumerate() {
            if i > 0 {
                hasher.write(&[SEP]);
            }
            hasher.write(part);
        }
        hasher.finish()
    }
}

/// The reference form of the hashing rule in the module doc, byte by byte.
/// The extractor uses [`TagState`] instead; tests check both agree.
#[cfg(test)]
pub(crate) fn feature_hash(key: &HashKey, tag: &str, parts: &[&[u8]]) -> u64 {
    let mut bytes = padded_tag(tag);
    for (i, part) in parts.iter().enumerate() {
        if i > 0 {
            bytes.push(SEP);
        }
        bytes.extend_from_slice(part);
    }
    let mut hasher = key.hasher();
    hasher.write(&bytes);
    hasher.finish()
}

/// Index mask for `bits` slots.
pub(crate) fn mask_for(bits: u8) -> u32 {
    debug_assert!(bits <= 31);
    (1u32 << bits) - 1
}

/// Reduces a 64-bit hash to a slot index.
#[inline]
pub(crate) fn index_of(hash: u64, mask: u32) -> u32 {
    (hash & u64::from(mask)) as u32
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Key 00 01 .. 0f, as in both sources of the vectors below.
    fn reference_key() -> [u8; 16] {
        std::array::from_fn(|i| i as u8)
    }

    fn siphash_of_counting_message(len: usize) -> u64 {
        let message: Vec<u8> = (0..len).map(|i| i as u8).collect();
        let mut hasher = SipHasher24::new_with_key(&reference_key());
        hasher.write(&message);
        hasher.finish()
    }

    #[test]
    fn siphash_2_4_paper_vector() {
        // Aumasson & Bernstein, "SipHash: a fast short-input PRF" (2012),
        // Appendix A: key 00..0f, 15-byte message 00..0e.
        assert_eq!(siphash_of_counting_message(15), 0xa129ca6149be45e5);
    }

    #[test]
    fn siphash_2_4_reference_vectors() {
        // vectors.h of the SipHash reference implementation (Aumasson &
        // Bernstein), `vectors_sip64`: entry i is the hash of the message
        // 00 01 .. (i-1) under key 00..0f, stored as little-endian bytes.
        let cases: [(usize, [u8; 8]); 7] = [
            (0, [0x31, 0x0e, 0x0e, 0xdd, 0x47, 0xdb, 0x6f, 0x72]),
            (1, [0xfd, 0x67, 0xdc, 0x93, 0xc5, 0x39, 0xf8, 0x74]),
            (2, [0x5a, 0x4f, 0xa9, 0xd9, 0x09, 0x80, 0x6c, 0x0d]),
            (3, [0x2d, 0x7e, 0xfb, 0xd7, 0x96, 0x66, 0x67, 0x85]),
            (7, [0x37, 0xd1, 0x01, 0x8b, 0xf5, 0x00, 0x02, 0xab]),
            (8, [0x62, 0x24, 0x93, 0x9a, 0x79, 0xf5, 0xf5, 0x93]),
            (15, [0xe5, 0x45, 0xbe, 0x49, 0x61, 0xca, 0x29, 0xa1]),
        ];
        for (len, expected) in cases {
            assert_eq!(
                siphash_of_counting_message(len),
                u64::from_le_bytes(expected),
                "length {len}"
            );
        }
    }

    #[test]
    fn split_writes_hash_like_one_write() {
        // The extractor writes tag, separator and parts in pieces; SipHash
        // must see one byte string regardless of how it is cut.
        let key = HashKey::from_bytes(reference_key());
        let message: Vec<u8> = (0u8..40).collect();
        let mut whole = key.hasher();
        whole.write(&message);
        for cut in [0, 1, 7, 8, 9, 16, 39, 40] {
            let mut pieces = key.hasher();
            pieces.write(&message[..cut]);
            pieces.write(&message[cut..]);
            assert_eq!(pieces.finish(), whole.finish(), "cut at {cut}");
        }
    }

    #[test]
    fn feature_hash_is_siphash_of_documented_bytes() {
        let key = HashKey::from_bytes(reference_key());
        let siphash = |bytes: &[u8]| {
            let mut hasher = key.hasher();
            hasher.write(bytes);
            hasher.finish()
        };
        assert_eq!(
            feature_hash(&key, "body.pair", &[b"free", b"entry"]),
            siphash(b"body.pair\x1f\x1f\x1f\x1f\x1f\x1f\x1ffree\x1fentry")
        );
        assert_eq!(
            feature_hash(&key, "url.ip", &[]),
            siphash(b"url.ip\x1f\x1f")
        );
        assert_eq!(
            feature_hash(&key, "bias", &[]),
            siphash(b"bias\x1f\x1f\x1f\x1f")
        );
        assert_eq!(
            feature_hash(&key, "subject.exclaim", &[b"2"]),
            siphash(b"subject.exclaim\x1f2")
        );
    }

    #[test]
    fn padded_tags_fill_whole_blocks() {
        for tag in [
            "bias",
            "channel",
            "meta",
            "body.word",
            "subject.exclaim",
            "sender.domain",
            "x",
        ] {
            let padded = padded_tag(tag);
            assert_eq!(padded.len() % 8, 0, "{tag}");
            assert!(
                padded.len() > tag.len() && padded.len() <= tag.len() + 8,
                "{tag}"
            );
            assert!(padded[tag.len()..].iter().all(|&byte| byte == SEP), "{tag}");
        }
    }

    #[test]
    fn tag_state_shortcuts_equal_the_reference() {
        let key = HashKey::from_bytes(reference_key());
        let state = TagState::new(&key, "body.pair");
        let long = [b'w'; 70];
        let cases: [&[&[u8]]; 6] = [
            &[],
            &[b"free"],
            &[b"free", b"entry"],
            &[b"", b""],
            &[&long, b"x"],
            &[b"a", b"b", b"c"],
        ];
        for parts in cases {
            assert_eq!(
                state.hash_parts(parts),
                feature_hash(&key, "body.pair", parts),
                "{parts:?}"
            );
        }
    }

    #[test]
    fn hex_round_trip_and_case() {
        let key = HashKey::from_bytes(reference_key());
        assert_eq!(key.to_hex(), "000102030405060708090a0b0c0d0e0f");
        assert_eq!(HashKey::from_hex(&key.to_hex()), Ok(key.clone()));
        assert_eq!(
            HashKey::from_hex("000102030405060708090A0B0C0D0E0F"),
            Ok(key)
        );
    }

    #[test]
    fn bad_hex_is_rejected_with_position() {
        assert_eq!(
            HashKey::from_hex("00"),
            Err(KeyError::WrongLength { len: 2 })
        );
        assert_eq!(
            HashKey::from_hex("000102030405060708090a0b0c0d0e0g"),
            Err(KeyError::NotHex { position: 31 })
        );
        // Lengths count characters, not bytes, and a multi-byte character
        // is reported where it stands.
        let short = format!("ü{}", "0".repeat(30));
        assert_eq!(
            HashKey::from_hex(&short),
            Err(KeyError::WrongLength { len: 31 })
        );
        let with_umlaut = format!("{}ü{}", "0".repeat(5), "0".repeat(26));
        assert_eq!(
            HashKey::from_hex(&with_umlaut),
            Err(KeyError::NotHex { position: 5 })
        );
        assert_eq!(
            HashKey::from_hex("+00102030405060708090a0b0c0d0e0f"),
            Err(KeyError::NotHex { position: 0 })
        );
    }

    #[test]
    fn key_id_is_siphash_of_label_and_depends_on_key() {
        let key = HashKey::from_bytes(reference_key());
        let mut hasher = SipHasher24::new_with_key(&reference_key());
        hasher.write(b"chaffgate key id");
        assert_eq!(key.key_id(), hasher.finish());
        let other = HashKey::from_bytes([7; 16]);
        assert_ne!(key.key_id(), other.key_id());
    }

    #[test]
    fn debug_does_not_show_the_key() {
        let key = HashKey::from_bytes([0xab; 16]);
        let shown = format!("{key:?}");
        assert!(!shown.contains("abab"), "{shown}");
        assert!(shown.contains(&format!("{:016x}", key.key_id())), "{shown}");
    }

    #[test]
    fn mask_keeps_low_bits() {
        assert_eq!(mask_for(8), 0xff);
        assert_eq!(mask_for(30), 0x3fff_ffff);
        assert_eq!(index_of(0xffff_ffff_ffff_ff12, mask_for(8)), 0x12);
    }
}
