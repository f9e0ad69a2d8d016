//! Storage of simulated molecules as a structure of arrays.
//!
//! Each molecule has an axial position z, a radius r ≥ 0, three velocity components in its
//! local frame (v_z, v_r, v_θ), a rotational energy (J) and a species index. Arrays always have
//! equal length; molecules that leave are removed by the move and [`Molecules::close_gaps`]
//! (free-molecular mode) or marked [`DEAD`] and dropped by the sort (DSMC mode), both keeping
//! the order of the survivors (order matters for reproducibility). Arrays grow by an eighth, not by doubling ([`make_room`]): they are most
//! of a run's memory.
//!
//! Precision: positions are f64, because flights are snapped exactly onto walls (z = 0, z = t,
//! r = a) and an f32 position near a 0.1 mm hole is only good to about 1e-11 m, enough to put
//! a molecule inside a wall. Velocities and rotational energies are stored as f32 ([`Stored`])
//! and used in f64: a relative rounding of at most 2⁻²⁴ ≈ 6e-8 per stored value is unbiased and
//! some thousand times below the statistical scatter of any sampled moment, and it takes the
//! arrays from 49 to 33 bytes per molecule. Every computation (flights, collisions, sampling)
//! is done in f64; only the store rounds.

use crate::mover::Flight;

/// Species marker of a molecule scheduled for removal.
pub const DEAD: u8 = u8::MAX;

/// Simulated molecules (structure of arrays).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Molecules {
    pub z: Vec<f64>,
    pub r: Vec<f64>,
    pub vz: Vec<Stored>,
    pub vr: Vec<Stored>,
    pub vt: Vec<Stored>,
    /// Rotational energy, J.
    pub erot: Vec<Stored>,
    pub species: Vec<u8>,
}

/// Storage type of velocities and rotational energies (see the module doc).
pub type Stored = f32;

impl Molecules {
    /// Number of molecules.
    pub fn len(&self) -> usize {
        self.z.len()
    }

    /// True when empty.
    pub fn is_empty(&self) -> bool {
        self.z.is_empty()
    }

    /// Make room for `n` more molecules (see [`make_room`]).
    pub fn reserve(&mut self, n: usize) {
        make_room(&mut self.z, n);
        make_room(&mut self.r, n);
        make_room(&mut self.vz, n);
        make_room(&mut self.vr, n);
        make_room(&mut self.vt, n);
        make_room(&mut self.erot, n);
        make_room(&mut self.species, n);
    }

    /// Append a molecule.
    #[inline]
    pub fn push(&mut self, f: &Flight, erot: f64, species: u8) {
        self.z.push(f.z);
        self.r.push(f.r);
        self.vz.push(f.vz as Stored);
        self.vr.push(f.vr as Stored);
        self.vt.push(f.vt as Stored);
        self.erot.push(erot as Stored);
        self.species.push(species);
    }

    /// Flight state of molecule `i`.
    #[inline]
    pub fn flight(&self, i: usize) -> Flight {
        Flight {
            z: self.z[i],
            r: self.r[i],
            vz: f64::from(self.vz[i]),
            vr: f64::from(self.vr[i]),
            vt: f64::from(self.vt[i]),
        }
    }

    /// Close the gaps left by a move that compacted each chunk of `chunk` molecules in place:
    /// chunk k keeps its first `kept[k]` molecules. Keeps the order of the survivors. One block
    /// move per chunk and array (a memmove), so this serial stage costs little next to the
    /// parallel move.
    pub fn close_gaps(&mut self, chunk: usize, kept: &[usize]) {
        fn close<T: Copy>(v: &mut Vec<T>, chunk: usize, kept: &[usize]) {
            let mut w = 0;
            for (k, &n) in kept.iter().enumerate() {
                if w != k * chunk {
                    v.copy_within(k * chunk..k * chunk + n, w);
                }
                w += n;
            }
            v.truncate(w);
        }
        close(&mut self.z, chunk, kept);
        close(&mut self.r, chunk, kept);
        close(&mut self.vz, chunk, kept);
        close(&mut self.vr, chunk, kept);
        close(&mut self.vt, chunk, kept);
        close(&mut self.erot, chunk, kept);
        close(&mut self.species, chunk, kept);
    }

    /// Bytes held per molecule by the arrays (struct-of-arrays footprint).
    pub const BYTES_PER_MOLECULE: usize =
        2 * std::mem::size_of::<f64>() + 4 * std::mem::size_of::<Stored>() + 1;
}

/// Make room in `v` for `n` more elements, growing by an eighth of the length (or `n` if more)
/// instead of doubling: the molecule arrays are most of a run's memory and a steady run's
/// population drifts by a few per cent, so doubling would leave up to half of them unused.
pub fn make_room<T>(v: &mut Vec<T>, n: usize) {
    if v.len() + n > v.capacity() {
        v.reserve_exact(n.max(v.len() / 8));
    }
}

/// A float type in which molecule values can be stored; arithmetic is always done in f64.
/// The engine stores [`Stored`]; tests of the collision arithmetic can store f64, so that
/// conservation is checked to f64 round-off apart from the storage rounding.
pub trait Store: Copy + Send + Sync {
    /// The stored value in f64 (exact).
    fn get(self) -> f64;
    /// An f64 value rounded to the storage type.
    fn put(x: f64) -> Self;
}

impl Store for f64 {
    #[inline]
    fn get(self) -> f64 {
        self
    }
    #[inline]
    fn put(x: f64) -> Self {
        x
    }
}

impl Store for f32 {
    #[inline]
    fn get(self) -> f64 {
        f64::from(self)
    }
    #[inline]
    fn put(x: f64) -> Self {
        x as f32
    }
}
