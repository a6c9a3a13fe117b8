//! Checkpoint files: a saved copy of the model, tagged with the last feedback
//! sequence number it includes.
//!
//! The learner task writes one every so often; at start-up the server loads
//! the newest valid one and replays the feedback rows after `last_seq`. The
//! feedback log is the source of truth, so a checkpoint that is not exactly
//! right must be refused, never half-loaded: every field is validated and the
//! whole file is covered by a SHA-256 checksum. Writing is atomic (temporary
//! file in the same directory, fsync, rename, fsync of the directory), so a
//! crash leaves either the old file or the new one.
//!
//! The file also carries the per-deployment hash key that maps feature names
//! to slots: weights are meaningless under any other key, so the two travel
//! together. New files are created readable by their owner only, because of
//! that key.
//!
//! # Format, version 1
//!
//! Little-endian throughout. `p` is the number of hyper-parameters of the
//! rule, `e` the length of the extractor string, `c` the number of slots
//! stored.
//!
//! | offset | bytes | field |
//! | --- | --- | --- |
//! | 0 | 8 | magic `CHAFFGT\0` |
//! | 8 | 4 | format version, u32, currently 1 |
//! | 12 | 8 | hash key id, u64 |
//! | 20 | 16 | hash key |
//! | 36 | 1 | bits, u8, 8 to 30: the table has 2^bits slots |
//! | 37 | 1 | update rule tag, u8: 1 = AdaGrad, 2 = FTRL-Proximal |
//! | 38 | 8p | hyper-parameters, f64 each. AdaGrad (p = 3): eta, delta, l2. FTRL-Proximal (p = 4): alpha, beta, l1, l2 |
//! | h = 38 + 8p | 8 | examples seen, u64 |
//! | h + 8 | 8 | last feedback sequence number included, u64 |
//! | h + 16 | 4 | extractor length `e`, u32 |
//! | h + 20 | e | extractor: feature settings as UTF-8 (JSON by convention; opaque here) |
//! | s = h + 20 + e | 8 | slot count `c`, u64 |
//! | s + 8 | 12c | slots in strictly increasing index order, each: index u32, state f32, state f32 (AdaGrad: w, G; FTRL-Proximal: z, sqrt(n)) |
//! | s + 8 + 12c | 32 | SHA-256 of every byte before it |
//!
//! Only slots with state are stored (a slot is left out when both numbers
//! are +0.0), so a file is small while the model is young or L1 keeps it
//! sparse. Each model has exactly one encoding: reading a file and writing
//! it again gives the same bytes.
//!
//! A reader checks, in order: the magic, the version (a newer version is
//! refused, never guessed at), the checksum (if it fails, the header's
//! lengths decide whether to call the file truncated or corrupted), then
//! every field: bits in range, a known rule with valid hyper-parameters,
//! UTF-8, the slot count matching the file length, indices below 2^bits and
//! strictly increasing, all numbers finite, the second number of each slot
//! (a sum of squared gradients or its square root) not negative.

use std::fmt;
use std::fs;
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::model::{BITS_RANGE, Model, ModelError, is_empty_slot};
use crate::rule::{UpdateRule, list_problems};
use crate::update::Slot;

/// The first eight bytes of every checkpoint.
pub const MAGIC: [u8; 8] = *b"CHAFFGT\0";

/// The format version this build writes and the only one it reads.
pub const FORMAT_VERSION: u32 = 1;

const CHECKSUM_LEN: usize = 32;
const SLOT_LEN: usize = 12;
const TAG_ADAGRAD: u8 = 1;
const TAG_FTRL: u8 = 2;
/// Offset of the rule tag; everything before it has a fixed size.
const TAG_OFFSET: usize = 37;

/// Everything in a checkpoint besides the model itself.
#[derive(Clone, PartialEq, Eq)]
pub struct CheckpointHeader {
    /// Identifies which hash key the weights were learned under.
    pub key_id: u64,
    /// The per-deployment secret key of the feature hash.
    pub hash_key: [u8; 16],
    /// The sequence number of the last feedback row the model includes.
    pub last_seq: u64,
    /// The feature settings the model was trained with, as the caller wrote
    /// them (JSON by convention). Stored and returned untouched.
    pub extractor: String,
}

