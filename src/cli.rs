//! Command-line arguments (clap derive). Parsing only: [`crate::run`] acts on them.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand, ValueEnum};

/// Audit processed throughput under failures: route every demand, process it once at a
/// site on its walk, and find the worst failure scenarios and what closes their gaps.
#[derive(Debug, Parser)]
#[command(name = "redoubt", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// One least-cost processing expansion that closes every scenario's closable gap.
    #[command(after_help = PLAN_EXAMPLES)]
    Plan(PlanArgs),
    /// Validate a network file and print a summary.
    #[command(after_help = CHECK_EXAMPLES)]
    Check {
        /// The network file (JSON).
        network: PathBuf,
    },
    /// Fail the network every way up to --depth, solve each scenario exactly, rank the worst.
    #[command(after_help = AUDIT_EXAMPLES)]
    Audit(AuditArgs),
    /// Pre-change check: run the same scenarios on two versions of a network and say
    /// which got worse (exit 1 when any got worse by more than --tolerance, or is short
    /// and was not before).
    #[command(after_help = COMPARE_EXAMPLES)]
    Compare(CompareArgs),
    /// The N worst sets of at most K failed elements, found exactly without solving every
    /// set, with a proof that no other set is worse.
    #[command(after_help = WORST_EXAMPLES)]
    Worst(WorstArgs),
    /// Combine the part files of `audit --shard I/N` into the audit an unsharded run gives.
    Merge(MergeArgs),
    /// Write another format's topology as a network file (then check and audit it).
    #[command(subcommand, after_help = IMPORT_EXAMPLES)]
    Import(ImportFrom),
}

/// Examples of `redoubt import`.
pub const IMPORT_EXAMPLES: &str = "Examples:
  redoubt import networkx topo.json --json net.json --capacity 100 --processing-sites 3 --processing 50 --demand 2 --required-fraction 0.8
  redoubt import csv --sites sites.csv --links links.csv --demands demands.csv --json net.json";

#[derive(Debug, Subcommand)]
pub enum ImportFrom {
    /// networkx node-link JSON (`nodes`, `links` or `edges`), as open topology collections
    /// ship it; processing and demands come from the flags.
    Networkx(NetworkxArgs),
    /// Three CSV files with header rows named like the JSON fields.
    Csv(CsvArgs),
}

#[derive(Debug, Args)]
pub struct NetworkxArgs {
    /// The node-link JSON file.
    pub file: PathBuf,
    /// Write the network here.
    #[arg(long, value_name = "FILE")]
    pub json: PathBuf,
    /// Capacity of every link, each direction (default 100); with --capacity-attr, the
    /// capacity of the edges that lack the attribute (without it they are refused).
    #[arg(long, allow_negative_numbers = true)]
    pub capacity: Option<f64>,
    /// Read each link's capacity from this edge attribute (a JSON number on every edge;
    /// an edge without it needs --capacity).
    #[arg(long, value_name = "ATTR")]
    pub capacity_attr: Option<String>,
    /// Put processing at this many sites of highest degree (ties in file order).
    #[arg(long, default_value_t = 1)]
    pub processing_sites: usize,
    /// Processing capacity of each of those sites.
    #[arg(long, default_value_t = 100.0, allow_negative_numbers = true)]
    pub processing: f64,
    /// Volume of the demand between every ordered pair of sites (0: none).
    #[arg(long, default_value_t = 1.0, allow_negative_numbers = true)]
    pub demand: f64,
    /// Required part of each demand, as a fraction of its volume.
    #[arg(long, default_value_t = 1.0, allow_negative_numbers = true)]
    pub required_fraction: f64,
    /// The network's name (default: the graph's `name`, else the file name).
    #[arg(long)]
    pub name: Option<String>,
}

