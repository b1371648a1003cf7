//! Measuring, cutting and wrapping text in terminal cells.
//!
//! Pure helpers shared by the layout (which must know how many lines the *why* needs before
//! anything is drawn) and the pages. Widths are display cells, so `Δ` counts one and a wide
//! CJK character two.

use ratatui::text::Span;

/// Display width of `s` in terminal cells.
pub fn width(s: &str) -> usize {
    Span::raw(s).width()
}

fn char_width(c: char) -> usize {
    let mut b = [0u8; 4];
    Span::raw(&*c.encode_utf8(&mut b)).width()
}

/// `s` cut to at most `max` cells, ending in `~`/`…` when cut.
pub fn fit(s: &str, max: usize) -> String {
    if width(s) <= max {
        return s.to_string();
    }
    if max == 0 {
        return String::new();
    }
    let ell = if s.is_ascii() { "~" } else { "…" };
    let mut out = String::new();
    let mut w = 0;
    for c in s.chars() {
        let cw = char_width(c);
        if w + cw > max - 1 {
            break;
        }
        out.push(c);
        w += cw;
    }
    out.push_str(ell);
    out
}

/// `s` cut in the middle to at most `max` cells (`case3c_~_a04`), keeping its start and its
/// end, where names of runs in a sweep usually differ.
pub fn fit_middle(s: &str, max: usize) -> String {
    if width(s) <= max {
        return s.to_string();
    }
    if max < 5 {
        return fit(s, max);
    }
    let ell = if s.is_ascii() { "~" } else { "…" };
    // The end gets the extra cell: runs of a sweep differ there more often.
    let head_cells = (max - 1) / 2;
    let tail_cells = max - 1 - head_cells;
    let mut head = String::new();
    let mut w = 0;
    for c in s.chars() {
        let cw = char_width(c);
        if w + cw > head_cells {
            break;
        }
        head.push(c);
        w += cw;
    }
    let mut tail: Vec<char> = Vec::new();
    let mut w = 0;
    for c in s.chars().rev() {
        let cw = char_width(c);
        if w + cw > tail_cells {
            break;
        }
        tail.push(c);
        w += cw;
    }
    tail.reverse();
    format!("{head}{ell}{}", tail.into_iter().collect::<String>())
}

/// `s` fitted and padded with spaces to exactly `cells` cells (left-aligned).
pub fn pad(s: &str, cells: usize) -> String {
    let f = fit(s, cells);
    let w = width(&f);
    format!("{f}{}", " ".repeat(cells.saturating_sub(w)))
}

/// `s` fitted and padded on the left to exactly `cells` cells (right-aligned).
pub fn pad_left(s: &str, cells: usize) -> String {
    let f = fit(s, cells);
    let w = width(&f);
    format!("{}{f}", " ".repeat(cells.saturating_sub(w)))
}

/// `s` broken into lines of at most `cells` cells, at spaces where possible; a word longer
/// than a line is split. Every character of `s` except the spaces at the breaks is kept, so
/// joining the lines with spaces gives the text back.
pub fn wrap(s: &str, cells: usize) -> Vec<String> {
    let cells = cells.max(1);
    let mut lines = Vec::new();
    let mut line = String::new();
    let mut line_w = 0usize;
    for word in s.split(' ') {
        let ww = width(word);
        if line_w > 0 && line_w + 1 + ww <= cells {
            line.push(' ');
            line.push_str(word);
            line_w += 1 + ww;
            continue;
        }
        if line_w > 0 || !line.is_empty() {
            lines.push(std::mem::take(&mut line));
            line_w = 0;
        }
        if ww <= cells {
            line.push_str(word);
            line_w = ww;
            continue;
        }
        // A word wider than a line: split it over as many lines as it needs.
        for c in word.chars() {
            let cw = char_width(c);
            if line_w + cw > cells && line_w > 0 {
                lines.push(std::mem::take(&mut line));
                line_w = 0;
            }
            line.push(c);
            line_w += cw;
        }
    }
    if !line.is_empty() || lines.is_empty() {
        lines.push(line);
    }
    lines
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fit_and_pad_respect_cell_widths() {
        assert_eq!(fit("residual", 5), "resi~");
        assert_eq!(fit("Δp long", 4), "Δp …");
        assert_eq!(fit("ab", 2), "ab");
        assert_eq!(pad("ab", 4), "ab  ");
        assert_eq!(pad_left("ab", 4), "  ab");
        assert_eq!(pad("abcdef", 3), "ab~");
        assert_eq!(fit_middle("case3c_step_rebound_a04", 12), "case3~nd_a04");
        assert_eq!(width(&fit_middle("case3c_step_rebound_a04", 12)), 12);
        assert_eq!(fit_middle("short", 12), "short");
    }

    #[test]
    fn wrap_keeps_every_word() {
        let s = "p slope -0.02 dec/kit over 1 700 it, 1.1 dec above target";
        let lines = wrap(s, 20);
        assert!(lines.iter().all(|l| width(l) <= 20), "{lines:?}");
        assert_eq!(lines.join(" "), s);
        assert_eq!(wrap("", 10), vec![String::new()]);
        assert_eq!(wrap("abcdefghij", 4), vec!["abcd", "efgh", "ij"]);
        assert_eq!(wrap("a  b", 10), vec!["a  b"]);
    }
}