impl fmt::Debug for CheckpointHeader {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // The hash key is a secret: keep it out of logs.
        f.debug_struct("CheckpointHeader")
            .field("key_id", &self.key_id)
            .field("hash_key", &"<redacted>")
            .field("last_seq", &self.last_seq)
            .field("extractor", &self.extractor)
            .finish()
    }
}

/// Why a checkpoint could not be written or read.
#[derive(Debug, thiserror::Error)]
pub enum CheckpointError {
    /// The file system refused an operation; `action` says which one.
    #[error("{action}: {path}")]
    Io {
        /// What failed, e.g. `could not read checkpoint`.
        action: &'static str,
        /// The file or directory concerned.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: io::Error,
    },
    /// The file was read but is not a usable checkpoint.
    #[error("checkpoint {path}: {problem}")]
    Format {
        /// The file.
        path: PathBuf,
        /// What is wrong with it.
        problem: FormatError,
    },
    /// The header's extractor string does not fit the format's 32-bit length.
    #[error("extractor settings are {length} bytes long; a checkpoint holds at most 4 GiB")]
    ExtractorTooLong {
        /// Its length in bytes.
        length: usize,
    },
}

/// What is wrong with the bytes of a checkpoint.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FormatError {
    /// The file ends before the end its header describes (or before the
    /// header itself ends): typically a copy or write that was cut short.
    #[error(
        "truncated: it has {actual_len} bytes but its header describes at least {expected_len}"
    )]
    Truncated {
        /// The file's length.
        actual_len: usize,
        /// The shortest length consistent with what could be read.
        expected_len: usize,
    },
    /// The file does not start with [`MAGIC`]: it is not a checkpoint.
    #[error("not a chaffgate checkpoint: it starts with \"{found}\", not \"CHAFFGT\\0\"")]
    WrongMagic {
        /// The first bytes, escaped.
        found: String,
    },
    /// The format version is not the one this build reads, typically a file
    /// written by a newer release.
    #[error("format version {found} is not supported: this build reads version {supported}")]
    UnsupportedVersion {
        /// The version in the file.
        found: u32,
        /// [`FORMAT_VERSION`].
        supported: u32,
    },
    /// The SHA-256 checksum does not match the contents.
    #[error("checksum mismatch: the contents are corrupted")]
    ChecksumMismatch,
    /// The checksum matches but a field holds a value no writer produces.
    #[error("invalid {field}: {problem}")]
    Invalid {
        /// Which field.
        field: &'static str,
        /// What is wrong with its value.
        problem: String,
    },
    /// The header is valid but the model could not be built from it.
    #[error("cannot build the model it describes: {0}")]
    Model(ModelError),
}

fn invalid(field: &'static str, problem: impl Into<String>) -> FormatError {
    FormatError::Invalid {
        field,
        problem: problem.into(),
    }
}

/// Writes `model` and `header` to `path` atomically: a temporary file in the
/// same directory is written and fsynced, renamed over `path`, and the
/// directory is fsynced so that the rename itself survives a crash.
pub fn write_checkpoint(
    path: &Path,
    model: &Model,
    header: &CheckpointHeader,
) -> Result<(), CheckpointError> {
    check_extractor(header)?;
    let dir = match path.parent() {
        Some(parent) if !parent.as_os_str().is_empty() => parent,
        _ => Path::new("."),
    };
    let io_error = |action: &'static str, at: &Path| {
        let path = at.to_path_buf();
        move |source: io::Error| CheckpointError::Io {
            action,
            path,
            source,
        }
    };

    let mut temp = tempfile::Builder::new()
        .prefix(".checkpoint-")
        .suffix(".partial")
        .tempfile_in(dir)
        .map_err(io_error(
            "could not create a temporary file in directory",
            dir,
        ))?;
    {
        let mut out = BufWriter::new(temp.as_file_mut());
        encode(model, header, &mut out).map_err(io_error("could not write checkpoint", path))?;
        out.flush()
            .map_err(io_error("could not write checkpoint", path))?;
    }
    temp.as_file()
        .sync_all()
        .map_err(io_error("could not sync the new checkpoint to disk", path))?;
    temp.persist(path).map_err(|err| {
        io_error("could not rename the new checkpoint into place", path)(err.error)
    })?;
    sync_dir(dir).map_err(io_error(
        "could not sync to disk the directory of the checkpoint",
        dir,
    ))?;
    Ok(())
}

