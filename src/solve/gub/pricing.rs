//! Pricing of the GUB simplex: which nonbasic variable enters (partial Dantzig pricing,
//! Bland's rule after degenerate pivots).

use super::{DUAL_TOL, Gub, Pos, SEGMENT, Var};

impl Gub {
    /// The variable at index `k` of the pricing order: columns, coupling slacks, set
    /// slacks.
    fn var_at(&self, k: usize) -> Var {
        let (n, m) = (self.cols.len(), self.rhs.len());
        if k < n {
            Var::Col(k)
        } else if k < n + m {
            Var::Slack(k - n)
        } else {
            Var::SetSlack(k - n - m)
        }
    }

    /// The reduced cost of `v` when it is nonbasic and may move that way by more than
    /// [`DUAL_TOL`] of reduced cost, else `None`.
    fn eligible(&mut self, v: Var) -> Option<f64> {
        let basic = match v {
            Var::Col(j) => self.col_pos[j] != Pos::Nonbasic,
            Var::Slack(i) => self.slack_pos[i] != Pos::Nonbasic,
            Var::SetSlack(d) => self.set_slack_pos[d] != Pos::Nonbasic,
        };
        if basic {
            return None;
        }
        let (l, u) = self.bounds(v);
        let x = self.get(v);
        if x >= u && x <= l {
            return None;
        }
        let d = self.reduced(v);
        ((d > DUAL_TOL && x < u) || (d < -DUAL_TOL && x > l)).then_some(d)
    }

    /// The entering variable and its reduced cost. With `bland`, the lowest eligible
    /// index (Bland's rule, full scan). Otherwise partial Dantzig pricing: from where the
    /// last search stopped, segments of [`SEGMENT`] variables (or a sixteenth of them, if
    /// more) are scanned in turn and the first segment holding an eligible variable gives
    /// its largest |d| (the first scanned on ties); `None` only after a whole cycle finds none,
    /// so optimality is still decided over every variable. O(entries scanned).
    pub(super) fn entering(&mut self, bland: bool) -> Option<(Var, f64)> {
        let total = self.cols.len() + self.rhs.len() + self.set_rhs.len();
        if bland {
            return (0..total).find_map(|k| {
                let v = self.var_at(k);
                self.eligible(v).map(|d| (v, d))
            });
        }
        let segment = SEGMENT.max(total / 16);
        let mut best: Option<(Var, f64)> = None;
        let mut scanned = 0;
        let mut k = if self.cursor < total { self.cursor } else { 0 };
        while scanned < total {
            let v = self.var_at(k);
            if let Some(d) = self.eligible(v)
                && best.is_none_or(|(_, bd)| d.abs() > bd.abs())
            {
                best = Some((v, d));
            }
            scanned += 1;
            k = if k + 1 == total { 0 } else { k + 1 };
            if best.is_some() && scanned % segment == 0 {
                break;
            }
        }
        self.cursor = k;
        best
    }
}

/// A fixed order of variables for Bland's rule: columns, coupling slacks, set slacks.
pub(super) fn index(v: Var) -> (u8, usize) {
    match v {
        Var::Col(j) => (0, j),
        Var::Slack(i) => (1, i),
        Var::SetSlack(d) => (2, d),
    }
}
