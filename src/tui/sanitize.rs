//! Making text from logs safe to put on a terminal.
//!
//! Everything a solver printed (event messages, series names, run names, follower notes) goes
//! through [`sanitize`] before it reaches a widget. ratatui silently drops graphemes that hold
//! control characters, which makes tabs vanish and leaves the visible tail of an escape
//! sequence on screen; a raw ESC or C1 control that slipped through could also be interpreted
//! by the terminal. So: tabs are expanded, escape sequences are removed whole, other C0
//! controls and DEL become caret notation (`^G`), C1 controls become `?`. In ASCII mode the
//! typographic characters judge texts use are spelled in ASCII ([`ascii_spelling`]: `…` as
//! `...`, the range and minus dashes as `-`, `±` as `+-`, `≤` as `<=`), and every other
//! non-ASCII character becomes `?`.

use std::borrow::Cow;

/// Tab stops every this many columns (the terminal convention).
pub const TAB_WIDTH: usize = 8;

/// Return `text` made safe for display; borrowed when nothing had to change.
///
/// `ascii` additionally maps every non-ASCII character to `?`, for terminals without a
/// UTF-8 locale. Tab stops are counted from the start of `text` with every character
/// taken as one column wide (log lines are overwhelmingly ASCII).
pub fn sanitize(text: &str, ascii: bool) -> Cow<'_, str> {
    let clean = text.chars().all(|c| !c.is_control() && (!ascii || c.is_ascii()));
    if clean {
        return Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 8);
    let mut col = 0usize;
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '\t' => {
                let n = TAB_WIDTH - col % TAB_WIDTH;
                out.extend(std::iter::repeat_n(' ', n));
                col += n;
            }
            '\u{1b}' => skip_escape(&mut chars),
            '\u{9b}' => skip_csi_body(&mut chars),
            c if (c as u32) < 0x20 => {
                out.push('^');
                out.push(char::from(b'@' + c as u8));
                col += 2;
            }
            '\u{7f}' => {
                out.push_str("^?");
                col += 2;
            }
            c if c.is_control() => {
                // C1 controls (U+0080..U+009F): some terminals act on them.
                out.push('?');
                col += 1;
            }
            c if ascii && !c.is_ascii() => {
                let spelled = ascii_spelling(c).unwrap_or("?");
                out.push_str(spelled);
                col += spelled.len();
            }
            c => {
                out.push(c);
                col += 1;
            }
        }
    }
    Cow::Owned(out)
}

/// Owned form of [`sanitize`], for storing in view snapshots.
pub fn sanitized(text: &str, ascii: bool) -> String {
    sanitize(text, ascii).into_owned()
}

/// The ASCII spelling of a typographic character, when it has an obvious one.
pub fn ascii_spelling(c: char) -> Option<&'static str> {
    Some(match c {
        '…' => "...",
        '–' | '—' | '−' | '‐' | '‑' | '‒' => "-",
        '×' => "x",
        '±' => "+-",
        '≥' => ">=",
        '≤' => "<=",
        '≈' => "~",
        '·' | '•' => ".",
        '→' => "->",
        '←' => "<-",
        '‘' | '’' | '′' => "'",
        '“' | '”' | '″' => "\"",
        '°' => " deg",
        'µ' | 'μ' => "u",
        '\u{a0}' | '\u{202f}' | '\u{2009}' => " ",
        _ => return None,
    })
}

/// Skip what follows an ESC: a CSI (`ESC [` … final byte), an OSC/DCS/APC/PM/SOS string
/// (up to BEL or `ESC \`), or a single following character.
fn skip_escape(chars: &mut std::iter::Peekable<std::str::Chars<'_>>) {
    match chars.peek().copied() {
        Some('[') => {
            chars.next();
            skip_csi_body(chars);
        }
        Some(']' | 'P' | '_' | '^' | 'X') => {
            chars.next();
            while let Some(c) = chars.next() {
                if c == '\u{7}' {
                    break;
                }
                if c == '\u{1b}' {
                    if chars.peek() == Some(&'\\') {
                        chars.next();
                    }
                    break;
                }
            }
        }
        Some(c) if !c.is_control() => {
            chars.next();
        }
        _ => {}
    }
}

/// Skip CSI parameter and intermediate bytes and the final byte (0x40..=0x7E).
fn skip_csi_body(chars: &mut std::iter::Peekable<std::str::Chars<'_>>) {
    while let Some(&c) = chars.peek() {
        if ('\u{20}'..='\u{3f}').contains(&c) {
            chars.next();
        } else {
            if ('\u{40}'..='\u{7e}').contains(&c) {
                chars.next();
            }
            break;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clean_text_is_borrowed() {
        assert!(matches!(sanitize("res_p 1.2e-3 ✓", false), Cow::Borrowed(_)));
    }

    #[test]
    fn tabs_expand_to_the_next_stop() {
        assert_eq!(sanitize("a\tb", false), "a       b");
        assert_eq!(sanitize("12345678\tx", false), "12345678        x");
        assert_eq!(sanitize("\t", false), " ".repeat(8));
    }

    #[test]
    fn controls_become_caret_notation_and_escapes_vanish() {
        assert_eq!(sanitize("a\u{7}b\u{0}c\u{7f}", false), "a^Gb^@c^?");
        assert_eq!(sanitize("\u{1b}[1;31mERROR\u{1b}[0m done", false), "ERROR done");
        assert_eq!(sanitize("x\u{1b}]0;title\u{7}y", false), "xy");
        assert_eq!(sanitize("x\u{1b}]8;;http://a\u{1b}\\y", false), "xy");
        assert_eq!(sanitize("bare\rcr", false), "bare^Mcr");
        assert_eq!(sanitize("c1\u{9b}2Jz\u{85}", false), "c1z?");
        assert_eq!(sanitize("trailing\u{1b}", false), "trailing");
    }

    #[test]
    fn ascii_mode_replaces_non_ascii() {
        assert_eq!(sanitize("Δp ≥ 3 é", true), "?p >= 3 ?");
        // The range dash of a confidence interval and other typography stay readable.
        assert_eq!(sanitize("95 % CI -0.53…-0.42", true), "95 % CI -0.53...-0.42");
        assert_eq!(sanitize("a–b ±0.2 × 3 ≤ 1\u{202f}000", true), "a-b +-0.2 x 3 <= 1 000");
        assert_eq!(sanitize("plain", true), "plain");
    }

    #[test]
    fn every_byte_value_is_safe() {
        // Checklist item 18: bytes 0x00-0xFF, ESC sequences, tabs, bare CR.
        let bytes: Vec<u8> = (0u8..=255).collect();
        let text = String::from_utf8_lossy(&bytes);
        for ascii in [false, true] {
            let out = sanitize(&text, ascii);
            assert!(out.chars().all(|c| !c.is_control()), "{out:?}");
            assert!(!out.contains('\u{1b}'));
            if ascii {
                assert!(out.is_ascii());
            }
        }
    }
}
