//! The service-chain fields of a scenario object (a network whose file lists `functions`):
//! the range of the delivered volume when it is not unique at the optimum, and each
//! function's load, capacity and price per site. Absent for a network without functions.

use serde::Serialize;

use super::file_num;
use crate::model::Network;
use crate::solve::Evaluation;

/// The range the delivered volume lies in over every optimal allocation
/// ([`Evaluation::delivered_range`]).
#[derive(Serialize)]
pub struct DeliveredRangeJson {
    pub least: f64,
    pub most: f64,
    pub note: &'static str,
}

/// One function at one site in a scenario.
#[derive(Serialize)]
pub struct FunctionJson {
    pub site: String,
    pub function: String,
    /// Traffic entering the function there (origin units times the gains before it).
    pub load: f64,
    pub capacity: f64,
    /// Served units per added unit of this capacity (shadow price); `null` when no demand
    /// could reach it.
    pub price: Option<f64>,
}

/// What the JSON says when the delivered volume is not unique.
pub const RANGE_NOTE: &str = "delivered is the value of the reported optimal allocation; \
other optimal allocations deliver between least and most at most (bounds from the chains' \
gains alone)";

/// `delivered_range` of a scenario object. O(demands · chain).
pub fn delivered_range_json(net: &Network, e: &Evaluation) -> Option<DeliveredRangeJson> {
    e.delivered_range(net)
        .map(|(least, most)| DeliveredRangeJson {
            least: file_num(least),
            most: file_num(most),
            note: RANGE_NOTE,
        })
}

/// `functions` of a scenario object, in (site, function) order. O(sites · functions).
pub fn functions_json(net: &Network, e: &Evaluation) -> Vec<FunctionJson> {
    let Some(ch) = net.chains.as_ref() else {
        return Vec::new();
    };
    e.functions
        .iter()
        .map(|u| FunctionJson {
            site: net.sites[u.site].id.clone(),
            function: ch.functions[u.function].id.clone(),
            load: file_num(u.load),
            capacity: file_num(ch.capacity[u.site][u.function]),
            price: u.price.map(file_num),
        })
        .collect()
}