#[cfg(unix)]
fn sync_dir(dir: &Path) -> io::Result<()> {
    fs::File::open(dir)?.sync_all()
}

#[cfg(not(unix))]
fn sync_dir(_dir: &Path) -> io::Result<()> {
    // Directories cannot be opened for syncing here; the rename is as
    // durable as the platform makes it.
    Ok(())
}

/// Reads and fully validates a checkpoint.
pub fn read_checkpoint(path: &Path) -> Result<(Model, CheckpointHeader), CheckpointError> {
    let bytes = fs::read(path).map_err(|source| CheckpointError::Io {
        action: "could not read checkpoint",
        path: path.to_path_buf(),
        source,
    })?;
    checkpoint_from_bytes(&bytes).map_err(|problem| CheckpointError::Format {
        path: path.to_path_buf(),
        problem,
    })
}

/// The bytes `write_checkpoint` would write.
pub fn checkpoint_to_bytes(
    model: &Model,
    header: &CheckpointHeader,
) -> Result<Vec<u8>, CheckpointError> {
    check_extractor(header)?;
    let mut bytes = Vec::new();
    encode(model, header, &mut bytes).expect("writing to a Vec cannot fail");
    Ok(bytes)
}

/// Decodes and fully validates the bytes of a checkpoint.
pub fn checkpoint_from_bytes(bytes: &[u8]) -> Result<(Model, CheckpointHeader), FormatError> {
    check_magic_and_version(bytes)?;
    let intact = bytes.len() >= 12 + CHECKSUM_LEN && {
        let (content, checksum) = bytes.split_at(bytes.len() - CHECKSUM_LEN);
        sha256(content) == checksum
    };
    if !intact {
        return Err(match described_len(bytes) {
            Walk::Length(expected_len) if expected_len > bytes.len() => FormatError::Truncated {
                actual_len: bytes.len(),
                expected_len,
            },
            Walk::EndsEarly(expected_len) => FormatError::Truncated {
                actual_len: bytes.len(),
                expected_len,
            },
            Walk::Length(_) | Walk::Unreadable => FormatError::ChecksumMismatch,
        });
    }
    decode(&bytes[..bytes.len() - CHECKSUM_LEN])
}

fn check_extractor(header: &CheckpointHeader) -> Result<(), CheckpointError> {
    let length = header.extractor.len();
    if u32::try_from(length).is_err() {
        return Err(CheckpointError::ExtractorTooLong { length });
    }
    Ok(())
}

fn sha256(bytes: &[u8]) -> [u8; 32] {
    Sha256::digest(bytes).into()
}

/// Writes the encoding, computing the checksum on the way, so that a large
/// model never has to exist twice in memory.
fn encode(model: &Model, header: &CheckpointHeader, out: &mut impl Write) -> io::Result<()> {
    let mut out = Hashing {
        inner: out,
        hasher: Sha256::new(),
    };
    out.put(&MAGIC)?;
    out.put(&FORMAT_VERSION.to_le_bytes())?;
    out.put(&header.key_id.to_le_bytes())?;
    out.put(&header.hash_key)?;
    out.put(&[model.bits()])?;
    match model.rule() {
        UpdateRule::Adagrad { eta, l2, delta } => {
            out.put(&[TAG_ADAGRAD])?;
            for value in [eta, delta, l2] {
                out.put(&value.to_le_bytes())?;
            }
        }
        UpdateRule::Ftrl {
            alpha,
            beta,
            l1,
            l2,
        } => {
            out.put(&[TAG_FTRL])?;
            for value in [alpha, beta, l1, l2] {
                out.put(&value.to_le_bytes())?;
            }
        }
    }
    out.put(&model.examples_seen().to_le_bytes())?;
    out.put(&header.last_seq.to_le_bytes())?;
    // check_extractor has made sure the length fits.
    out.put(&(header.extractor.len() as u32).to_le_bytes())?;
    out.put(header.extractor.as_bytes())?;

    let stored = || {
        model
            .slots()
            .iter()
            .enumerate()
            .filter(|(_, slot)| !is_empty_slot(**slot))
    };
    out.put(&(stored().count() as u64).to_le_bytes())?;
    for (index, slot) in stored() {
        let mut record = [0u8; SLOT_LEN];
        record[0..4].copy_from_slice(&(index as u32).to_le_bytes());
        record[4..8].copy_from_slice(&slot[0].to_le_bytes());
        record[8..12].copy_from_slice(&slot[1].to_le_bytes());
        out.put(&record)?;
    }
    let checksum: [u8; 32] = out.hasher.finalize().into();
    out.inner.write_all(&checksum)
}

