//! Checkpoints: everything a run needs to continue bit for bit, checksummed.
//!
//! # Format
//! A one-line text header, the JSON of the [`Checkpoint`], and a newline:
//!
//! ```text
//! stepgauge-checkpoint v2 <length> <crc32>
//! {"format_version":2,"scheme":"...","state":{...},"ledger":{...},"extra":...}
//! ```
//!
//! `<length>` is the number of bytes of the JSON (decimal) and `<crc32>` its CRC-32 (IEEE, as in
//! zip and PNG; eight lower-case hexadecimal digits). CRC-32 detects every error burst of up to
//! 32 bits, so any single damaged byte, and all but about one in four billion larger damages.
//! It guards against accidents (a truncated copy, a full disk, a flipped bit), not against
//! deliberate tampering.
//!
//! Doubles are written by serde_json in their shortest round-trip form and read back with its
//! `float_roundtrip` parser, so a checkpoint restores every `f64` bit for bit (the sign of zero
//! included). The energy ledger is stored with its pending half-step terms, so a run resumed from
//! a checkpoint is bit-identical to an uninterrupted one.
//!
//! Reading checks the header, the length and the checksum before parsing the JSON: a damaged
//! file is refused as a whole with [`Error::CheckpointCorrupt`], never half-read. Writing is
//! atomic ([`write_atomically`]), so a crash while writing leaves the previous checkpoint intact.

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::write_atomically;
use crate::energy::EnergyLedger;
use crate::error::{Error, Result};
use crate::state::State;
use crate::validate::check_finite;

/// The checkpoint format version this build writes and reads. Version 2 added the forces kept at
/// constrained DOFs to the energy ledger's pending terms (`Pending::constrained`); version 1 files
/// are refused with [`Error::CheckpointVersion`].
pub const CHECKPOINT_FORMAT_VERSION: u32 = 2;

/// The first word of a checkpoint file.
const MAGIC: &str = "stepgauge-checkpoint";

/// The longest header accepted (magic, version, a 20-digit length and the checksum fit easily).
const MAX_HEADER: usize = 128;

/// What a checkpoint holds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Checkpoint {
    /// The format version, [`CHECKPOINT_FORMAT_VERSION`] (set by [`Checkpoint::new`]).
    pub format_version: u32,
    /// Free text describing the integrator and its parameters; the caller compares it on resume
    /// to refuse continuing a run with a different scheme.
    pub scheme: String,
    /// The state reached.
    pub state: State,
    /// The energy ledger, with its pending half-step terms.
    pub ledger: EnergyLedger,
    /// Anything else the caller needs to continue (step options, output settings...);
    /// `Value::Null` when there is nothing.
    pub extra: serde_json::Value,
}

impl Checkpoint {
    /// A checkpoint of the current format version.
    pub fn new(
        scheme: impl Into<String>,
        state: State,
        ledger: EnergyLedger,
        extra: serde_json::Value,
    ) -> Self {
        Checkpoint {
            format_version: CHECKPOINT_FORMAT_VERSION,
            scheme: scheme.into(),
            state,
            ledger,
            extra,
        }
    }
}

/// Writes a checkpoint to `path`, atomically (see the [module documentation](self) for the
/// format).
///
/// # Errors
/// [`Error::InvalidParameter`] when `format_version` is not [`CHECKPOINT_FORMAT_VERSION`];
/// [`Error::NonFiniteInput`] when the state or the ledger holds a NaN or an infinity (JSON cannot
/// carry it back); [`Error::Io`] when the file cannot be written (an existing file is then left
/// untouched and no scratch file remains).
pub fn write_checkpoint(path: &Path, checkpoint: &Checkpoint) -> Result<()> {
    let bytes = encode(checkpoint, path)?;
    write_atomically(path, |w| w.write_all(&bytes))
}