#[derive(Debug, Args)]
pub struct CsvArgs {
    /// Sites: id, processing, expand_cost, expand_max, expand_step, failure_probability, x, y, notes.
    #[arg(long, value_name = "FILE")]
    pub sites: PathBuf,
    /// Links: id, from, to, capacity, one_way, risk_groups (`;`-separated), metric, failure_probability, notes.
    #[arg(long, value_name = "FILE")]
    pub links: PathBuf,
    /// Demands: id, from, to, volume, required, chain (`;`-separated function ids, with --functions), notes.
    #[arg(long, value_name = "FILE")]
    pub demands: PathBuf,
    /// Service chains: one row per function and site: function, gain, site, capacity, expand_cost, expand_max, notes (a row without site only declares the function).
    #[arg(long, value_name = "FILE")]
    pub functions: Option<PathBuf>,
    /// Write the network here.
    #[arg(long, value_name = "FILE")]
    pub json: PathBuf,
    /// The network's name.
    #[arg(long, default_value = "imported network")]
    pub name: String,
}

/// How much an audit's tables and JSON show (shared by `audit` and `merge`).
#[derive(Debug, Args)]
pub struct ShownArgs {
    /// How many scenarios (and elements) the tables show.
    #[arg(long, default_value_t = 15)]
    pub top: usize,
    /// In --json, write the per-demand lists (stranded, short and cut-off demands) of every
    /// scenario; by default only the worst (--detail-top) carry them.
    #[arg(long, conflicts_with = "detail_top")]
    pub detail: bool,
    /// In --json, how many of the worst scenarios carry the per-demand lists (default:
    /// --top's value; 0: none but the baseline).
    #[arg(long, value_name = "N")]
    pub detail_top: Option<usize>,
}

#[derive(Debug, Args)]
pub struct MergeArgs {
    /// The part files (`audit --shard I/N --json PART`), one per shard, in any order.
    #[arg(required = true)]
    pub parts: Vec<PathBuf>,
    /// Write the merged audit to this JSON file (exactly what the unsharded run writes).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Write one CSV row per scenario to this file, as `audit --csv` does.
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
    /// Write the HTML report and its Markdown twin into this folder, as `audit --report`.
    #[arg(long, value_name = "DIR")]
    pub report: Option<PathBuf>,
    /// Explain the worst scenario, as `audit --why`.
    #[arg(long)]
    pub why: bool,
    #[command(flatten)]
    pub shown: ShownArgs,
}

// The help of every command ends with examples in one layout: a heading, then each
// command line indented two spaces with what it does on the next line, indented six.

const CHECK_EXAMPLES: &str = "Examples:
  redoubt check net.json
      validate the file and list sites, links, demands, processing and risk groups
  redoubt check net.json && redoubt audit net.json
      audit only a file that reads cleanly";

const AUDIT_EXAMPLES: &str = "Examples:
  redoubt audit net.json --depth 2
      every single and double failure; the worst first
  redoubt audit net.json --fail link:ab,site:c
      one scenario, explained demand by demand
  redoubt audit net.json --close --report out/ --max-shortfall 5
      closings, an HTML and Markdown report in out/, exit 1 above 5 units short";

const WORST_EXAMPLES: &str = "Examples:
  redoubt worst net.json --k 2
      the 10 worst sets of one or two failures, with the proof
  redoubt worst net.json --k 3 --kinds links --top 5 --by lost
      the 5 worst sets of up to three link cuts, stranded demand counted as lost
  redoubt worst net.json --k 2 --json worst.json
      also write the sets and the proof to a file";

const PLAN_EXAMPLES: &str = "Examples:
  redoubt plan net.json
      the least-cost processing purchase that closes every closable gap
  redoubt plan net.json --budget 40 --objective total
      spend at most 40 for the least total shortfall
  redoubt plan net.json --apply bought.json
      also write the network with the purchase added, for a re-audit";

const COMPARE_EXAMPLES: &str = "Examples:
  redoubt compare before.json after.json
      single failures on both versions; exit 1 when any got worse
  redoubt compare before.json after.json --depth 2 --tolerance 0.5
      double failures; worse means more than 0.5 units
  redoubt compare before.json after.json --down link:ab
      both sides with link ab in maintenance";