struct Hashing<'a, W: Write> {
    inner: &'a mut W,
    hasher: Sha256,
}

impl<W: Write> Hashing<'_, W> {
    fn put(&mut self, bytes: &[u8]) -> io::Result<()> {
        self.hasher.update(bytes);
        self.inner.write_all(bytes)
    }
}

fn check_magic_and_version(bytes: &[u8]) -> Result<(), FormatError> {
    let head = &bytes[..bytes.len().min(MAGIC.len())];
    if head != &MAGIC[..head.len()] {
        return Err(FormatError::WrongMagic {
            found: head.escape_ascii().to_string(),
        });
    }
    let Some(version) = bytes.get(8..12) else {
        return Err(FormatError::Truncated {
            actual_len: bytes.len(),
            expected_len: 12,
        });
    };
    let found = u32::from_le_bytes(version.try_into().expect("four bytes"));
    if found != FORMAT_VERSION {
        return Err(FormatError::UnsupportedVersion {
            found,
            supported: FORMAT_VERSION,
        });
    }
    Ok(())
}

/// What the header's lengths say about a file whose checksum failed.
enum Walk {
    /// The whole file should be this long.
    Length(usize),
    /// The file ends inside the header; it needs at least this many bytes.
    EndsEarly(usize),
    /// The header cannot be followed (unknown rule tag, absurd count).
    Unreadable,
}

fn described_len(bytes: &[u8]) -> Walk {
    let Some(&tag) = bytes.get(TAG_OFFSET) else {
        return Walk::EndsEarly(TAG_OFFSET + 1);
    };
    let parameters = match tag {
        TAG_ADAGRAD => 3,
        TAG_FTRL => 4,
        _ => return Walk::Unreadable,
    };
    let extractor_len_at = TAG_OFFSET + 1 + 8 * parameters + 16;
    let Some(extractor_len) = bytes.get(extractor_len_at..extractor_len_at + 4) else {
        return Walk::EndsEarly(extractor_len_at + 4);
    };
    let extractor_len = u32::from_le_bytes(extractor_len.try_into().expect("four bytes"));
    let count_at = extractor_len_at + 4 + extractor_len as usize;
    let Some(count) = bytes.get(count_at..count_at + 8) else {
        return Walk::EndsEarly(count_at + 8);
    };
    let count = u64::from_le_bytes(count.try_into().expect("eight bytes"));
    let total = usize::try_from(count)
        .ok()
        .and_then(|count| count.checked_mul(SLOT_LEN))
        .and_then(|slots| slots.checked_add(count_at + 8 + CHECKSUM_LEN));
    match total {
        Some(total) => Walk::Length(total),
        None => Walk::Unreadable,
    }
}

/// Reads fields from the checksummed content. Running out of bytes here
/// means a writer produced an inconsistent file, so it is `Invalid`.
struct Reader<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Reader<'a> {
    fn take<const N: usize>(&mut self, field: &'static str) -> Result<[u8; N], FormatError> {
        let chunk = self
            .bytes
            .get(self.at..self.at + N)
            .ok_or_else(|| invalid(field, "the file ends inside it"))?;
        self.at += N;
        Ok(chunk.try_into().expect("length checked"))
    }

    fn u8(&mut self, field: &'static str) -> Result<u8, FormatError> {
        Ok(self.take::<1>(field)?[0])
    }

    fn u32(&mut self, field: &'static str) -> Result<u32, FormatError> {
        Ok(u32::from_le_bytes(self.take(field)?))
    }

    fn u64(&mut self, field: &'static str) -> Result<u64, FormatError> {
        Ok(u64::from_le_bytes(self.take(field)?))
    }

    fn f32(&mut self, field: &'static str) -> Result<f32, FormatError> {
        Ok(f32::from_le_bytes(self.take(field)?))
    }

    fn f64(&mut self, field: &'static str) -> Result<f64, FormatError> {
        Ok(f64::from_le_bytes(self.take(field)?))
    }

    fn slice(&mut self, len: usize, field: &'static str) -> Result<&'a [u8], FormatError> {
        let chunk = self
            .at
            .checked_add(len)
            .and_then(|end| self.bytes.get(self.at..end))
            .ok_or_else(|| invalid(field, "the file ends inside it"))?;
        self.at += len;
        Ok(chunk)
    }

    fn remaining(&self) -> usize {
        self.bytes.len() - self.at
    }
}

