//! Grid convergence: Richardson extrapolation and the Grid Convergence Index over three meshes.
//!
//! Follows the five-step procedure of Celik, Ghia, Roache, Freitas, Coleman & Raad (2008),
//! "Procedure for Estimation and Reporting of Uncertainty Due to Discretization in CFD
//! Applications", J. Fluids Eng. 130(7) 078001: representative cell size, refinement ratios,
//! apparent order by fixed-point iteration, extrapolated values, approximate and extrapolated
//! relative errors, and the fine-grid GCI with a safety factor of 1.25. Roache's coarse-grid
//! GCI and the asymptotic-range ratio are reported as well.
//!
//! This module is pure arithmetic: it takes three (size, value) pairs and returns every number
//! with the warnings a reader needs. The report renders the table; nothing here reads files.

use serde::{Deserialize, Serialize};
use thiserror::Error;

/// Safety factor for a three-grid study with an observed order (Roache; Celik et al. 2008).
pub const SAFETY_FACTOR: f64 = 1.25;
/// Refinement ratios below this are too small for the error to dominate round-off and
/// iterative noise (Celik et al. 2008 recommend r > 1.3).
pub const MIN_REFINEMENT_RATIO: f64 = 1.3;
/// A grid's iterative error must stay below this fraction of the discretisation uncertainty.
///
/// Derived from the guidance of Eça & Hoekstra and of Roy (2005) that the iterative error be
/// about two orders of magnitude below the discretisation error (recalled, not read: see
/// docs/methods.md, "Iterative versus discretisation error").
pub const ITERATIVE_TO_DISCRETISATION: f64 = 0.01;
/// Most fixed-point iterations for the apparent order.
const MAX_ORDER_ITERATIONS: usize = 200;
/// Relative change of the order at which the fixed-point iteration stops.
const ORDER_TOLERANCE: f64 = 1e-12;

/// How the size of one grid is given.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum GridSize {
    /// Total number of cells; the representative size is `(1/N)^(1/dim)`, which assumes the
    /// three grids cover the same domain.
    Cells(u64),
    /// A representative cell size (spacing) given directly.
    Spacing(f64),
}

/// One grid of a mesh study: its size and the monitor's converged value on it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GridPoint {
    pub name: String,
    pub size: GridSize,
    pub value: f64,
    /// Iterative-error estimate of the monitor on this grid's run (absolute), when known.
    #[serde(default)]
    pub iterative_error: Option<f64>,
}

/// Three grids and the monitor compared across them, in any order.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MeshStudy {
    pub monitor: String,
    pub grids: [GridPoint; 3],
    /// Spatial dimension (2 or 3), used to turn cell counts into a cell size.
    pub dim: u8,
}

/// One grid as used in the analysis: fine (index 0) to coarse (index 2).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GridUsed {
    pub name: String,
    pub size: GridSize,
    /// Representative cell size h.
    pub h: f64,
    pub value: f64,
    pub iterative_error: Option<f64>,
}

/// Numbers for one pair of neighbouring grids.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PairResult {
    /// Refinement ratio h_coarse / h_fine of the pair.
    pub ratio: f64,
    /// Richardson-extrapolated value from the pair with the apparent order.
    pub extrapolated: f64,
    /// Approximate relative error |(φ_fine − φ_coarse)/φ_fine|.
    pub e_a: f64,
    /// Extrapolated relative error |(φ_ext − φ_fine)/φ_ext|.
    pub e_ext: f64,
    /// GCI of the pair's finer grid: Fs·e_a/(r^p − 1) (relative).
    pub gci_fine: f64,
    /// Roache's GCI of the pair's coarser grid: Fs·e_a·r^p/(r^p − 1) (relative).
    pub gci_coarse: f64,
}

