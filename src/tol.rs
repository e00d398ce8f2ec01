//! Every numerical tolerance of the crate, in one place, with what it guards.
//!
//! A tolerance here is a margin that absorbs floating-point or solver noise: each constant
//! says what would go wrong without it. Thresholds of presentation (when a number switches
//! to engineering notation, `numbers::ENGINEERING_FROM`), input limits (`model::MAX_AMOUNT`)
//! and rounding guards of a few ulps (`4·f64::EPSILON` in `solve::verify`) are not
//! tolerances of this kind and stay beside their code.
//!
//! Relative tolerances are multiplied by the scale named in their comment (usually the
//! demand at stake, floored at 1 or at `f64::MIN_POSITIVE`); absolute ones are compared as
//! they are. The older paths (`solve::TOL`, `solve::GAP_TOL`, `solve::colgen::GAP_TOL`,
//! `solve::simplex::PIVOT_TOL`, …) are re-exports of these constants.
//!
//! **Two gaps.** [`PROOF_GAP_TOL`] (1e-7) decides whether a result is *proven*: the
//! verified upper and lower bounds, computed in the file's units by `certify` and `verify`,
//! must meet within it. [`COLGEN_GAP_TOL`] (1e-8) stops the walk engine's column
//! generation on its own (unverified) master bound. It is ten times tighter so that the
//! master's answer, once repaired and certified, still lands inside the proof gap: the
//! repair and the certificate each lose a little to rounding, and a master stopped at
//! 1e-7 would often fall back to the edge ladder for noise alone.

// ---------------------------------------------------------------------------------------
// Verification and the reported values (solve/).

/// Relative tolerance (of the amount at stake) within which a value is snapped to a bound
/// or an offered amount and a gain or a loss counts as none; without it a result of
/// 104.99999998 would print as a shortfall and equal plans would differ by noise.
pub const RELATIVE_TOL: f64 = 1e-7;

/// Largest relative row residual (`solve::verify::residual`) of an allocation that counts
/// as feasible; without it no interior-point answer (feasible to 1e-9 of its own scaled
/// rows) could pass verification.
pub const RESIDUAL_TOL: f64 = 1e-7;

/// Largest gap between the verified upper and lower bounds, relative to the demand at
/// stake (Σ of the LP's demand caps), for a result to count as proven optimal; without it
/// nothing would be proven, since the bounds are computed in floating point.
pub const PROOF_GAP_TOL: f64 = 1e-7;

/// A load at least this fraction of its capacity counts as saturated; without the 1e-6
/// margin a link carrying its capacity up to solver noise would not be listed as a
/// bottleneck.
pub const SATURATED: f64 = 1.0 - 1e-6;

/// Below this fraction of the amount at stake, differences are solver noise and a value is
/// shown as the plainest number within it (`solve::simplest_in`); without it large units
/// (bit/s) would print trailing noise digits and equal results print unequal.
pub const NOISE: f64 = 1e-9;

/// With no positive scale to snap against, a value of magnitude below this snaps to its
/// target; without it a zero-scale flow of 1e-17 would print instead of the exact target.
pub const SNAP_WITHOUT_SCALE: f64 = 1e-12;

/// Below this fraction of the magnitude of the model, a flow value is treated as zero by
/// the flow decomposition; without it the decomposition would chase walks of 1e-300 units
/// far below any backend's accuracy.
pub const ZERO_FLOW: f64 = 1e-15;

/// Extra relative room given to [`PROOF_GAP_TOL`] when a stored proof is checked again
/// (`solve::recheck`); without it a journal line proven when written could fail its check
/// by the rounding of the sums recomputed in another order.
pub const RECHECK_SLACK: f64 = 1e-6;

/// Relative tolerance (of the scenario's scale) within which a stored load must equal the
/// load of the stored walks on recheck; without it loads summed in another order would
/// reject honest journal lines.
pub const RECHECK_LOAD_TOL: f64 = 1e-9;

