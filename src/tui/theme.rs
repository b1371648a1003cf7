//! Colours, text marks and glyph sets of the live panels.
//!
//! The default theme uses only the 16 named ANSI colours plus `Reset`, because truecolor is
//! missing in old GNU screen and Terminal.app and ssh does not forward `COLORTERM`. The hues
//! are grouped by what the user should do, chosen to stay apart for the common red-green
//! colour-vision deficiencies (the blue-yellow axis carries the main contrast):
//!
//! | tier | verdicts | colour |
//! | --- | --- | --- |
//! | act now | diverging | red, plus reverse video |
//! | stopped | stale | magenta |
//! | inspect | oscillating, suspect, stalled | yellow |
//! | wait | converging | cyan |
//! | done | converged | blue |
//!
//! Nothing depends on colour alone: the verdict is always written out in capitals and shown
//! in reverse video, criteria carry `✓`/`✗` (`[ok]`/`[--]` in ASCII), and series in charts
//! get distinct marker characters whenever colour is off. The monochrome theme (chosen by
//! `--color never` or a non-empty `NO_COLOR`) uses only BOLD, REVERSED, UNDERLINED and DIM.
//!
//! The ASCII glyph set (`--ascii`, or no UTF-8 locale) uses `+ - |` borders, `*`-style chart
//! markers and plain-text marks, so that output holds only ASCII bytes.

use std::ffi::OsStr;

use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::{self, Marker};

use crate::judge::Verdict;

/// When to use colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ColorChoice {
    /// Colour unless `NO_COLOR` is set to a non-empty value.
    #[default]
    Auto,
    /// Colour even when `NO_COLOR` is set.
    Always,
    /// Never colour (monochrome theme).
    Never,
}

/// Decide whether to colour, given the choice and the value of `NO_COLOR` (if set).
///
/// Per no-color.org, `NO_COLOR` counts only when present *and non-empty*; an explicit
/// choice on the command line overrides it.
pub fn color_enabled(choice: ColorChoice, no_color: Option<&OsStr>) -> bool {
    match choice {
        ColorChoice::Always => true,
        ColorChoice::Never => false,
        ColorChoice::Auto => no_color.is_none_or(|v| v.is_empty()),
    }
}

/// True when the locale promises UTF-8, so Unicode glyphs may be drawn.
///
/// POSIX precedence: the first of `LC_ALL`, `LC_CTYPE`, `LANG` that is set and non-empty
/// decides; none set means the "C" locale, hence ASCII.
pub fn utf8_locale(lc_all: Option<&OsStr>, lc_ctype: Option<&OsStr>, lang: Option<&OsStr>) -> bool {
    let decisive = [lc_all, lc_ctype, lang].into_iter().flatten().find(|v| !v.is_empty());
    decisive.is_some_and(|v| {
        let v = v.to_string_lossy().to_ascii_lowercase();
        v.contains("utf-8") || v.contains("utf8")
    })
}

/// Read the environment and decide colour and ASCII mode (see [`color_enabled`] and
/// [`utf8_locale`]); `ascii_flag` is `--ascii`.
pub fn from_env(choice: ColorChoice, ascii_flag: bool) -> (bool, bool) {
    let no_color = std::env::var_os("NO_COLOR");
    let color = color_enabled(choice, no_color.as_deref());
    let utf8 = utf8_locale(
        std::env::var_os("LC_ALL").as_deref(),
        std::env::var_os("LC_CTYPE").as_deref(),
        std::env::var_os("LANG").as_deref(),
    );
    (color, ascii_flag || !utf8)
}

/// The characters used for marks, separators and charts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Glyphs {
    pub ascii: bool,
    pub ok: &'static str,
    pub fail: &'static str,
    pub sep: &'static str,
    pub ellipsis: &'static str,
    pub ge: &'static str,
    pub le: &'static str,
    pub pm: &'static str,
    pub cause: &'static str,
    pub ack: &'static str,
    pub legend_line: &'static str,
    pub border: symbols::border::Set<'static>,
    /// Sparkline levels, lowest first.
    pub spark: [char; 8],
    /// Marker of chart lines when colour tells the series apart.
    pub marker: Marker,
}