/// Why a grid-convergence result needs care.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum GciWarning {
    /// A refinement ratio below [`MIN_REFINEMENT_RATIO`].
    SmallRefinementRatio { pair: String, ratio: f64 },
    /// The differences ε32 and ε21 have opposite signs.
    Oscillatory,
    /// The change between grids grows under refinement: ln|ε32/ε21| + q(p) is negative, which
    /// the absolute value in the order formula would otherwise hide.
    DivergingChanges,
    /// The fixed-point iteration for the order did not settle; the last iterate is used.
    OrderNotConverged { iterations: usize },
    /// A run's iterative error is not small against the discretisation uncertainty.
    IterativeErrorLarge { grid: String, iterative_error: f64, limit: f64 },
}

impl std::fmt::Display for GciWarning {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            GciWarning::SmallRefinementRatio { pair, ratio } => write!(
                f,
                "refinement ratio {pair} = {ratio:.4} is below {MIN_REFINEMENT_RATIO}: the \
                 differences between these grids may be dominated by iterative and round-off \
                 error (Celik et al. 2008 recommend more than 1.3)"
            ),
            GciWarning::Oscillatory => f.write_str(
                "oscillatory convergence: the fine-medium and medium-coarse differences have \
                 opposite signs, so the apparent order and the extrapolation are less reliable",
            ),
            GciWarning::DivergingChanges => f.write_str(
                "the change between the two finer grids is larger than between the two coarser \
                 ones: the solution is not converging under refinement",
            ),
            GciWarning::OrderNotConverged { iterations } => write!(
                f,
                "the fixed-point iteration for the apparent order did not settle in \
                 {iterations} steps; the last value is used and the result is doubtful"
            ),
            GciWarning::IterativeErrorLarge { grid, iterative_error, limit } => write!(
                f,
                "grid {grid}: the iterative error {iterative_error:.3e} exceeds {limit:.3e}, 1 % \
                 of the discretisation uncertainty (iterative error should be about two orders \
                 below it: guidance of Eça & Hoekstra and of Roy, recalled); converge that run \
                 further before trusting this study"
            ),
        }
    }
}

/// Every number of a three-grid study.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GciResult {
    pub monitor: String,
    /// Fine, medium, coarse.
    pub grids: [GridUsed; 3],
    /// φ2 − φ1.
    pub eps21: f64,
    /// φ3 − φ2.
    pub eps32: f64,
    /// sign(ε32/ε21): −1 means oscillatory convergence.
    pub sign: i8,
    /// Apparent (observed) order of accuracy.
    pub order: f64,
    /// Fixed-point iterations used for the order (0 when explicit: equal ratios).
    pub order_iterations: usize,
    /// Fine pair (grids 1–2): its GCI is the fine-grid uncertainty of the study.
    pub fine: PairResult,
    /// Coarse pair (grids 2–3).
    pub coarse: PairResult,
    /// GCI32 / (r21^p · GCI21); close to 1 in the asymptotic range.
    pub asymptotic_ratio: f64,
    pub safety_factor: f64,
    pub warnings: Vec<GciWarning>,
}

impl GciResult {
    /// The fine-grid discretisation uncertainty in the monitor's units: GCI21 · |φ1|.
    pub fn fine_uncertainty(&self) -> f64 {
        self.fine.gci_fine * self.grids[0].value.abs()
    }

    /// True when the differences alternate in sign.
    pub fn oscillatory(&self) -> bool {
        self.sign < 0
    }
}

/// A mesh study that cannot be analysed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum GciError {
    #[error("mesh study of {monitor}: dimension {dim} given; cell counts need dimension 2 or 3")]
    BadDimension { monitor: String, dim: u8 },
    #[error(
        "mesh study of {monitor}: give all three grids as cell counts or all three as spacings, \
         not a mix"
    )]
    MixedSizes { monitor: String },
    #[error("mesh study of {monitor}: grid {grid} has size {size}; expected a positive number")]
    BadSize { monitor: String, grid: String, size: String },
    #[error("mesh study of {monitor}: grid {grid} has value {value}; expected a finite number")]
    BadValue { monitor: String, grid: String, value: f64 },
    #[error("mesh study of {monitor}: grids {a} and {b} have the same cell size")]
    EqualSizes { monitor: String, a: String, b: String },
    #[error(
        "mesh study of {monitor}: grids {a} and {b} give the same value, so no order of \
         accuracy can be estimated"
    )]
    EqualValues { monitor: String, a: String, b: String },
    #[error(
        "mesh study of {monitor}: the fine-grid value is zero, so relative errors are undefined"
    )]
    ZeroFineValue { monitor: String },
    #[error(
        "mesh study of {monitor}: the apparent order came out {order}; the three values do not \
         support a Richardson extrapolation"
    )]
    NoOrder { monitor: String, order: f64 },
}