/// Decodes the content (everything before the checksum) of a file whose
/// magic, version and checksum have been checked.
fn decode(content: &[u8]) -> Result<(Model, CheckpointHeader), FormatError> {
    let mut r = Reader {
        bytes: content,
        at: MAGIC.len() + 4,
    };
    let key_id = r.u64("hash key id")?;
    let hash_key = r.take::<16>("hash key")?;
    let bits = r.u8("bits")?;
    if !BITS_RANGE.contains(&bits) {
        return Err(invalid("bits", format!("{bits} is outside 8..=30")));
    }
    let rule = match r.u8("update rule")? {
        TAG_ADAGRAD => {
            let eta = r.f64("update rule")?;
            let delta = r.f64("update rule")?;
            let l2 = r.f64("update rule")?;
            UpdateRule::Adagrad { eta, l2, delta }
        }
        TAG_FTRL => UpdateRule::Ftrl {
            alpha: r.f64("update rule")?,
            beta: r.f64("update rule")?,
            l1: r.f64("update rule")?,
            l2: r.f64("update rule")?,
        },
        tag => {
            return Err(invalid(
                "update rule",
                format!("unknown tag {tag} (1 = AdaGrad, 2 = FTRL-Proximal)"),
            ));
        }
    };
    if let Err(problems) = rule.validate() {
        return Err(invalid("update rule", list_problems(&problems)));
    }
    let examples_seen = r.u64("examples seen")?;
    let last_seq = r.u64("last feedback sequence number")?;
    let extractor_len = r.u32("extractor length")?;
    let extractor = r.slice(extractor_len as usize, "extractor")?;
    let extractor = String::from_utf8(extractor.to_vec())
        .map_err(|err| invalid("extractor", format!("not UTF-8: {err}")))?;

    let count = r.u64("slot count")?;
    let table_len = 1u64 << bits;
    let fits = usize::try_from(count)
        .ok()
        .and_then(|count| count.checked_mul(SLOT_LEN))
        .is_some_and(|len| len == r.remaining());
    if count > table_len || !fits {
        return Err(invalid(
            "slot count",
            format!(
                "{count} slots do not match the {remaining} bytes that follow \
                 (12 per slot) or the table of {table_len}",
                remaining = r.remaining()
            ),
        ));
    }

    let mut slots: Vec<(u32, Slot)> = Vec::with_capacity(count as usize);
    let mut previous: Option<u32> = None;
    for _ in 0..count {
        let index = r.u32("slot index")?;
        let first = r.f32("slot state")?;
        let second = r.f32("slot state")?;
        if u64::from(index) >= table_len {
            return Err(invalid(
                "slot index",
                format!("{index} is beyond the table of 2^{bits} slots"),
            ));
        }
        if let Some(previous) = previous
            && index <= previous
        {
            return Err(invalid(
                "slot index",
                format!("{index} follows {previous}: indices must strictly increase"),
            ));
        }
        previous = Some(index);
        if !(first.is_finite() && second.is_finite()) {
            return Err(invalid(
                "slot state",
                format!("slot {index} holds {first}, {second}: not finite"),
            ));
        }
        // NaN was refused just above, so a plain comparison suffices.
        if second < 0.0 {
            return Err(invalid(
                "slot state",
                format!("slot {index} has a negative sum of squared gradients ({second})"),
            ));
        }
        if is_empty_slot([first, second]) {
            return Err(invalid(
                "slot state",
                format!("slot {index} is stored but holds no state"),
            ));
        }
        slots.push((index, [first, second]));
    }

    let model = Model::from_parts(bits, rule, examples_seen, slots).map_err(FormatError::Model)?;
    let header = CheckpointHeader {
        key_id,
        hash_key,
        last_seq,
        extractor,
    };
    Ok((model, header))
}

