//! How each outage of an audit is solved, and the stable name each engine has in files.

use std::fmt;
use std::str::FromStr;

use crate::error::Error;

/// How each outage is solved. The exact engines ([`Engine::ALL`]) give the same optimum
/// (certified by the same checks); [`Engine::Approx`] gives a proven interval per outage.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum Engine {
    /// The edge-based two-layer LP, solved cold per outage ([`crate::solve::evaluate`]).
    Edge,
    /// Column generation over processing walks, each outage started from its parent's
    /// optimum ([`crate::solve::colgen::evaluate_walks`]).
    #[default]
    Walks,
    /// Garg–Könemann packing ([`crate::solve::approx::evaluate_approx`]): per outage an
    /// interval proven by the same verifier, aiming at a width of `epsilon` × the surviving
    /// required demand. `epsilon` is checked by [`crate::solve::approx::epsilon_ok`] where
    /// the command line is lowered.
    Approx { epsilon: f64 },
}

impl Engine {
    /// Every exact engine, in the order of their names: the ones a part file may name
    /// (`--engine approx` is refused with `--shard`).
    pub const ALL: [Engine; 2] = [Engine::Edge, Engine::Walks];

    /// The engine's name in part files and in the run fingerprint (`Edge`, `Walks`;
    /// `Approx` without its ε, see [`Engine`]'s `Display` for the fingerprint). These
    /// strings are a file format: a part written by an earlier version carries them, so
    /// they never change. O(1).
    pub fn as_str(self) -> &'static str {
        match self {
            Engine::Edge => "Edge",
            Engine::Walks => "Walks",
            Engine::Approx { .. } => "Approx",
        }
    }
}

/// The engine as the run fingerprint names it: [`Engine::as_str`] for the exact engines,
/// `Approx:{epsilon}` for the approximate one (ε decides its results, so a journal written
/// with another ε is not resumed). O(1).
impl fmt::Display for Engine {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Engine::Approx { epsilon } => write!(f, "Approx:{epsilon}"),
            other => f.write_str(other.as_str()),
        }
    }
}

impl FromStr for Engine {
    type Err = Error;

    /// The exact engine named exactly [`Engine::as_str`]; any other text (`Approx`
    /// included: no part file carries it) is refused as input (a part file is data). O(1).
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
            assert_eq!(e.to_string(), e.as_str());
        }
        let approx = Engine::Approx { epsilon: 0.05 };
        assert_eq!(approx.to_string(), "Approx:0.05");
        for bad in [
            "edge",
            "walks",
            "",
            "Walks ",
            "Colgen",
            "Approx",
            "Approx:0.05",
        ] {
            assert!(
                matches!(bad.parse::<Engine>(), Err(Error::Input(_))),
                "{bad:?}"
            );
        }
    }
}