/// Analyse a three-grid study (Celik et al. 2008, steps 1–5).
pub fn analyse(study: &MeshStudy) -> Result<GciResult, GciError> {
    let monitor = study.monitor.clone();
    let grids = used_grids(study)?;
    let [g1, g2, g3] = &grids;
    let r21 = g2.h / g1.h;
    let r32 = g3.h / g2.h;
    let eps21 = g2.value - g1.value;
    let eps32 = g3.value - g2.value;
    if eps21 == 0.0 {
        return Err(GciError::EqualValues { monitor, a: g1.name.clone(), b: g2.name.clone() });
    }
    if eps32 == 0.0 {
        return Err(GciError::EqualValues { monitor, a: g2.name.clone(), b: g3.name.clone() });
    }
    if g1.value == 0.0 {
        return Err(GciError::ZeroFineValue { monitor });
    }
    let sign: i8 = if eps32 / eps21 < 0.0 { -1 } else { 1 };
    let mut warnings = Vec::new();
    for (pair, ratio) in [("r21", r21), ("r32", r32)] {
        if ratio < MIN_REFINEMENT_RATIO {
            warnings.push(GciWarning::SmallRefinementRatio { pair: pair.into(), ratio });
        }
    }
    if sign < 0 {
        warnings.push(GciWarning::Oscillatory);
    }

    let found = apparent_order(r21, r32, eps21, eps32, sign);
    let order = found.order;
    if !(order.is_finite() && order > 0.0) {
        return Err(GciError::NoOrder { monitor, order });
    }
    if !found.settled {
        warnings.push(GciWarning::OrderNotConverged { iterations: found.iterations });
    }
    if found.negative {
        warnings.push(GciWarning::DivergingChanges);
    }

    let fine = pair(r21, order, g1.value, g2.value);
    let coarse = pair(r32, order, g2.value, g3.value);
    let asymptotic_ratio = coarse.gci_fine / (r21.powf(order) * fine.gci_fine);

    // The iterative error of a grid contaminates the differences it takes part in: grids 1 and
    // 2 form ε21, grid 3 only ε32. Compare each with the uncertainty of the pair it sits in.
    let limits = [
        fine.gci_fine * g1.value.abs(),
        fine.gci_fine * g1.value.abs(),
        coarse.gci_fine * g2.value.abs(),
    ];
    for (g, limit) in grids.iter().zip(limits) {
        if let Some(ie) = g.iterative_error {
            let limit = ITERATIVE_TO_DISCRETISATION * limit;
            if !ie.is_finite() || ie.abs() > limit {
                warnings.push(GciWarning::IterativeErrorLarge {
                    grid: g.name.clone(),
                    iterative_error: ie.abs(),
                    limit,
                });
            }
        }
    }

    Ok(GciResult {
        monitor,
        grids,
        eps21,
        eps32,
        sign,
        order,
        order_iterations: found.iterations,
        fine,
        coarse,
        asymptotic_ratio,
        safety_factor: SAFETY_FACTOR,
        warnings,
    })
}