/// Reads a checkpoint written by [`write_checkpoint`].
///
/// # Errors
/// [`Error::Io`] when the file cannot be read; [`Error::CheckpointHeader`] when the header's first
/// word is not this format's (another program's file, a checkpoint written before the header took
/// its present form, a damaged header word); [`Error::CheckpointCorrupt`] when it is not a
/// checkpoint otherwise, is truncated or has extra bytes, fails its checksum, or does not hold a
/// valid checkpoint; [`Error::CheckpointVersion`] for an intact checkpoint of another format
/// version.
pub fn read_checkpoint(path: &Path) -> Result<Checkpoint> {
    let bytes = std::fs::read(path).map_err(|source| Error::Io {
        action: "read",
        path: path.to_path_buf(),
        source,
    })?;
    decode(&bytes, path)
}

/// The bytes of a checkpoint file; `path` is used in error messages.
pub(crate) fn encode(checkpoint: &Checkpoint, path: &Path) -> Result<Vec<u8>> {
    if checkpoint.format_version != CHECKPOINT_FORMAT_VERSION {
        return Err(Error::InvalidParameter {
            name: "format_version",
            value: f64::from(checkpoint.format_version),
            expected: "CHECKPOINT_FORMAT_VERSION (build checkpoints with Checkpoint::new)",
        });
    }
    check_all_finite(checkpoint)?;
    let json = serde_json::to_vec(checkpoint).map_err(|e| Error::Io {
        action: "encode the checkpoint for",
        path: path.to_path_buf(),
        source: e.into(),
    })?;
    let mut out = format!(
        "{MAGIC} v{CHECKPOINT_FORMAT_VERSION} {} {:08x}\n",
        json.len(),
        crc32fast::hash(&json)
    )
    .into_bytes();
    out.reserve(json.len() + 1);
    out.extend_from_slice(&json);
    out.push(b'\n');
    Ok(out)
}

/// Refuses values that JSON cannot carry (serde_json would write them as `null`).
fn check_all_finite(c: &Checkpoint) -> Result<()> {
    let s = &c.state;
    check_finite("checkpoint time", &[s.t])?;
    check_finite("checkpoint displacement", &s.u)?;
    check_finite("checkpoint velocity", &s.v)?;
    check_finite("checkpoint acceleration", &s.a)?;
    let l = &c.ledger;
    check_finite(
        "checkpoint energy ledger",
        &[
            l.kinetic,
            l.initial_kinetic,
            l.initial_internal,
            l.internal_work,
            l.external_work,
            l.damping_work,
            l.constraint_work,
            l.numerical_dissipation,
            l.energy_in,
        ],
    )?;
    check_finite("checkpoint extra work", &l.extra_work)?;
    let p = &l.pending;
    let scalars: Vec<f64> = [p.internal, p.external, p.damping]
        .iter()
        .chain(&p.extra)
        .flatten()
        .chain(&p.reactions)
        .chain(&p.constrained)
        .copied()
        .collect();
    check_finite("checkpoint pending energy terms", &scalars)
}

