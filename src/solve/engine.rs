//! How each outage of an audit is solved, and the stable name each engine has in files.

use std::fmt;
use std::str::FromStr;

use crate::error::Error;

/// How each outage is solved; both give the same optimum (certified by the same checks).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum Engine {
    /// The edge-based two-layer LP, solved cold per outage ([`crate::solve::evaluate`]).
    Edge,
    /// Column generation over processing walks, each outage started from its parent's
    /// optimum ([`crate::solve::colgen::evaluate_walks`]).
    #[default]
    Walks,
}

impl Engine {
    /// Every engine, in the order of their names.
    pub const ALL: [Engine; 2] = [Engine::Edge, Engine::Walks];

    /// The engine's name in part files and in the run fingerprint (`Edge`, `Walks`). These
    /// strings are a file format: a part written by an earlier version carries them, so
    /// they never change. O(1).
    pub fn as_str(self) -> &'static str {
        match self {
            Engine::Edge => "Edge",
            Engine::Walks => "Walks",
        }
    }
}

impl fmt::Display for Engine {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Engine {
    type Err = Error;

    /// The engine named exactly [`Engine::as_str`]; any other text is refused as input
    /// (a part file is data). O(1).
    fn from_str(s: &str) -> Result<Engine, Error> {
        Engine::ALL
            .into_iter()
            .find(|e| e.as_str() == s)
            .ok_or_else(|| {
                Error::Input(format!(
                    "unknown engine {:?} (expected one of: Edge, Walks)",
                    crate::model::strict::printable(s)
                ))
            })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The names are the ones written by `format!("{:?}")` of the former command-line
    /// enum (`Edge`, `Walks`), so older part files still read; each reads back to itself.
    #[test]
    fn names_are_stable_and_read_back() {
        assert_eq!(Engine::Edge.as_str(), "Edge");
        assert_eq!(Engine::Walks.as_str(), "Walks");
        for e in Engine::ALL {
            assert_eq!(e.as_str().parse::<Engine>().unwrap(), e);
            assert_eq!(format!("{e:?}"), e.as_str());
        }
        for bad in ["edge", "walks", "", "Walks ", "Colgen"] {
            assert!(
                matches!(bad.parse::<Engine>(), Err(Error::Input(_))),
                "{bad:?}"
            );
        }
    }
}
