//! Checkpoints: the full evolving state of a run saved to one file, so that a run stopped by
//! its wall-time budget, a signal (Slurm preemption) or a crash continues where it was.
//!
//! File layout (`checkpoint.bin` in the run directory): the magic line `KINFLUX-CHECKPOINT-1\n`,
//! a little-endian u64 byte count, a JSON header (case text, overrides, step, counters, flux
//! history, pending clones, array lengths), then raw little-endian arrays: the molecule arrays
//! (z, r as f64; v_z, v_r, v_θ, E_rot as f32, as they are stored; species as u8), (σ c_r)_max,
//! and the field sampler's
//! counts and moments. Random streams are keyed by the step number, so no generator state is
//! needed and a resumed run is bit-identical to an uninterrupted one. Invariant: the file is
//! written to a temporary name and renamed, so a checkpoint on disk is always complete.

use crate::error::{Error, Result};
use crate::particles::Molecules;
use crate::sample::FieldSampler;
use crate::simulation::{SavedState, Simulation};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// File name inside a run directory.
pub const FILE: &str = "checkpoint.bin";
const MAGIC: &[u8] = b"KINFLUX-CHECKPOINT-2\n";
/// Format 1 stored velocities and rotational energies as f64.
const MAGIC_1: &[u8] = b"KINFLUX-CHECKPOINT-1\n";

/// What a checkpoint stores besides the arrays.
#[derive(Debug, Serialize, Deserialize)]
struct Header {
    kinflux_version: String,
    /// The case file's text and the overrides the run was started with.
    case_text: String,
    case_file: String,
    overrides: Vec<String>,
    state: SavedState,
    molecules: usize,
    sigma_cr_max: usize,
    sampler_cells: usize,
    sampler_species: usize,
    sampler_steps: u64,
}

/// A loaded checkpoint: the case it belongs to and the state to resume.
pub struct Loaded {
    pub case_text: String,
    pub case_file: String,
    pub overrides: Vec<String>,
    pub state: SavedState,
}

fn put_f64(out: &mut Vec<u8>, v: &[f64]) {
    out.reserve(v.len() * 8);
    for x in v {
        out.extend_from_slice(&x.to_le_bytes());
    }
}

fn put_f32(out: &mut Vec<u8>, v: &[f32]) {
    out.reserve(v.len() * 4);
    for x in v {
        out.extend_from_slice(&x.to_le_bytes());
    }
}

/// Save `sim` to `dir/checkpoint.bin`.
pub fn save(
    dir: &Path,
    sim: &Simulation,
    case_text: &str,
    case_file: &str,
    overrides: &[String],
) -> Result<()> {
    let state = sim.saved_state();
    let header = Header {
        kinflux_version: env!("CARGO_PKG_VERSION").to_string(),
        case_text: case_text.to_string(),
        case_file: case_file.to_string(),
        overrides: overrides.to_vec(),
        molecules: state.molecules.len(),
        sigma_cr_max: state.sigma_cr_max.len(),
        sampler_cells: state.fields.cells,
        sampler_species: state.fields.species,
        sampler_steps: state.fields.steps,
        state,
    };
    let path = dir.join(FILE);
    let json =
        serde_json::to_vec(&header).map_err(|e| Error::io(&path, std::io::Error::other(e)))?;
    let m = &header.state.molecules;
    let mut out = Vec::with_capacity(json.len() + m.len() * Molecules::BYTES_PER_MOLECULE + 64);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&(json.len() as u64).to_le_bytes());
    out.extend_from_slice(&json);
    for a in [&m.z, &m.r] {
        put_f64(&mut out, a);
    }
    for a in [&m.vz, &m.vr, &m.vt, &m.erot] {
        put_f32(&mut out, a);
    }
    out.extend_from_slice(&m.species);
    put_f64(&mut out, &header.state.sigma_cr_max);
    put_f64(&mut out, &header.state.fields.counts);
    put_f64(&mut out, &header.state.fields.moments);
    crate::output::write_atomic(&path, &out)
}

/// `n` little-endian f64 values from `bytes` at `*at`, advancing it.
fn f64s(bytes: &[u8], at: &mut usize, n: usize) -> Option<Vec<f64>> {
    let raw = bytes.get(*at..*at + 8 * n)?;
    *at += 8 * n;
    Some(
        raw.chunks_exact(8)
            .map(|c| f64::from_le_bytes(c.try_into().expect("8 bytes")))
            .collect(),
    )
}

/// `n` little-endian f32 values from `bytes` at `*at`, advancing it.
fn f32s(bytes: &[u8], at: &mut usize, n: usize) -> Option<Vec<f32>> {
    let raw = bytes.get(*at..*at + 4 * n)?;
    *at += 4 * n;
    Some(
        raw.chunks_exact(4)
            .map(|c| f32::from_le_bytes(c.try_into().expect("4 bytes")))
            .collect(),
    )
}

/// Read `dir/checkpoint.bin`.
pub fn load(dir: &Path) -> Result<Loaded> {
    let path = dir.join(FILE);
    let bad = |why: &str| {
        Error::Input(format!(
            "--resume {}: {} {why}; expected a checkpoint written by kinflux run",
            dir.display(),
            path.display()
        ))
    };
    let bytes = std::fs::read(&path).map_err(|e| bad(&format!("cannot be read ({e})")))?;
    if bytes.starts_with(MAGIC_1) {
        return Err(bad(
            "was written by an older kinflux (format 1), which this one cannot resume",
        ));
    }
    if !bytes.starts_with(MAGIC) || bytes.len() < MAGIC.len() + 8 {
        return Err(bad("is not a kinflux checkpoint"));
    }
    let mut at = MAGIC.len();
    let hl = u64::from_le_bytes(bytes[at..at + 8].try_into().expect("8 bytes")) as usize;
    at += 8;
    let header: Header = bytes
        .get(at..at + hl)
        .and_then(|h| serde_json::from_slice(h).ok())
        .ok_or_else(|| bad("has a damaged header"))?;
    at += hl;
    let n = header.molecules;
    let mut take = |n: usize| f64s(&bytes, &mut at, n).ok_or_else(|| bad("is truncated"));
    let (z, r) = (take(n)?, take(n)?);
    let mut take = |n: usize| f32s(&bytes, &mut at, n).ok_or_else(|| bad("is truncated"));
    let (vz, vr, vt, erot) = (take(n)?, take(n)?, take(n)?, take(n)?);
    let species = bytes
        .get(at..at + n)
        .ok_or_else(|| bad("is truncated"))?
        .to_vec();
    at += n;
    let mut take = |n: usize| f64s(&bytes, &mut at, n).ok_or_else(|| bad("is truncated"));
    let sigma_cr_max = take(header.sigma_cr_max)?;
    let counts = take(header.sampler_cells * header.sampler_species)?;
    let moments = take(header.sampler_cells * crate::sample::MOMENTS)?;
    let mut state = header.state;
    state.molecules = Molecules {
        z,
        r,
        vz,
        vr,
        vt,
        erot,
        species,
    };
    state.sigma_cr_max = sigma_cr_max;
    state.fields = FieldSampler {
        cells: header.sampler_cells,
        species: header.sampler_species,
        steps: header.sampler_steps,
        counts,
        moments,
    };
    Ok(Loaded {
        case_text: header.case_text,
        case_file: header.case_file,
        overrides: header.overrides,
        state,
    })
}