/// clarabel's feasibility and gap tolerance for the first solve of the ladder; looser
/// would leave more results to the slower rungs, tighter costs iterations on every LP.
pub const CLARABEL_TOL: f64 = 1e-9;

/// clarabel's tolerance for the second rung of the ladder, tried when the first answer
/// fails verification; it closes most gaps the first rung leaves open.
pub const CLARABEL_TIGHT_TOL: f64 = 1e-12;

// ---------------------------------------------------------------------------------------
// The walk engine (solve/colgen) and its simplex (solve/simplex).

/// A walk prices out when `1 − c_d − u_d` exceeds this (prices are per served unit);
/// without it pricing would add walks of reduced cost 1e-15 forever.
pub const WALK_PRICE_TOL: f64 = 1e-9;

/// Column generation (and every shortcut) stops when its master's dual bound exceeds the
/// primal value by at most this, relative to `max(1, Σ caps)` of the demands that can be
/// served; tighter than [`PROOF_GAP_TOL`] so the verified answer still passes the proof
/// (see the module comment).
pub const COLGEN_GAP_TOL: f64 = 1e-8;

/// Walk flows below this (relative to the same scale as [`COLGEN_GAP_TOL`]) count as
/// carrying nothing; without it walks of noise flow would be kept and reported.
pub const WALK_FLOW_EPS: f64 = 1e-9;

/// Reduced costs below this count as zero in the masters' simplex (objective units per
/// unit of the column); without it the simplex would pivot on noise and cycle.
pub const SIMPLEX_DUAL_TOL: f64 = 1e-11;

/// Pivot elements below this (in absolute value) are not used; without it a near-singular
/// pivot would blow up the explicit basis inverse.
pub const SIMPLEX_PIVOT_TOL: f64 = 1e-9;

/// Largest drift between the running primal and dual values and those recomputed from the
/// basis inverse before the inverse is rebuilt; without it errors of the inverse's
/// updates would accumulate into a wrong optimum.
pub const SIMPLEX_DRIFT_TOL: f64 = 1e-9;

// ---------------------------------------------------------------------------------------
// Fixed routes (routing/).

/// Relative tolerance above capacity before a resource counts as overloaded by the offered
/// load; without it a link loaded exactly to capacity would be flagged by noise.
pub const OVERLOAD_TOL: f64 = 1e-9;

/// Relative tolerance (to the surviving required demand) below which a change of offered
/// arc load counts as no change; without it every arc would be listed as "moved onto".
pub const MOVE_TOL: f64 = 1e-9;

/// A site row's dual price of the steered plan's master above this (in absolute value)
/// makes the outage a driver of that site's addition; without it outages with a price of
/// pure noise would be listed as drivers.
pub const DRIVER_PRICE_TOL: f64 = 1e-9;

// ---------------------------------------------------------------------------------------
// Added processing: closings and plans (expand/).

/// Relative tolerance (of a module) within which an amount just above a whole number of
/// modules counts as that number; without it 8.000000000001 in modules of 4 would buy 3
/// modules, not 2.
pub const MODULE_TOL: f64 = 1e-9;

/// A shadow price above this counts as binding (a site or link that limits the scenario);
/// without it resources with a price of solver noise would be named as limits.
pub const PRICE_BINDS: f64 = 1e-6;

/// Absolute tolerance (on served fractions) within which an outage counts as at the plan
/// master's worst fraction, and two worst fractions or totals (relative) count as equal;
/// without it plan generation would add outages that differ by noise only.
pub const MEET_TOL: f64 = 1e-6;

/// Relative tolerance under which two costs count as equal when plans are compared or a
/// branch is pruned; without it a plan equal in cost up to rounding would replace an
/// equally good one and make the choice depend on summation order.
pub const COST_TOL: f64 = 1e-9;

/// A shadow price of processing below this does not count as relief when a plan is topped
/// up; without it a site of noise price would be raised for nothing.
pub const PRICE_MIN: f64 = 1e-6;

