//! Checkpoints: everything a [`super::Simulation`] needs to continue exactly as if it had never
//! stopped (the last accepted states, the proposed step, the order state of the variable-order
//! BDF, counters, the blow-up monitor).
//!
//! File layout (format 2): the 8 bytes `AGARCKPT`, a little-endian u32 format version, a
//! little-endian u64 length, that many bytes of JSON metadata, then each saved state as its
//! time followed by its species-major values, all little-endian f64, and last the CRC-32 of
//! every byte before it (little-endian u32), so a flipped byte anywhere is caught before any
//! value is used. States are binary so that they round-trip bit for bit and stay compact
//! (8 bytes per value). The metadata carries the caller's fingerprints ([`Checkpoint::tags`]):
//! hashes of what the states belong to, which the caller compares on resume.
//!
//! Format 1 (no checksum, no fingerprints) is refused with a message saying so: without them
//! a resume could not tell a damaged or foreign checkpoint from a good one.

use std::collections::BTreeMap;
use std::io::Read;
use std::path::Path;

use serde::{Deserialize, Serialize};
use thiserror::Error;

use super::blowup::Monitor;
use super::Stats;
use crate::output::{write_atomically, OutputError};

const MAGIC: &[u8; 8] = b"AGARCKPT";
const VERSION: u32 = 2;
/// Bytes of the header: magic, version, metadata length.
const HEADER: usize = 20;

/// Why a checkpoint could not be read or used.
#[derive(Debug, Error)]
pub enum CheckpointError {
    /// Reading failed.
    #[error("{path}: {message}")]
    Io {
        /// File.
        path: String,
        /// What happened.
        message: String,
    },
    /// The file is not a checkpoint of this format.
    #[error("{path}: not an agarium checkpoint ({reason})")]
    Format {
        /// File.
        path: String,
        /// What is wrong.
        reason: String,
    },
    /// The checkpoint belongs to another model or mesh.
    #[error("checkpoint does not fit this run: {0}")]
    Mismatch(String),
    /// Writing failed.
    #[error(transparent)]
    Output(#[from] OutputError),
}

/// Metadata of a checkpoint (the JSON part).
#[derive(Clone, Debug, Serialize, Deserialize)]
pub(crate) struct Meta {
    pub species: Vec<String>,
    pub nodes: usize,
    pub dt_next: f64,
    pub stats: Stats,
    pub force_euler: bool,
    pub monitor: Monitor,
    pub times: Vec<f64>,
    pub t_start: f64,
    /// Order state of the variable-order BDF (absent from older checkpoints: order 1).
    #[serde(default)]
    pub order: usize,
    /// Steps accepted at `order` since it last changed.
    #[serde(default)]
    pub order_steps: usize,
    /// The caller's fingerprints of what the states belong to (name → hash).
    #[serde(default)]
    pub tags: BTreeMap<String, String>,
}

/// A saved simulation state.
#[derive(Clone, Debug)]
pub struct Checkpoint {
    pub(crate) meta: Meta,
    pub(crate) states: Vec<Vec<f64>>,
}

impl Checkpoint {
    /// Time of the newest saved state.
    pub fn time(&self) -> f64 {
        self.meta.times.last().copied().unwrap_or(0.0)
    }

    /// Species names the checkpoint was taken with.
    pub fn species(&self) -> &[String] {
        &self.meta.species
    }

    /// Mesh nodes the checkpoint was taken on.
    pub fn nodes(&self) -> usize {
        self.meta.nodes
    }

    /// The fingerprints recorded with the states (name → hash), set by [`Checkpoint::tag`].
    pub fn tags(&self) -> &BTreeMap<String, String> {
        &self.meta.tags
    }

    /// Records a fingerprint `name` → `hash` of what the states belong to (a model, its
    /// parameters, the mesh), for the caller to compare when it restores them.
    pub fn tag(mut self, name: &str, hash: String) -> Self {
        self.meta.tags.insert(name.to_string(), hash);
        self
    }