/// How a run of many scenarios goes: threads, notes, the time-limit override (shared by
/// the scenario commands and `compare`).
#[derive(Debug, Args, Clone)]
pub struct RunArgs {
    /// Worker threads (default: one per core). Results do not depend on it.
    #[arg(long)]
    pub threads: Option<usize>,
    /// No progress bar and no notes on stderr.
    #[arg(long, short)]
    pub quiet: bool,
    /// Run even when the estimated time exceeds the limit (--max-minutes, default 60).
    #[arg(long)]
    pub yes: bool,
}

/// Which scenarios to evaluate and how.
#[derive(Debug, Args, Clone)]
pub struct ScenarioArgs {
    /// The network file (JSON).
    pub network: PathBuf,
    /// Largest number of elements failed together.
    #[arg(long, default_value_t = 1)]
    pub depth: usize,
    /// Kinds of element to fail: any of links, sites, groups (comma-separated).
    #[arg(long, default_value = "links,sites,groups")]
    pub kinds: String,
    #[command(flatten)]
    pub run: RunArgs,
    /// Refuse to start when the estimated time exceeds this many minutes (default 60).
    #[arg(long, value_name = "M", allow_negative_numbers = true)]
    pub max_minutes: Option<f64>,
    /// Keep these elements down in every scenario (a maintenance window), e.g.
    /// `link:X,site:Y`: the baseline is that state and scenarios name only further failures.
    #[arg(long, value_name = "ELEMENTS")]
    pub down: Option<String>,
    /// Evaluate only these traffic matrices of the file (comma-separated ids; `base` is
    /// the top-level `demands`). Default: every matrix.
    #[arg(long, value_name = "IDS")]
    pub matrix: Option<String>,

    /// Routing model: best (any walk: the best re-route), nearest (shortest paths with
    /// equal-cost split, nearest processing site) or steered (shortest paths, any split
    /// among processing sites).
    #[arg(long, value_enum, default_value_t = Routing::Best)]
    pub routing: Routing,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Routing {
    /// Any walk after a failure (a traffic-engineering re-optimisation).
    Best,
    /// Shortest paths, per-hop equal split, processing at the nearest candidate sites.
    Nearest,
    /// Shortest paths, per-hop equal split, any proportion among candidate sites.
    Steered,
}

#[derive(Debug, Args)]
pub struct AuditArgs {
    #[command(flatten)]
    pub scenarios: ScenarioArgs,
    /// Evaluate one named scenario instead, e.g. `link:X,site:Y,group:Z`.
    #[arg(long, value_name = "ELEMENTS", conflicts_with_all = ["depth", "kinds"])]
    pub fail: Option<String>,
    #[command(flatten)]
    pub shown: ShownArgs,
    /// Write every scenario to this JSON file (results are journaled beside it as they
    /// finish, in FILE.journal).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Write one CSV row per scenario to this file (after a header row; the caution is the
    /// last column).
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
    /// Write a self-contained HTML report (report.html) and its Markdown twin (report.md)
    /// into this folder (created when missing).
    #[arg(long, value_name = "DIR")]
    pub report: Option<PathBuf>,
    /// Continue an interrupted run from the journal beside --json FILE.
    #[arg(long, requires = "json")]
    pub resume: bool,
    /// Gate: exit 1 when any scenario's shortfall exceeds this many units.
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub max_shortfall: Option<f64>,
    /// Gate: exit 1 when any scenario strands more than this many units.
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub max_stranded: Option<f64>,
    /// Gate: exit 1 when any scenario serves less than this fraction of its surviving
    /// required demand: a fraction 0..1 (`0.95`) or a percentage (`95%`).
    #[arg(long, value_name = "F", allow_hyphen_values = true)]
    pub min_served_fraction: Option<String>,
    /// Gates compare raw values with this tolerance (in the gate's own unit) instead of
    /// the values as printed.
    #[arg(long, value_name = "T", allow_negative_numbers = true)]
    pub gate_tolerance: Option<f64>,
    /// How much required demand can grow, every demand alike, before some scenario is
    /// short: the headroom factor of each scenario and the least over the audit.
    #[arg(long)]
    pub headroom: bool,
    /// Gate: exit 1 when the audit's headroom is below this factor of required demand
    /// (1.2: every scenario must carry 120% of required); implies --headroom.
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub min_headroom: Option<f64>,
    /// For each scenario with a shortfall, the cheapest processing expansion that closes it.
    #[arg(long)]
    pub close: bool,
    /// Evaluate only shard I of N (a deterministic slice of the outages) and write a part
    /// file to --json FILE; `redoubt merge` combines the parts.
    #[arg(long, value_name = "I/N", requires = "json",
          conflicts_with_all = ["close", "max_shortfall", "max_stranded", "min_served_fraction", "gate_tolerance"])]
    pub shard: Option<String>,
    /// Explain the worst scenario: per-demand served and short amounts, saturated link
    /// directions, cut-off demands, what processing can and cannot fix, which links would
    /// have to grow. On by default with --fail.
    #[arg(long)]
    pub why: bool,
    /// Solver engine: `walks` (column generation over processing walks with exact repair
    /// shortcuts) or `edge` (the two-layer LP per outage, the cross-check); same optimum.
    /// `approx`: a proven interval within ε of required per outage (see --epsilon).
    #[arg(long, value_enum, default_value_t = Engine::Walks)]
    pub engine: Engine,
    /// With --engine approx: the width allowed for each outage's proven interval, as a
    /// fraction of its surviving required demand, in (0, 0.5] (default 0.01).
    #[arg(long, value_name = "E")]
    pub epsilon: Option<f64>,
    /// With --engine approx: rank every scenario by its proven interval, then solve
    /// exactly (walk engine) every scenario that could be among the N worst or decide a
    /// gate; the rest stay proven intervals.
    #[arg(long, value_name = "N")]
    pub exact_top: Option<usize>,
}