/// Relative tolerance with which a later phase of the plan master holds an earlier phase's
/// optimum (of the fraction `t`; of Σ scenarios · required for served totals; of the cost
/// for the cost); without it the later phase would be infeasible by the earlier one's noise.
pub const HOLD_TOL: f64 = 1e-9;

/// Largest total violation of the walk plan master's goal rows (relative to their total
/// violation at the simplex's start point, floored at 1) its first phase may leave and
/// still call the goal rows met; without it rounding in the last digits of a target met
/// exactly would send the master to the interior-point backend.
pub const PLAN_FEASIBLE_TOL: f64 = 1e-9;

/// Largest violation (relative to `max(1, rhs)`) of an arc or site row of the walk plan
/// master that its simplex may leave out: such a row enters the simplex only when the
/// point violates it by more; without it a row met to its last digit would be added (and
/// solved again) for rounding alone.
pub const LAZY_ROW_TOL: f64 = 1e-9;

/// Largest row or bound violation (relative to `max(1, |rhs|)`) of the start point the
/// closing's warm simplex master accepts; the primal simplex needs a feasible start, so a
/// start outside it sends the closing to the interior point instead.
pub const WARM_START_TOL: f64 = 1e-9;

/// A variable within this (relative to `max(1, |bound|)`) of its upper bound counts as at
/// the bound when its bound dual is read; without it a bound met to rounding would lose
/// its dual, and the closing's dual bound would fall short of its cost.
pub const AT_BOUND_TOL: f64 = 1e-9;

/// How much looser a hold is made (a factor on [`HOLD_TOL`]) when the backend cannot meet
/// it at [`HOLD_TOL`]; without the retry such a plan would fail instead of being solved.
pub const HOLD_RETRY: f64 = 1e3;

/// Relative tolerance within which an LP module count is taken as whole (of a module or of
/// the count); without it an LP plan of 29.999999 in modules of 10 would buy 3 modules and
/// a fourth for the noise.
pub const ROUND_TOL: f64 = 1e-6;

/// Relative slack on the budget for a module plan; without it a plan whose cost is a sum
/// of whole modules equal to the budget could fail it on the last bit.
pub const BUDGET_TOL: f64 = 1e-9;

/// How far below the best reachable served value (relative to required) a cost-minimising
/// closing or plan aims when the best is short of required; without it an interior-point
/// `best` that overshoots the true optimum by its tolerance would make the model
/// infeasible.
pub const CLOSE_TARGET_TOL: f64 = 1e-8;

/// Grid (relative to the power of ten of the largest addition) that the noise of a plan's
/// additions is snapped to; without it an addition of 2.9999999995 would print as such.
pub const SNAP_GRID: f64 = 1e-5;

/// Relative distance within which an addition is snapped up onto [`SNAP_GRID`] (a
/// close-all master asks for [`CLOSE_TARGET_TOL`] below best, so its plan may be that far
/// under); without it such a plan would be reported a hair short of its target.
pub const SNAP_UP_TOL: f64 = 1e-6;

/// Room (relative to a scenario's surviving required demand plus its throughput bound)
/// added on each side of an approximate interval when `--exact-top` decides which
/// scenarios could reach the N worst or a gate's limit; without it an exact engine's value,
/// which may sit up to [`PROOF_GAP_TOL`] outside the true optimum, could fall just outside
/// the interval and a scenario that ties the N-th worst would not be solved exactly.
pub const SCREEN_TOL: f64 = 1e-6;

/// Relative raise of every bought function amount (service chains) per top-up round when
/// the purchase re-solved misses its best reachable value; without it a purchase that the
/// interior point left a hair short would be reported unverified instead of being raised.
pub const CHAIN_RAISE: f64 = 1e-6;

/// Relative distance within which a bought function amount (service chains) is tried at
/// the nearest decimal with five digits below the largest amount's leading digit (2.9999958
/// → 3); the plainer purchase is kept only when its re-solve reaches what is asked of it.
/// Without it the interior point's noise (about 1e-6 relative on purchase LPs) would be
/// printed and written into `--apply`.
pub const CHAIN_PLAIN_TOL: f64 = 1e-5;