    /// Writes the checkpoint atomically (temporary file, then rename).
    pub fn write(&self, path: &Path) -> Result<(), CheckpointError> {
        let json = serde_json::to_vec(&self.meta).map_err(|e| CheckpointError::Format {
            path: path.display().to_string(),
            reason: e.to_string(),
        })?;
        let io = |e: std::io::Error| OutputError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        };
        let per_state = self.states.first().map_or(0, Vec::len);
        let mut bytes =
            Vec::with_capacity(HEADER + json.len() + self.states.len() * 8 * (per_state + 1) + 4);
        bytes.extend_from_slice(MAGIC);
        bytes.extend_from_slice(&VERSION.to_le_bytes());
        bytes.extend_from_slice(&(json.len() as u64).to_le_bytes());
        bytes.extend_from_slice(&json);
        for (t, u) in self.meta.times.iter().zip(&self.states) {
            bytes.extend_from_slice(&t.to_le_bytes());
            for v in u {
                bytes.extend_from_slice(&v.to_le_bytes());
            }
        }
        let crc = crc32fast::hash(&bytes);
        bytes.extend_from_slice(&crc.to_le_bytes());
        write_atomically(path, |w| w.write_all(&bytes).map_err(io))?;
        Ok(())
    }

    /// Reads a checkpoint written by [`Checkpoint::write`].
    pub fn read(path: &Path) -> Result<Self, CheckpointError> {
        let name = path.display().to_string();
        let io = |e: std::io::Error| CheckpointError::Io {
            path: name.clone(),
            message: e.to_string(),
        };
        let format = |reason: &str| CheckpointError::Format {
            path: name.clone(),
            reason: reason.to_string(),
        };
        let mut bytes = Vec::new();
        std::fs::File::open(path)
            .and_then(|mut f| f.read_to_end(&mut bytes))
            .map_err(io)?;
        if bytes.len() < HEADER || &bytes[..8] != MAGIC {
            return Err(format("missing header"));
        }
        let version = u32::from_le_bytes(bytes[8..12].try_into().map_err(|_| format("header"))?);
        if version == 1 {
            return Err(format(
                "format version 1, written by an older agarium without a checksum or fingerprints; this agarium reads version 2 only: run again from the start",
            ));
        }
        if version != VERSION {
            return Err(format(&format!(
                "format version {version}, expected {VERSION}"
            )));
        }
        if bytes.len() < HEADER + 4 {
            return Err(format("truncated"));
        }
        let body = bytes.len() - 4;
        let stored = u32::from_le_bytes(bytes[body..].try_into().map_err(|_| format("checksum"))?);
        let computed = crc32fast::hash(&bytes[..body]);
        if stored != computed {
            return Err(format(&format!(
                "checksum mismatch (stored {stored:08x}, computed {computed:08x}): the file is damaged"
            )));
        }
        let bytes = &bytes[..body];
        let len = u64::from_le_bytes(bytes[12..20].try_into().map_err(|_| format("header"))?);
        let len = usize::try_from(len).map_err(|_| format("metadata length"))?;
        let json_end = HEADER.checked_add(len).filter(|&e| e <= bytes.len());
        let json_end = json_end.ok_or_else(|| format("truncated metadata"))?;
        let meta: Meta =
            serde_json::from_slice(&bytes[HEADER..json_end]).map_err(|e| format(&e.to_string()))?;
        let per_state = meta.species.len() * meta.nodes;
        let mut floats = bytes[json_end..]
            .chunks_exact(8)
            .map(|c| f64::from_le_bytes([c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]]));
        let expected = meta
            .times
            .len()
            .checked_mul(per_state.saturating_add(1).saturating_mul(8))
            .ok_or_else(|| format("state sizes overflow"))?;
        if bytes.len() - json_end != expected {
            return Err(format(&format!(
                "{} bytes of states, expected {expected}",
                bytes.len() - json_end
            )));
        }
        let mut states = Vec::with_capacity(meta.times.len());
        for &t in &meta.times {
            let saved_t = floats.next().ok_or_else(|| format("truncated states"))?;
            if saved_t.to_bits() != t.to_bits() {
                return Err(format("state times disagree with the metadata"));
            }
            states.push(floats.by_ref().take(per_state).collect());
        }
        Ok(Self { meta, states })
    }
}