/// Parses the bytes of a checkpoint file; `path` is used in error messages.
pub(crate) fn decode(bytes: &[u8], path: &Path) -> Result<Checkpoint> {
    let corrupt = |reason: String| Error::CheckpointCorrupt {
        path: path.to_path_buf(),
        reason,
    };
    if bytes.is_empty() {
        return Err(corrupt("the file is empty".into()));
    }
    let expected = format!("{MAGIC} v{CHECKPOINT_FORMAT_VERSION} <length> <crc32>");
    let Some(nl) = bytes.iter().take(MAX_HEADER).position(|&b| b == b'\n') else {
        return Err(corrupt(format!(
            "no header line `{expected}` at the start (not a checkpoint, or truncated)"
        )));
    };
    let header = std::str::from_utf8(&bytes[..nl]).map_err(|_| {
        corrupt(format!(
            "the first line is not text, expected the header `{expected}`"
        ))
    })?;
    let words: Vec<&str> = header.split(' ').collect();
    if words[0] != MAGIC {
        return Err(Error::CheckpointHeader {
            path: path.to_path_buf(),
            // Made printable and cut short: the first word may be anything.
            found: words[0].escape_debug().take(40).collect(),
            expected,
        });
    }
    if words.len() != 4 {
        return Err(corrupt(format!(
            "the header has {} words, expected 4: `{MAGIC} v<version> <length> <crc32>`",
            words.len()
        )));
    }
    let version = words[1]
        .strip_prefix('v')
        .and_then(|v| canonical::<u32>(v, 10))
        .ok_or_else(|| corrupt(format!("garbled version `{}` in the header", words[1])))?;
    if version != CHECKPOINT_FORMAT_VERSION {
        return Err(Error::CheckpointVersion {
            path: path.to_path_buf(),
            found: version,
            supported: CHECKPOINT_FORMAT_VERSION,
        });
    }
    let length = canonical::<usize>(words[2], 10)
        .ok_or_else(|| corrupt(format!("garbled length `{}` in the header", words[2])))?;
    let crc = canonical::<u32>(words[3], 16)
        .filter(|_| words[3].len() == 8)
        .ok_or_else(|| {
            corrupt(format!(
                "garbled checksum `{}` in the header (expected 8 lower-case hex digits)",
                words[3]
            ))
        })?;
    let body = &bytes[nl + 1..];
    if body.len() < length.saturating_add(1) {
        return Err(corrupt(format!(
            "truncated: the header announces {length} bytes of content and a final newline, but \
             only {} bytes follow",
            body.len()
        )));
    }
    if body.len() > length + 1 {
        return Err(corrupt(format!(
            "{} unexpected bytes after the {length} bytes of content the header announces",
            body.len() - length - 1
        )));
    }
    let (json, end) = body.split_at(length);
    if end != b"\n" {
        return Err(corrupt("the content does not end with a newline".into()));
    }
    let actual = crc32fast::hash(json);
    if actual != crc {
        return Err(corrupt(format!(
            "checksum mismatch (header {crc:08x}, content {actual:08x}): the file was damaged \
             or altered"
        )));
    }
    let checkpoint: Checkpoint = serde_json::from_slice(json)
        .map_err(|e| corrupt(format!("the content is not a valid checkpoint: {e}")))?;
    if checkpoint.format_version != CHECKPOINT_FORMAT_VERSION {
        return Err(Error::CheckpointVersion {
            path: path.to_path_buf(),
            found: checkpoint.format_version,
            supported: CHECKPOINT_FORMAT_VERSION,
        });
    }
    Ok(checkpoint)
}