/// Per-series marker characters when colour is off (all ASCII), so lines stay distinct.
pub const SERIES_MARKS: [char; 10] = ['*', '+', 'o', 'x', '#', '%', '@', '=', '~', '&'];

const ASCII_BORDER: symbols::border::Set<'static> = symbols::border::Set {
    top_left: "+",
    top_right: "+",
    bottom_left: "+",
    bottom_right: "+",
    vertical_left: "|",
    vertical_right: "|",
    horizontal_top: "-",
    horizontal_bottom: "-",
};

impl Glyphs {
    /// Unicode marks with Braille charts (or half blocks when `braille` is false).
    pub fn unicode(braille: bool) -> Self {
        Glyphs {
            ascii: false,
            ok: "✓",
            fail: "✗",
            sep: " · ",
            ellipsis: "…",
            ge: "≥",
            le: "≤",
            pm: "±",
            cause: "▶",
            ack: "✔ack",
            legend_line: "━",
            border: symbols::border::ROUNDED,
            spark: ['▁', '▂', '▃', '▄', '▅', '▆', '▇', '█'],
            marker: if braille { Marker::Braille } else { Marker::HalfBlock },
        }
    }

    /// Plain ASCII.
    pub fn ascii() -> Self {
        Glyphs {
            ascii: true,
            ok: "[ok]",
            fail: "[--]",
            sep: " | ",
            ellipsis: "~",
            ge: ">=",
            le: "<=",
            pm: "+-",
            cause: ">",
            ack: "(ack)",
            legend_line: "-",
            border: ASCII_BORDER,
            spark: ['_', '.', ',', '-', '~', '=', '*', '#'],
            marker: Marker::Custom('*'),
        }
    }
}

/// Styles and glyphs in effect.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Theme {
    pub color: bool,
    pub glyphs: Glyphs,
}

/// Colours of chart series, in order; red and green are left out so that a series never
/// reads as a verdict, and neighbours differ in lightness as well as hue.
const SERIES_COLORS: [Color; 8] = [
    Color::Cyan,
    Color::Yellow,
    Color::LightMagenta,
    Color::LightBlue,
    Color::White,
    Color::LightCyan,
    Color::Magenta,
    Color::LightYellow,
];

impl Theme {
    pub fn new(color: bool, ascii: bool, braille: bool) -> Self {
        Theme { color, glyphs: if ascii { Glyphs::ascii() } else { Glyphs::unicode(braille) } }
    }

    fn fg(&self, c: Color) -> Style {
        if self.color { Style::new().fg(c) } else { Style::new() }
    }

    /// The colour of a verdict's tier (see the module table).
    pub fn verdict_color(&self, v: Verdict) -> Option<Color> {
        if !self.color {
            return None;
        }
        Some(match v {
            Verdict::Diverging => Color::Red,
            Verdict::Stale => Color::Magenta,
            Verdict::Oscillating | Verdict::Suspect | Verdict::Stalled => Color::Yellow,
            Verdict::Converging => Color::Cyan,
            Verdict::Converged => Color::Blue,
        })
    }

    /// The verdict badge: bold reverse video (coloured when colour is on), so it stands out
    /// without colour.
    pub fn verdict_badge(&self, v: Verdict) -> Style {
        let s = Style::new().add_modifier(Modifier::BOLD | Modifier::REVERSED);
        match self.verdict_color(v) {
            Some(c) => s.fg(c),
            None => s,
        }
    }

    /// A verdict word inside running text (tables): coloured and bold when it needs action.
    pub fn verdict_text(&self, v: Verdict) -> Style {
        let s = match self.verdict_color(v) {
            Some(c) => Style::new().fg(c),
            None => Style::new(),
        };
        match v {
            Verdict::Diverging => s.add_modifier(Modifier::BOLD | Modifier::REVERSED),
            Verdict::Stale | Verdict::Oscillating | Verdict::Suspect | Verdict::Stalled => {
                s.add_modifier(Modifier::BOLD)
            }
            Verdict::Converging | Verdict::Converged => s,
        }
    }

    pub fn met(&self, met: bool) -> Style {
        if met { self.fg(Color::Blue) } else { self.fg(Color::Yellow).add_modifier(Modifier::BOLD) }
    }

