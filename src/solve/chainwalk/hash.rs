//! A hasher for the engine's lookup tables keyed by walks and layered edges (whose keys
//! are small integers): one multiply and rotate per word instead of SipHash's rounds.
//! The tables are only looked up, never iterated, so the hasher changes no result; keys
//! come from the engine itself, not from an adversary.

use std::collections::{HashMap, HashSet};
use std::hash::{BuildHasherDefault, Hasher};

/// Multiply-rotate hashing of integer words (the constant is 2^64 / φ, rounded to odd).
#[derive(Debug, Default, Clone, Copy)]
pub(super) struct WordHasher(u64);

const K: u64 = 0x9e37_79b9_7f4a_7c15;

impl WordHasher {
    /// Mixes one word into the state. O(1).
    fn word(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(5) ^ x).wrapping_mul(K);
    }
}

impl Hasher for WordHasher {
    fn finish(&self) -> u64 {
        self.0
    }

    fn write(&mut self, bytes: &[u8]) {
        for chunk in bytes.chunks(8) {
            let mut b = [0u8; 8];
            b[..chunk.len()].copy_from_slice(chunk);
            self.word(u64::from_le_bytes(b));
        }
    }

    fn write_u8(&mut self, x: u8) {
        self.word(u64::from(x));
    }

    fn write_u32(&mut self, x: u32) {
        self.word(u64::from(x));
    }

    fn write_u64(&mut self, x: u64) {
        self.word(x);
    }

    fn write_usize(&mut self, x: usize) {
        self.word(x as u64);
    }

    fn write_isize(&mut self, x: isize) {
        self.word(x as u64);
    }
}

/// The builder of [`WordHasher`]s.
pub(super) type Words = BuildHasherDefault<WordHasher>;
/// A map keyed by walks or layered edges.
pub(super) type WordMap<K, V> = HashMap<K, V, Words>;
/// A set of walks.
pub(super) type WordSet<K> = HashSet<K, Words>;