/// Check the inputs, compute h and order the grids fine to coarse.
fn used_grids(study: &MeshStudy) -> Result<[GridUsed; 3], GciError> {
    let monitor = || study.monitor.clone();
    let cells = study.grids.iter().filter(|g| matches!(g.size, GridSize::Cells(_))).count();
    if cells != 0 && cells != 3 {
        return Err(GciError::MixedSizes { monitor: monitor() });
    }
    if cells == 3 && !(study.dim == 2 || study.dim == 3) {
        return Err(GciError::BadDimension { monitor: monitor(), dim: study.dim });
    }
    let mut out: Vec<GridUsed> = Vec::with_capacity(3);
    for g in &study.grids {
        let h = match g.size {
            GridSize::Cells(n) if n > 0 => (1.0 / n as f64).powf(1.0 / f64::from(study.dim)),
            GridSize::Cells(n) => {
                return Err(GciError::BadSize {
                    monitor: monitor(),
                    grid: g.name.clone(),
                    size: format!("{n} cells"),
                });
            }
            GridSize::Spacing(h) if h.is_finite() && h > 0.0 => h,
            GridSize::Spacing(h) => {
                return Err(GciError::BadSize {
                    monitor: monitor(),
                    grid: g.name.clone(),
                    size: format!("spacing {h}"),
                });
            }
        };
        if !g.value.is_finite() {
            return Err(GciError::BadValue {
                monitor: monitor(),
                grid: g.name.clone(),
                value: g.value,
            });
        }
        out.push(GridUsed {
            name: g.name.clone(),
            size: g.size,
            h,
            value: g.value,
            iterative_error: g.iterative_error,
        });
    }
    out.sort_by(|a, b| a.h.total_cmp(&b.h));
    for w in out.windows(2) {
        if w[0].h == w[1].h {
            return Err(GciError::EqualSizes {
                monitor: monitor(),
                a: w[0].name.clone(),
                b: w[1].name.clone(),
            });
        }
    }
    Ok(out.try_into().expect("three grids in, three grids out"))
}

/// The outcome of the fixed-point iteration for the apparent order.
struct OrderSearch {
    order: f64,
    iterations: usize,
    settled: bool,
    /// ln|ε32/ε21| + q(p) was negative: the absolute value in the formula hides a solution
    /// whose changes grow under refinement.
    negative: bool,
}

/// Apparent order p = |ln|ε32/ε21| + q(p)| / ln r21 with q(p) = ln((r21^p − s)/(r32^p − s)),
/// by fixed-point iteration from q = 0 (Celik et al. 2008, step 3).
fn apparent_order(r21: f64, r32: f64, eps21: f64, eps32: f64, s: i8) -> OrderSearch {
    let s = f64::from(s);
    let base = (eps32 / eps21).abs().ln();
    let ln_r21 = r21.ln();
    if (r21 - r32).abs() <= 1e-12 * r21 {
        // Equal ratios: q = 0 and the order is explicit.
        return OrderSearch {
            order: base.abs() / ln_r21,
            iterations: 0,
            settled: true,
            negative: base < 0.0,
        };
    }
    let q = |p: f64| ((r21.powf(p) - s) / (r32.powf(p) - s)).ln();
    let mut p = base.abs() / ln_r21;
    let mut signed = base;
    for k in 1..=MAX_ORDER_ITERATIONS {
        signed = base + q(p);
        let next = signed.abs() / ln_r21;
        if !next.is_finite() {
            return OrderSearch { order: next, iterations: k, settled: false, negative: false };
        }
        let done = (next - p).abs() <= ORDER_TOLERANCE * next.abs().max(1.0);
        p = next;
        if done {
            return OrderSearch { order: p, iterations: k, settled: true, negative: signed < 0.0 };
        }
    }
    OrderSearch {
        order: p,
        iterations: MAX_ORDER_ITERATIONS,
        settled: false,
        negative: signed < 0.0,
    }
}

/// Extrapolation, relative errors and GCIs of one pair (fine value `f`, coarse value `c`).
fn pair(ratio: f64, order: f64, f: f64, c: f64) -> PairResult {
    let rp = ratio.powf(order);
    let extrapolated = (rp * f - c) / (rp - 1.0);
    let e_a = ((f - c) / f).abs();
    let e_ext = ((extrapolated - f) / extrapolated).abs();
    PairResult {
        ratio,
        extrapolated,
        e_a,
        e_ext,
        gci_fine: SAFETY_FACTOR * e_a / (rp - 1.0),
        gci_coarse: SAFETY_FACTOR * e_a * rp / (rp - 1.0),
    }
}
