//! Screen geometry of the live panels: where each panel of a page goes for a terminal size.
//!
//! Both the state (which must know how many overview rows a page holds, or how many chart
//! columns to bucket for) and the renderer use these pure functions, so state flows one way
//! into rendering and neither imports the other for arithmetic.

use ratatui::layout::Rect;

/// Smallest frame that gets real panels.
pub const MIN_WIDTH: u16 = 20;
pub const MIN_HEIGHT: u16 = 5;
/// Screen row of the first overview table row (below the title and the column header).
pub const OVERVIEW_TABLE_TOP: u16 = 2;
/// Columns left of the residual chart's plot area for the decade labels.
pub const Y_GUTTER: u16 = 6;
/// Width from which charts and lists sit side by side.
pub const SIDE_BY_SIDE: u16 = 70;
/// Rows the body of the run page keeps however long the *why* is: enough for a small
/// residual chart and the criteria summary.
pub const MIN_BODY: u16 = 7;
/// Cells before the why text (` why: `); continuation lines are indented as much.
pub const WHY_INDENT: u16 = 6;
/// Inner width of a monitor panel from which the window strip is drawn beside the history.
pub const STRIP_MIN_INNER: u16 = 40;

/// Table rows visible on the overview at terminal height `height`.
pub fn overview_rows(height: u16) -> usize {
    height.saturating_sub(OVERVIEW_TABLE_TOP + 1) as usize
}

/// `r` limited to `area`.
pub fn clamp(r: Rect, area: Rect) -> Rect {
    let i = r.intersection(area);
    if i.width == 0 || i.height == 0 { Rect::new(area.x, area.y, 0, 0) } else { i }
}

/// What the run page must make room for, besides the fixed header and key bar.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct RunShape {
    /// Lines the wrapped *why* needs at this width.
    pub why_lines: u16,
    /// Bulk-read progress lines.
    pub progress: u16,
    /// The run has series to chart besides residuals.
    pub has_monitor: bool,
    /// Criteria rows.
    pub criteria: usize,
}

/// Rectangles of the run page.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RunLayout {
    pub header: Rect,
    pub why: Rect,
    pub progress: Rect,
    pub residual: Rect,
    pub monitor: Rect,
    pub criteria: Rect,
    pub items: Rect,
    pub keys: Rect,
}

/// Width available to the why text on a page `width` cells wide.
pub fn why_width(width: u16) -> usize {
    width.saturating_sub(WHY_INDENT + 1).max(1) as usize
}

/// The most lines the why may take on a page `height` rows tall: everything but the header,
/// the key bar and [`MIN_BODY`]. The charts shrink first; only below this does the why get a
/// short form (with the full text one key away).
pub fn why_budget(height: u16) -> u16 {
    height.saturating_sub(2 + MIN_BODY).max(1)
}

/// Lay out the run page in `area`. The why gets every line it needs up to [`why_budget`];
/// the body (charts, criteria, findings) takes what is left.
pub fn run_layout(area: Rect, shape: RunShape) -> RunLayout {
    let row = |y: u16, h: u16| clamp(Rect::new(area.x, y, area.width, h), area);
    let header = row(area.y, 1);
    let why_h = shape.why_lines.clamp(1, why_budget(area.height));
    let why = row(area.y + 1, why_h);
    let after_why = area.y + 1 + why_h;
    let bottom = area.bottom().saturating_sub(1);
    let keys = row(bottom, 1);
    let room = bottom.saturating_sub(after_why);
    let progress_h = shape.progress.min(room.saturating_sub(MIN_BODY.min(room)));
    let prog = row(after_why, progress_h);
    let top = after_why + progress_h;
    let body_h = bottom.saturating_sub(top);
    let crit_wanted = shape.criteria as u16 + 2;
    let r = |x: u16, y: u16, w: u16, h: u16| clamp(Rect::new(x, y, w, h), area);
    let empty = Rect::new(area.x, area.y, 0, 0);
    let (residual, monitor, crit, items);
    if area.width >= SIDE_BY_SIDE {
        let right_w = (area.width * 2 / 5).clamp(28, 64);
        let left_w = area.width - right_w;
        let res_h =
            if shape.has_monitor && body_h >= 10 { body_h - body_h * 2 / 5 } else { body_h };
        residual = r(area.x, top, left_w, res_h);
        monitor =
            if res_h < body_h { r(area.x, top + res_h, left_w, body_h - res_h) } else { empty };
        let mut crit_h = crit_wanted.min((body_h / 2).max(5)).max(3).min(body_h);
        if body_h - crit_h < 3 {
            crit_h = body_h;
        }
        crit = r(area.x + left_w, top, right_w, crit_h);
        items = if crit_h < body_h {
            r(area.x + left_w, top + crit_h, right_w, body_h - crit_h)
        } else {
            empty
        };
    } else {
        let res_h = body_h / 2;
        let crit_h = crit_wanted.min((body_h - res_h) / 2).max(3).min(body_h - res_h);
        residual = r(area.x, top, area.width, res_h);
        monitor = empty;
        crit = r(area.x, top + res_h, area.width, crit_h);
        let used = res_h + crit_h;
        items =
            if used < body_h { r(area.x, top + used, area.width, body_h - used) } else { empty };
    }
    RunLayout { header, why, progress: prog, residual, monitor, criteria: crit, items, keys }
}

/// Columns of the residual chart's plot area at terminal size `size` (for bucketing). The
/// width does not depend on the why or the criteria, only on the terminal width.
pub fn chart_columns(size: (u16, u16)) -> usize {
    let area = Rect::new(0, 0, size.0, size.1);
    let shape = RunShape { has_monitor: true, ..Default::default() };
    run_layout(area, shape).residual.width.saturating_sub(2 + Y_GUTTER) as usize
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clamp_stays_inside() {
        let a = Rect::new(0, 0, 10, 5);
        assert_eq!(clamp(Rect::new(8, 3, 10, 10), a), Rect::new(8, 3, 2, 2));
        assert_eq!(clamp(Rect::new(20, 20, 3, 3), a).area(), 0);
    }

    #[test]
    fn the_why_gets_its_lines_and_the_body_keeps_a_minimum() {
        let area = Rect::new(0, 0, 80, 24);
        let shape =
            |why_lines| RunShape { why_lines, has_monitor: true, criteria: 12, progress: 0 };
        let l = run_layout(area, shape(3));
        assert_eq!(l.why.height, 3);
        assert_eq!(l.residual.y, 4);
        // 24 rows: header, key bar and 7 body rows leave 15 for the why.
        let l = run_layout(area, shape(40));
        assert_eq!(l.why.height, 15);
        assert_eq!(l.residual.height + l.monitor.height, 7);
        assert_eq!(l.keys.y, 23);
        for r in [l.header, l.why, l.residual, l.monitor, l.criteria, l.items, l.keys] {
            assert!(area.contains(r.as_position()) || r.area() == 0);
            assert!(r.bottom() <= area.bottom() && r.right() <= area.right());
        }
    }
}