/// How each outage is solved; both give the same optimum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, ValueEnum)]
pub enum Engine {
    /// The edge-based two-layer LP, solved cold per outage.
    Edge,
    /// Column generation over processing walks, each outage started from the baseline's.
    #[default]
    Walks,
    /// Garg–Könemann approximation: a proven interval per outage, within ε of required.
    Approx,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Objective {
    /// Maximise the worst scenario's served fraction of required demand.
    Worst,
    /// Minimise the total shortfall over the scenarios.
    Total,
}

#[derive(Debug, Args)]
pub struct PlanArgs {
    #[command(flatten)]
    pub scenarios: ScenarioArgs,
    /// Write the plan and per-scenario results to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Spend at most this much instead of closing every gap.
    #[arg(long, value_name = "B", allow_negative_numbers = true)]
    pub budget: Option<f64>,
    /// What a budgeted plan optimises.
    #[arg(long, value_enum, default_value_t = Objective::Worst, requires = "budget")]
    pub objective: Objective,
    /// How many scenarios the tables show.
    #[arg(long, default_value_t = 15)]
    pub top: usize,
    /// Write the network with the purchase added (processing increased) to this file;
    /// every other field of the input, your own included, is kept.
    #[arg(long, value_name = "OUT.json")]
    pub apply: Option<PathBuf>,
    /// The formulation of the plan's master problem (hidden: for the bench and for
    /// comparing the two; `walks` is the default).
    #[arg(long, value_enum, default_value_t = PlanMaster::Walks, hide = true)]
    pub master: PlanMaster,
}

/// The formulation of `plan`'s master problem.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PlanMaster {
    /// One edge flow-model copy per scenario.
    Edge,
    /// Column generation over processing walks.
    Walks,
}

