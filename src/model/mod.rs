//! The network: the file types ([`file`](mod@file)), strict reading ([`strict`]) and the validated
//! model ([`network`]).

pub mod apply;
pub mod chains;
pub mod diff;
pub mod file;
pub mod import;
pub mod index;
pub mod network;
mod shape;
pub mod strict;

pub use chains::{Chains, Function, FunctionIdx};
pub use index::{ArcIdx, DemandIdx, LinkIdx, SiteIdx};
pub use network::{
    Arc, BASE_MATRIX, Demand, Expansion, Link, MAX_AMOUNT, MAX_METRIC, MAX_TOTAL, Matrix, Network,
    RiskGroup, Site,
};

use std::io::Read;
use std::path::Path;

use crate::error::{Error, Result};

/// The largest input file read, in MiB, unless `REDOUBT_MAX_INPUT_MIB` says otherwise. A
/// network of 1,000 sites with a demand between every pair is about 100 MiB of JSON, so the
/// default leaves room while a device such as `/dev/zero` or a runaway pipe stops with a
/// message instead of filling memory.
pub const DEFAULT_MAX_INPUT_MIB: u64 = 256;

/// The environment variable that raises (or lowers) [`DEFAULT_MAX_INPUT_MIB`].
pub const MAX_INPUT_ENV: &str = "REDOUBT_MAX_INPUT_MIB";

/// The input size limit in bytes: `REDOUBT_MAX_INPUT_MIB` (a whole number of MiB, at
/// least 1) when set, else [`DEFAULT_MAX_INPUT_MIB`]. A value that is not such a number is
/// a usage error naming the variable.
pub fn input_limit() -> Result<u64> {
    let mib = match std::env::var(MAX_INPUT_ENV) {
        Err(_) => DEFAULT_MAX_INPUT_MIB,
        Ok(v) => match v.trim().parse::<u64>() {
            Ok(m) if (1..=u64::MAX >> 20).contains(&m) => m,
            _ => {
                return Err(Error::Usage(format!(
                    "{MAX_INPUT_ENV} must be a whole number of MiB, at least 1, got {v:?}"
                )));
            }
        },
    };
    Ok(mib << 20)
}

/// The refusal for an input larger than `limit` bytes.
pub fn too_large(path: &Path, limit: u64) -> Error {
    Error::Input(format!(
        "{}: larger than the input limit of {} MiB; set {MAX_INPUT_ENV} to a larger number of \
         MiB to read it",
        path.display(),
        limit >> 20
    ))
}

/// Reads the whole of an input file, at most [`input_limit`] bytes (through
/// [`Read::take`], so a device or a pipe that never ends is not read past the limit).
/// O(size) time and memory.
pub fn read_input(path: &Path) -> Result<Vec<u8>> {
    let limit = input_limit()?;
    let io = |source| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let file = std::fs::File::open(path).map_err(io)?;
    let mut bytes = Vec::new();
    file.take(limit + 1).read_to_end(&mut bytes).map_err(io)?;
    if bytes.len() as u64 > limit {
        return Err(too_large(path, limit));
    }
    Ok(bytes)
}

/// [`read_input`] as UTF-8 text; other bytes are an input error naming the file and the
/// offset.
pub fn read_input_text(path: &Path) -> Result<String> {
    String::from_utf8(read_input(path)?).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        Error::Input(format!(
            "{}: not UTF-8 text: invalid byte at byte offset {at}",
            path.display()
        ))
    })
}

/// A network parsed from a unit test's JSON text; panics with the parse error when the
/// text is not a valid network. O(size of the text).
#[cfg(test)]
pub(crate) fn test_net(json: &str) -> Network {
    Network::from_json(json).expect("a valid test network")
}

/// A three-site ring for unit tests (shared by the journal and re-check tests): sites a
/// (processing 3), b, c (processing 1); links a→b 2, b→c 5, c→a 1 (both ways); demands
/// a→c (volume 2, required 1.5) and b→a (volume 1).
#[cfg(test)]
pub(crate) fn test_ring() -> Network {
    Network::from_json(
        r#"{"sites":[{"id":"a","processing":3},{"id":"b"},{"id":"c","processing":1}],
        "links":[{"id":"ab","from":"a","to":"b","capacity":2},
                 {"id":"bc","from":"b","to":"c","capacity":5},
                 {"id":"ca","from":"c","to":"a","capacity":1}],
        "demands":[{"from":"a","to":"c","volume":2,"required":1.5},
                   {"from":"b","to":"a","volume":1}]}"#,
    )
    .expect("a valid network")
}
