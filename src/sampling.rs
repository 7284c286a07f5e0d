//! The settings of one parameter point's evaluation — [`Sampling`], the Z2 [`Method`], when
//! the gap is proven ([`ProveGap`]) — the constants behind them and the check of their values.
//! Every layer that samples a point reads them (`topology`, `point`, the binding), so they sit
//! at the top of the crate beside `error` and use nothing but it.

use crate::error::{invalid, CoreResult};

/// Relative gap floor (× bandwidth) used when the caller gives none.
pub const AUTO_FLOOR_REL: f64 = 1e-5;

#[derive(Clone, Debug, PartialEq)]
pub struct Sampling {
    pub loop_points: usize,
    pub lines: usize,
    pub max_lines: usize,
    pub step_limit: f64,
    /// absolute gap floor; ≤ 0 selects `AUTO_FLOOR_REL` × bandwidth
    pub gap_floor: f64,
    /// points per axis of the uniform bulk grid used only for the gap (3D); 0 = none
    pub gap_points: usize,
    /// starting points of the gap minimiser (smallest sampled gaps first); 0 = no search
    pub gap_starts: usize,
    /// which Z2 method(s) to run
    pub method: Method,
    /// recompute tight planes with doubled loop points (convergence certificate)
    pub certify: bool,
    /// when to prove a lower bound of the direct gap over the whole zone (`gap_proof`)
    pub prove_gap: ProveGap,
}

/// When a point's direct gap is proven over the whole zone (where the source gives a variation
/// bound). A point whose gap cannot be proven is undefined.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ProveGap {
    Never,
    /// when the estimated gap is under [`AUTO_PROOF_SHARE`] of the bound's scale (the most H
    /// can change over the zone): where sampling alone could miss a closing. With a small
    /// budget: a proof that would cost more leaves the gap unproven, the point defined
    Auto,
    Always,
}

/// `ProveGap::Auto` proves gaps under this share of the variation bound's scale.
pub const AUTO_PROOF_SHARE: f64 = 0.05;

/// Under `ProveGap::Auto`, a point whose smallest gap found is below this many floors must
/// have its gap proven, or it is undefined (`GAP_NOT_PROVEN`): 100 floors = 10⁻³ of the
/// bandwidth with the default floor. (At 10 floors, points 10⁻⁴ of a coupling from the edge
/// of a range of Weyl points kept an estimate 2·10⁻⁴ of the bandwidth, twenty floors, while
/// the true gap was 10⁻⁷: they were reported with indices.)
pub const NEAR_FLOOR: f64 = 100.0;

impl ProveGap {
    pub fn parse(name: &str) -> CoreResult<Self> {
        match name {
            "never" => Ok(Self::Never),
            "auto" => Ok(Self::Auto),
            "always" => Ok(Self::Always),
            other => Err(invalid!(
                "prove_gap must be 'never', 'auto' or 'always', got {other:?}"
            )),
        }
    }
}

/// The Z2 method(s) of a run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// hybrid Wannier centre flow of Wilson loops (Soluyanov–Vanderbilt)
    Wilson,
    /// lattice Z2 (Fukui–Hatsugai)
    Lattice,
    /// both, compared point by point
    Both,
}

impl Method {
    pub fn parse(name: &str) -> CoreResult<Self> {
        match name {
            "wilson" => Ok(Self::Wilson),
            "lattice" => Ok(Self::Lattice),
            "both" => Ok(Self::Both),
            other => Err(invalid!(
                "method must be 'wilson', 'lattice' or 'both', got {other:?}"
            )),
        }
    }
}

impl Sampling {
    pub fn validate(&self) -> CoreResult<()> {
        if self.loop_points < 4 {
            return Err(invalid!(
                "loop_points must be at least 4, got {}",
                self.loop_points
            ));
        }
        if self.lines < 2 {
            return Err(invalid!("lines must be at least 2, got {}", self.lines));
        }
        if self.max_lines < self.lines {
            return Err(invalid!(
                "max_lines ({}) must be at least lines ({})",
                self.max_lines,
                self.lines
            ));
        }
        if !(self.step_limit > 0.0 && self.step_limit < 0.5) {
            return Err(invalid!(
                "step_limit must lie in (0, 0.5), got {}",
                self.step_limit
            ));
        }
        if !self.gap_floor.is_finite() {
            return Err(invalid!("gap_floor must be finite"));
        }
        Ok(())
    }
}