    pub fn error(&self) -> Style {
        self.fg(Color::Red).add_modifier(Modifier::BOLD)
    }

    pub fn warning(&self) -> Style {
        self.fg(Color::Yellow)
    }

    pub fn dim(&self) -> Style {
        Style::new().add_modifier(Modifier::DIM)
    }

    pub fn title(&self) -> Style {
        Style::new().add_modifier(Modifier::BOLD)
    }

    pub fn border(&self) -> Style {
        self.fg(Color::DarkGray)
    }

    pub fn selected(&self) -> Style {
        Style::new().add_modifier(Modifier::REVERSED)
    }

    pub fn key(&self) -> Style {
        self.fg(Color::Cyan).add_modifier(Modifier::BOLD)
    }

    pub fn cause(&self) -> Style {
        Style::new().add_modifier(Modifier::BOLD)
    }

    pub fn focused(&self) -> Style {
        Style::new().add_modifier(Modifier::BOLD | Modifier::UNDERLINED)
    }

    /// Style of series `i` in charts and legends.
    pub fn series(&self, i: usize) -> Style {
        self.fg(SERIES_COLORS[i % SERIES_COLORS.len()])
    }

    /// The band and mean lines of the monitor chart.
    pub fn band(&self) -> Style {
        self.fg(Color::DarkGray)
    }

    /// Chart marker of series `i`: shared Braille/half blocks when colour tells the series
    /// apart, otherwise a distinct character per series.
    pub fn series_marker(&self, i: usize) -> Marker {
        if self.color && !self.glyphs.ascii {
            self.glyphs.marker
        } else {
            Marker::Custom(SERIES_MARKS[i % SERIES_MARKS.len()])
        }
    }

    /// The legend sample of series `i`: a coloured line, or its marker character.
    pub fn series_sample(&self, i: usize) -> String {
        match self.series_marker(i) {
            Marker::Custom(c) => c.to_string(),
            _ => self.glyphs.legend_line.to_string(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_color_counts_only_when_non_empty() {
        // no-color.org: "present and not an empty string".
        assert!(!color_enabled(ColorChoice::Auto, Some(OsStr::new("1"))));
        assert!(color_enabled(ColorChoice::Auto, Some(OsStr::new(""))));
        assert!(color_enabled(ColorChoice::Auto, None));
        assert!(color_enabled(ColorChoice::Always, Some(OsStr::new("1"))));
        assert!(!color_enabled(ColorChoice::Never, None));
    }

    #[test]
    fn locale_precedence() {
        let s = |v: &'static str| Some(OsStr::new(v));
        assert!(utf8_locale(None, None, s("en_GB.UTF-8")));
        assert!(utf8_locale(None, s("C.utf8"), s("C")));
        assert!(!utf8_locale(s("C"), None, s("en_GB.UTF-8")));
        assert!(utf8_locale(s(""), None, s("de_DE.UTF-8")));
        assert!(!utf8_locale(None, None, None));
        assert!(!utf8_locale(None, None, s("POSIX")));
    }

    #[test]
    fn monochrome_theme_has_no_colours() {
        let t = Theme::new(false, false, true);
        for v in Verdict::ALL {
            assert_eq!(t.verdict_badge(v).fg, None);
            assert!(t.verdict_badge(v).add_modifier.contains(Modifier::REVERSED));
        }
        assert_eq!(t.series(3).fg, None);
        assert_eq!(t.series_marker(1), Marker::Custom('+'));
        let c = Theme::new(true, false, true);
        assert_eq!(c.verdict_badge(Verdict::Diverging).fg, Some(Color::Red));
        assert_eq!(c.series_marker(1), Marker::Braille);
        assert_eq!(Theme::new(true, false, false).series_marker(0), Marker::HalfBlock);
    }

    #[test]
    fn ascii_glyphs_are_ascii() {
        let g = Glyphs::ascii();
        let all =
            [g.ok, g.fail, g.sep, g.ellipsis, g.ge, g.le, g.pm, g.cause, g.ack, g.legend_line];
        assert!(all.iter().all(|s| s.is_ascii()));
        assert!(g.spark.iter().all(char::is_ascii));
        assert!(g.border.top_left.is_ascii() && g.border.horizontal_top.is_ascii());
    }
}