#[derive(Debug, Args)]
pub struct CompareArgs {
    /// The network before the change (JSON).
    pub before: PathBuf,
    /// The network after the change (JSON).
    pub after: PathBuf,
    /// Largest number of elements failed together.
    #[arg(long, default_value_t = 1)]
    pub depth: usize,
    /// Kinds of element to fail: any of links, sites, groups (comma-separated).
    #[arg(long, default_value = "links,sites,groups")]
    pub kinds: String,
    /// Compare one named scenario instead, e.g. `link:X,site:Y`.
    #[arg(long, value_name = "ELEMENTS", conflicts_with_all = ["depth", "kinds"])]
    pub fail: Option<String>,
    /// Keep these elements down on both sides in every scenario, e.g. `link:X`.
    #[arg(long, value_name = "ELEMENTS")]
    pub down: Option<String>,
    /// Compare only these traffic matrices (comma-separated ids, `base` for `demands`);
    /// each must be in both files. Default: every matrix.
    #[arg(long, value_name = "IDS")]
    pub matrix: Option<String>,
    /// A scenario got worse when its shortfall or stranded demand (as printed) rose by
    /// more than this many units.
    #[arg(
        long,
        value_name = "X",
        default_value_t = 0.0,
        allow_negative_numbers = true
    )]
    pub tolerance: f64,
    /// Let scenarios that are short after the change and were not before (a new point of
    /// failure) pass; they are still listed. Without it they fail the compare (exit 1).
    #[arg(long)]
    pub allow_new_short: bool,
    /// Also compare growth headroom per scenario (headroom lost or gained is reported).
    #[arg(long)]
    pub headroom: bool,
    /// Gate: exit 1 when AFTER's headroom is below this factor of required demand (1.2:
    /// 120%); implies --headroom.
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub min_headroom: Option<f64>,
    /// Write the comparison to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Write the comparison as a self-contained HTML page (report.html) and its Markdown
    /// twin (report.md) into this folder (made when missing), every scenario listed.
    #[arg(long, value_name = "DIR")]
    pub report: Option<PathBuf>,
    /// How many scenarios each table shows.
    #[arg(long, default_value_t = 15)]
    pub top: usize,
    #[command(flatten)]
    pub run: RunArgs,
    /// Refuse to start when the estimated time of either side exceeds this many minutes.
    #[arg(long, value_name = "M", allow_negative_numbers = true)]
    pub max_minutes: Option<f64>,
}

impl CompareArgs {
    /// The scenario options of one side (`network` is that side's file).
    pub fn side(&self, network: PathBuf) -> ScenarioArgs {
        ScenarioArgs {
            network,
            depth: self.depth,
            kinds: self.kinds.clone(),
            run: self.run.clone(),
            max_minutes: self.max_minutes,
            down: self.down.clone(),
            matrix: self.matrix.clone(),
            routing: Routing::Best,
        }
    }
}

/// What ranks the sets of `redoubt worst`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum WorstBy {
    /// Surviving required demand that is not served.
    Shortfall,
    /// Shortfall plus the required demand stranded by failed end sites.
    Lost,
}

#[derive(Debug, Args)]
pub struct WorstArgs {
    /// The network file (JSON).
    pub network: PathBuf,
    /// Largest number of elements failed together.
    #[arg(long)]
    pub k: usize,
    /// Kinds of element to fail: any of links, sites, groups (comma-separated).
    #[arg(long, default_value = "links,sites,groups")]
    pub kinds: String,
    /// How many sets to list (sets with the same outage count once).
    #[arg(long, default_value_t = 10)]
    pub top: usize,
    /// What ranks the sets: shortfall, or lost (shortfall + stranded).
    #[arg(long, value_enum, default_value_t = WorstBy::Shortfall)]
    pub by: WorstBy,
    /// Write the sets and the proof to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Worker threads (default: one per core). Results do not depend on it.
    #[arg(long)]
    pub threads: Option<usize>,
    /// Search only these traffic matrices (comma-separated ids, `base` for `demands`).
    /// Default: every matrix.
    #[arg(long, value_name = "IDS")]
    pub matrix: Option<String>,
}