/// Parses an unsigned integer written exactly as this module writes it (no sign, no leading
/// zeros, lower-case hex), so that any altered character is detected.
fn canonical<T>(s: &str, radix: u32) -> Option<T>
where
    T: num_traits::Num + std::fmt::LowerHex + std::fmt::Display,
{
    let v = T::from_str_radix(s, radix).ok()?;
    let back = if radix == 16 {
        format!("{v:08x}")
    } else {
        v.to_string()
    };
    (back == s).then_some(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample() -> Checkpoint {
        let mut ledger = EnergyLedger::new(vec!["hourglass".into()], 2);
        ledger.kinetic = 0.1 + 0.2;
        ledger.internal_work = -1.0 / 3.0;
        ledger.extra_work[0] = 5e-324;
        ledger.pending.internal = [f64::MAX, -0.0];
        ledger.pending.reactions = vec![std::f64::consts::E, 1e300];
        let state = State {
            t: 0.7000000000000001,
            step: u64::MAX,
            u: vec![1.0 / 7.0, -0.0, f64::MIN_POSITIVE],
            v: vec![2.0f64.sqrt(), 1e-310, -123456.789],
            a: vec![0.0, f64::EPSILON, -f64::MAX],
        };
        Checkpoint::new(
            "central difference, dt = 1e-3",
            state,
            ledger,
            serde_json::json!({"t_end": 2.5, "record": [1, 2]}),
        )
    }

    fn bits(c: &Checkpoint) -> Vec<u64> {
        let s = &c.state;
        let l = &c.ledger;
        let p = &l.pending;
        [s.t, l.kinetic, l.internal_work, l.extra_work[0]]
            .iter()
            .chain(&s.u)
            .chain(&s.v)
            .chain(&s.a)
            .chain(p.internal.iter())
            .chain(&p.reactions)
            .map(|x| x.to_bits())
            .collect()
    }

    #[test]
    fn round_trip_in_memory_is_bit_exact() {
        let c = sample();
        let bytes = encode(&c, Path::new("c")).unwrap();
        let back = decode(&bytes, Path::new("c")).unwrap();
        assert_eq!(bits(&back), bits(&c));
        assert_eq!(back.state.step, u64::MAX);
        assert_eq!(back.ledger.pending, c.ledger.pending);
        assert_eq!(back.extra, c.extra);
        assert_eq!(back.scheme, c.scheme);
    }

    #[test]
    fn every_single_byte_damage_is_refused() {
        let bytes = encode(&sample(), Path::new("c")).unwrap();
        let mut refused = 0;
        for pos in 0..bytes.len() {
            for mask in [0x01u8, 0x20, 0x80, 0xff] {
                let mut b = bytes.clone();
                b[pos] ^= mask;
                match decode(&b, Path::new("c")) {
                    Err(
                        Error::CheckpointCorrupt { .. }
                        | Error::CheckpointHeader { .. }
                        | Error::CheckpointVersion { .. },
                    ) => refused += 1,
                    other => panic!("byte {pos} ^ {mask:#x} was not refused: {other:?}"),
                }
            }
        }
        assert_eq!(refused, 4 * bytes.len());
    }

    #[test]
    fn every_truncation_is_refused() {
        let bytes = encode(&sample(), Path::new("c")).unwrap();
        for len in 0..bytes.len() {
            let e = decode(&bytes[..len], Path::new("c")).unwrap_err();
            assert!(matches!(e, Error::CheckpointCorrupt { .. }), "{len}: {e}");
        }
        let mut longer = bytes.clone();
        longer.push(b'\n');
        let e = decode(&longer, Path::new("c")).unwrap_err();
        assert!(e.to_string().contains("1 unexpected bytes"), "{e}");
    }

    #[test]
    fn other_versions_and_non_finite_values_are_refused() {
        let bytes = encode(&sample(), Path::new("c")).unwrap();
        let text = String::from_utf8(bytes).unwrap();
        let e = decode(text.replacen(" v2 ", " v1 ", 1).as_bytes(), Path::new("c")).unwrap_err();
        assert!(
            matches!(
                e,
                Error::CheckpointVersion {
                    found: 1,
                    supported: 2,
                    ..
                }
            ),
            "{e}"
        );
        // An intact file (valid checksum) whose content says another version.
        let mut c = sample();
        c.format_version = 7;
        let json = serde_json::to_vec(&c).unwrap();
        let mut b =
            format!("{MAGIC} v2 {} {:08x}\n", json.len(), crc32fast::hash(&json)).into_bytes();
        b.extend_from_slice(&json);
        b.push(b'\n');
        let e = decode(&b, Path::new("c")).unwrap_err();
        assert!(
            matches!(e, Error::CheckpointVersion { found: 7, .. }),
            "{e}"
        );
        let e = encode(&c, Path::new("c")).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "format_version",
                    ..
                }
            ),
            "{e}"
        );
        // Valid checksum over content that is not a checkpoint.
        let json = br#"{"format_version":2}"#;
        let mut b =
            format!("{MAGIC} v2 {} {:08x}\n", json.len(), crc32fast::hash(json)).into_bytes();
        b.extend_from_slice(json);
        b.push(b'\n');
        let e = decode(&b, Path::new("c")).unwrap_err();
        assert!(e.to_string().contains("not a valid checkpoint"), "{e}");

        let mut c = sample();
        c.state.v[2] = f64::NAN;
        let e = encode(&c, Path::new("c")).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NonFiniteInput {
                    what: "checkpoint velocity",
                    index: 2,
                    ..
                }
            ),
            "{e}"
        );
        let mut c = sample();
        c.ledger.pending.reactions[1] = f64::INFINITY;
        let e = encode(&c, Path::new("c")).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NonFiniteInput {
                    what: "checkpoint pending energy terms",
                    ..
                }
            ),
            "{e}"
        );
    }
}
