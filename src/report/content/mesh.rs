//! The grid-convergence section of a report: the three grids, the GCI results and the summary
//! sentence.
//!
//! Grid values and extrapolated values are shown to the decimal place that keeps three
//! significant digits of the smaller difference between grids, so the differences the method
//! works from can be read off the table; the fine-grid value is quoted with its GCI
//! uncertainty to the precision that uncertainty supports ([`crate::view::number`]).

use crate::report::gci::{GciResult, GridSize};
use crate::report::text::{iteration, num, plus_minus};
use crate::view::number;

use super::{Table, n, t};

/// Decimal place of three significant digits of the smaller grid difference.
fn value_place(r: &GciResult) -> Option<i32> {
    let d = r.eps21.abs().min(r.eps32.abs());
    (d.is_finite() && d > 0.0).then(|| d.log10().floor() as i32 - 2)
}

/// A grid or extrapolated value to [`value_place`].
fn grid_value(r: &GciResult, v: f64) -> String {
    match value_place(r) {
        Some(p) if v.is_finite() => number::at_place(v, p),
        _ => num(v),
    }
}

/// Grid inputs: grid | rank | size | h | value | iterative error.
pub fn gci_grids_table(r: &GciResult) -> Table {
    let mut tab = Table {
        class: None,
        head: vec!["grid", "rank", "given size", "cell size h", "value", "iterative error (est.)"],
        rows: Vec::new(),
    };
    for (k, g) in r.grids.iter().enumerate() {
        tab.rows.push(vec![
            t(&g.name),
            t(["1 (finest)", "2", "3 (coarsest)"][k]),
            n(match g.size {
                GridSize::Cells(c) => {
                    format!("{} cells", iteration(i64::try_from(c).unwrap_or(i64::MAX)))
                }
                GridSize::Spacing(h) => format!("spacing {}", num(h)),
            }),
            n(num(g.h)),
            n(grid_value(r, g.value)),
            n(g.iterative_error.map_or("—".into(), num)),
        ]);
    }
    tab
}

/// GCI results: quantity | fine pair (1–2) | coarse pair (2–3).
pub fn gci_results_table(r: &GciResult) -> Table {
    let pct = |v: f64| format!("{} %", num(100.0 * v));
    let rows: [(&str, String, String); 7] = [
        ("refinement ratio r", num(r.fine.ratio), num(r.coarse.ratio)),
        ("difference ε", num(r.eps21), num(r.eps32)),
        (
            "extrapolated value φ_ext",
            grid_value(r, r.fine.extrapolated),
            grid_value(r, r.coarse.extrapolated),
        ),
        ("approximate relative error e_a", pct(r.fine.e_a), pct(r.coarse.e_a)),
        ("extrapolated relative error e_ext", pct(r.fine.e_ext), pct(r.coarse.e_ext)),
        ("GCI of the finer grid (Fs = 1.25)", pct(r.fine.gci_fine), pct(r.coarse.gci_fine)),
        ("GCI of the coarser grid (Roache)", pct(r.fine.gci_coarse), pct(r.coarse.gci_coarse)),
    ];
    Table {
        class: None,
        head: vec!["quantity", "pair 2–1 (fine)", "pair 3–2 (coarse)"],
        rows: rows.into_iter().map(|(a, b, c)| vec![t(a), n(b), n(c)]).collect(),
    }
}

/// The summary sentence of a mesh study.
pub fn gci_summary(r: &GciResult) -> String {
    let iterations = match r.order_iterations {
        0 => "explicit, equal ratios".to_string(),
        k => format!("iterated, {}", crate::view::words::count(k, "fixed-point iteration")),
    };
    format!(
        "Apparent order p = {} ({iterations}); {} convergence. Fine-grid value {} (GCI {} %), \
         extrapolated value {}. Asymptotic-range ratio GCI32 / (r21^p · GCI21) = {} (near 1 in \
         the asymptotic range).",
        num(r.order),
        if r.oscillatory() { "oscillatory" } else { "monotonic" },
        plus_minus(r.grids[0].value, r.fine_uncertainty()),
        num(100.0 * r.fine.gci_fine),
        grid_value(r, r.fine.extrapolated),
        num(r.asymptotic_ratio),
    )
}

/// Note on what the GCI covers.
pub const GCI_NOTE: &str = "Method: Celik et al. (2008), J. Fluids Eng. 130(7) 078001, with \
    safety factor 1.25. The GCI estimates discretisation uncertainty only; it assumes the three \
    grids are in the asymptotic range and says nothing about modelling error. The fine-grid \
    value is quoted ± its GCI uncertainty.";