#[cfg(test)]
mod tests {
    use super::*;

    const EXTRACTOR: &str = r#"{"words":true,"pairs":true,"char_ngrams":[3,5]}"#;

    fn header() -> CheckpointHeader {
        CheckpointHeader {
            key_id: 0x0123_4567_89ab_cdef,
            hash_key: *b"0123456789abcdef",
            last_seq: 4242,
            extractor: EXTRACTOR.to_owned(),
        }
    }

    fn adagrad() -> UpdateRule {
        UpdateRule::Adagrad {
            eta: 0.3,
            l2: 0.01,
            delta: 1e-6,
        }
    }

    fn ftrl() -> UpdateRule {
        UpdateRule::Ftrl {
            alpha: 0.2,
            beta: 1.0,
            l1: 0.05,
            l2: 0.01,
        }
    }

    /// A small trained model: a few examples over a handful of slots,
    /// including indices above 2^bits.
    fn trained(rule: UpdateRule) -> Model {
        let mut model = Model::new(8, rule).unwrap();
        let examples: [(&[(u32, f32)], bool); 4] = [
            (&[(1, 0.5), (17, 1.0), (300, 0.25)], true),
            (&[(2, 1.0), (17, 0.5)], false),
            (&[(1, 1.0), (255, -0.75)], true),
            (&[(9, 1.0), (1000, 0.5)], false),
        ];
        for (x, is_junk) in examples {
            model.learn(x, is_junk);
        }
        model
    }

    /// Replaces the checksum so that a deliberately edited file passes it
    /// and reaches field validation.
    fn reseal(bytes: &mut [u8]) {
        let at = bytes.len() - CHECKSUM_LEN;
        let checksum = sha256(&bytes[..at]);
        bytes[at..].copy_from_slice(&checksum);
    }

    /// Offset of the first slot record in a file from `trained(adagrad())`.
    fn first_slot_at() -> usize {
        TAG_OFFSET + 1 + 3 * 8 + 8 + 8 + 4 + EXTRACTOR.len() + 8
    }

    fn invalid_field(bytes: &[u8]) -> &'static str {
        match checkpoint_from_bytes(bytes) {
            Err(FormatError::Invalid { field, .. }) => field,
            other => panic!("expected an invalid field, got {other:?}"),
        }
    }

    #[test]
    fn round_trip_is_bit_identical() {
        for rule in [adagrad(), ftrl()] {
            let model = trained(rule);
            let bytes = checkpoint_to_bytes(&model, &header()).unwrap();
            let (read, read_header) = checkpoint_from_bytes(&bytes).unwrap();
            assert!(read == model, "{rule:?}");
            assert_eq!(read_header, header());
            assert_eq!(read.examples_seen(), 4);
            assert_eq!(checkpoint_to_bytes(&read, &read_header).unwrap(), bytes);
            // The file is sparse: 12 bytes per slot with state.
            let fixed = first_slot_at() + CHECKSUM_LEN + if rule == ftrl() { 8 } else { 0 };
            assert_eq!(bytes.len(), fixed + 12 * model.nonzero_slots());
        }
    }

    #[test]
    fn negative_zero_survives_a_round_trip() {
        let model = Model::from_parts(8, adagrad(), 1, [(3, [-0.0, 0.0])]).unwrap();
        assert_eq!(model.nonzero_slots(), 1);
        let bytes = checkpoint_to_bytes(&model, &header()).unwrap();
        let (read, _) = checkpoint_from_bytes(&bytes).unwrap();
        assert!(read == model);
        assert_eq!(read.slots()[3][0].to_bits(), (-0.0f32).to_bits());
    }

    #[test]
    fn layout_starts_as_documented() {
        let bytes = checkpoint_to_bytes(&trained(adagrad()), &header()).unwrap();
        assert_eq!(&bytes[0..8], b"CHAFFGT\0");
        assert_eq!(&bytes[8..12], &[1, 0, 0, 0]);
        assert_eq!(&bytes[12..20], &0x0123_4567_89ab_cdefu64.to_le_bytes());
        assert_eq!(&bytes[20..36], b"0123456789abcdef");
        assert_eq!(bytes[36], 8);
        assert_eq!(bytes[37], TAG_ADAGRAD);
        assert_eq!(&bytes[38..46], &0.3f64.to_le_bytes());
        let checksum_at = bytes.len() - 32;
        assert_eq!(bytes[checksum_at..], sha256(&bytes[..checksum_at]));
    }

    #[test]
    fn every_truncation_is_reported_as_truncated() {
        let bytes = checkpoint_to_bytes(&trained(ftrl()), &header()).unwrap();
        for len in 0..bytes.len() {
            match checkpoint_from_bytes(&bytes[..len]) {
                Err(FormatError::Truncated {
                    actual_len,
                    expected_len,
                }) => {
                    assert_eq!(actual_len, len);
                    assert!(expected_len > len, "len {len}: expected {expected_len}");
                }
                other => panic!("len {len}: {other:?}"),
            }
        }
    }

    #[test]
    fn every_flipped_byte_is_caught() {
        let bytes = checkpoint_to_bytes(&trained(adagrad()), &header()).unwrap();
        let extractor_len_at = TAG_OFFSET + 1 + 3 * 8 + 16;
        let count_at = first_slot_at() - 8;
        for at in 0..bytes.len() {
            let mut damaged = bytes.clone();
            damaged[at] ^= 0x40;
            let err = checkpoint_from_bytes(&damaged).unwrap_err();
            match at {
                0..8 => assert!(matches!(err, FormatError::WrongMagic { .. }), "{at}: {err}"),
                8..12 => assert!(
                    matches!(err, FormatError::UnsupportedVersion { .. }),
                    "{at}: {err}"
                ),
                // A damaged length field can make the file look short.
                _ if (extractor_len_at..extractor_len_at + 4).contains(&at)
                    || (count_at..count_at + 8).contains(&at) =>
                {
                    assert!(
                        matches!(
                            err,
                            FormatError::ChecksumMismatch | FormatError::Truncated { .. }
                        ),
                        "{at}: {err}"
                    );
                }
                _ => assert_eq!(err, FormatError::ChecksumMismatch, "at {at}"),
            }
        }
    }

    #[test]
    fn wrong_magic_is_refused() {
        let mut bytes = checkpoint_to_bytes(&trained(adagrad()), &header()).unwrap();
        bytes[..8].copy_from_slice(b"PK\x03\x04abcd");
        let err = checkpoint_from_bytes(&bytes).unwrap_err();
        assert_eq!(
            err.to_string(),
            r#"not a chaffgate checkpoint: it starts with "PK\x03\x04abcd", not "CHAFFGT\0""#
        );
        assert!(matches!(
            checkpoint_from_bytes(b"{\"weights\": []}"),
            Err(FormatError::WrongMagic { .. })
        ));
    }

    #[test]
    fn a_future_version_is_refused() {
        let mut bytes = checkpoint_to_bytes(&trained(adagrad()), &header()).unwrap();
        bytes[8..12].copy_from_slice(&2u32.to_le_bytes());
        reseal(&mut bytes);
        let err = checkpoint_from_bytes(&bytes).unwrap_err();
        assert_eq!(
            err,
            FormatError::UnsupportedVersion {
                found: 2,
                supported: 1
            }
        );
        assert_eq!(
            err.to_string(),
            "format version 2 is not supported: this build reads version 1"
        );
    }

    #[test]
    fn header_fields_are_validated() {
        let good = checkpoint_to_bytes(&trained(adagrad()), &header()).unwrap();
        let edit = |at: usize, new: &[u8]| {
            let mut bytes = good.clone();
            bytes[at..at + new.len()].copy_from_slice(new);
            reseal(&mut bytes);
            bytes
        };
        assert_eq!(invalid_field(&edit(36, &[31])), "bits");
        assert_eq!(invalid_field(&edit(36, &[7])), "bits");
        assert_eq!(invalid_field(&edit(37, &[9])), "update rule");
        // eta = -0.3
        assert_eq!(
            invalid_field(&edit(38, &(-0.3f64).to_le_bytes())),
            "update rule"
        );
        // delta = NaN
        assert_eq!(
            invalid_field(&edit(46, &f64::NAN.to_le_bytes())),
            "update rule"
        );
        // A byte that cannot start UTF-8, inside the extractor.
        let extractor_at = TAG_OFFSET + 1 + 3 * 8 + 20;
        assert_eq!(invalid_field(&edit(extractor_at, &[0xff])), "extractor");
        // A slot count one too high.
        let count_at = first_slot_at() - 8;
        let count = u64::from_le_bytes(good[count_at..count_at + 8].try_into().unwrap());
        assert_eq!(
            invalid_field(&edit(count_at, &(count + 1).to_le_bytes())),
            "slot count"
        );
    }

    #[test]
    fn slots_are_validated() {
        let good = checkpoint_to_bytes(&trained(adagrad()), &header()).unwrap();
        let first = first_slot_at();
        let second = first + SLOT_LEN;
        let edit = |at: usize, new: &[u8]| {
            let mut bytes = good.clone();
            bytes[at..at + new.len()].copy_from_slice(new);
            reseal(&mut bytes);
            bytes
        };
        let first_index = u32::from_le_bytes(good[first..first + 4].try_into().unwrap());
        assert_eq!(
            invalid_field(&edit(first, &256u32.to_le_bytes())),
            "slot index"
        );
        assert_eq!(
            invalid_field(&edit(second, &first_index.to_le_bytes())),
            "slot index"
        );
        assert_eq!(
            invalid_field(&edit(first + 4, &f32::NAN.to_le_bytes())),
            "slot state"
        );
        assert_eq!(
            invalid_field(&edit(first + 4, &f32::INFINITY.to_le_bytes())),
            "slot state"
        );
        assert_eq!(
            invalid_field(&edit(first + 8, &(-1.0f32).to_le_bytes())),
            "slot state"
        );
        assert_eq!(invalid_field(&edit(first + 4, &[0; 8])), "slot state");
    }

    #[test]
    fn files_round_trip_and_replace_atomically() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("model.ckpt");
        let first = trained(adagrad());
        write_checkpoint(&path, &first, &header()).unwrap();
        let (read, read_header) = read_checkpoint(&path).unwrap();
        assert!(read == first);
        assert_eq!(read_header, header());

        let mut second = first.clone();
        second.learn(&[(5, 1.0)], true);
        let newer = CheckpointHeader {
            last_seq: 4243,
            ..header()
        };
        write_checkpoint(&path, &second, &newer).unwrap();
        let (read, read_header) = read_checkpoint(&path).unwrap();
        assert!(read == second);
        assert_eq!(read_header.last_seq, 4243);
        // No temporary files are left behind.
        let names: Vec<_> = fs::read_dir(dir.path())
            .unwrap()
            .map(|entry| entry.unwrap().file_name())
            .collect();
        assert_eq!(names, ["model.ckpt"]);
    }

    #[test]
    fn read_errors_name_the_path_and_the_problem() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("cut.ckpt");
        let bytes = checkpoint_to_bytes(&trained(adagrad()), &header()).unwrap();
        fs::write(&path, &bytes[..100]).unwrap();
        let message = read_checkpoint(&path).unwrap_err().to_string();
        assert!(message.starts_with("checkpoint "), "{message}");
        assert!(message.contains("cut.ckpt"), "{message}");
        assert!(message.contains("truncated: it has 100 bytes"), "{message}");

        let missing = dir.path().join("missing.ckpt");
        let err = read_checkpoint(&missing).unwrap_err();
        assert!(matches!(err, CheckpointError::Io { .. }));
        assert!(err.to_string().contains("missing.ckpt"), "{err}");
    }

    #[test]
    fn writing_into_a_missing_directory_fails_cleanly() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("absent").join("model.ckpt");
        let err = write_checkpoint(&path, &trained(ftrl()), &header()).unwrap_err();
        assert!(matches!(err, CheckpointError::Io { .. }), "{err}");
        assert!(err.to_string().contains("absent"), "{err}");
    }

    #[test]
    fn debug_output_hides_the_hash_key() {
        let shown = format!("{:?}", header());
        assert!(!shown.contains("0123456789abcdef"), "{shown}");
        assert!(shown.contains("redacted"), "{shown}");
    }
}
