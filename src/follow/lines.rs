//! The carry buffer that turns a stream of byte chunks into complete lines.
//!
//! Writers flush mid-line (stdio and Fortran runtimes fully buffer when writing to a file,
//! and ext4 exposes a buffered write one page at a time), so a read can end anywhere. The
//! splitter keeps the unterminated tail across reads and splits only on `\n`, which keeps
//! multi-byte UTF-8 intact. It owns three policies:
//!
//! * **carriage returns**: `\r`s before `\n` are stripped; a bare `\r` (a progress bar
//!   redrawing its line) means only the text after the last one is kept;
//! * **NUL bytes** are skipped and counted, never stored (holes left by a writer that kept
//!   its offset across a truncation can be megabytes long);
//! * **long lines** keep their first `max` bytes; the rest up to `\n` is discarded, so
//!   memory stays bounded by `max` however long a line without a newline grows.
//!
//! It is a pure state machine over byte slices: no I/O, no clocks. Complete lines that lie
//! wholly inside one chunk are handed out as slices of that chunk without copying. The part
//! of a chunk after its last `\r` or NUL (all of it, in an ordinary log) is split on `\n`
//! alone, with no per-line look for `\r` or NUL.

use memchr::{memchr2, memrchr, memrchr2};

/// Index of the first `\n` in `hay`.
///
/// Log lines are short (tens of bytes), where the per-call setup of a vectorised search costs
/// more than the search: the first 64 bytes are looked at eight at a time in a `u64`
/// (a zero-byte test on `word ^ 0x0a0a…`), and only a longer line is handed to `memchr`.
#[inline]
pub fn find_newline(hay: &[u8]) -> Option<usize> {
    const LO: u64 = 0x0101_0101_0101_0101;
    const HI: u64 = 0x8080_8080_8080_8080;
    const NL: u64 = LO * b'\n' as u64;
    let head = hay.len().min(64);
    let mut i = 0;
    while i + 8 <= head {
        let Ok(bytes) = <[u8; 8]>::try_from(&hay[i..i + 8]) else { break };
        let w = u64::from_le_bytes(bytes) ^ NL;
        // The lowest flagged byte is the first zero byte (borrows only flag bytes above it).
        let zero = w.wrapping_sub(LO) & !w & HI;
        if zero != 0 {
            return Some(i + (zero.trailing_zeros() / 8) as usize);
        }
        i += 8;
    }
    if let Some(p) = hay[i..head].iter().position(|&b| b == b'\n') {
        return Some(i + p);
    }
    memchr::memchr(b'\n', &hay[head..]).map(|p| head + p)
}

/// The complete lines of `block` (each ending in `\n`), without their `\n`.
#[inline]
pub fn each_line(block: &[u8], mut f: impl FnMut(&[u8])) {
    let mut rest = block;
    while let Some(nl) = find_newline(rest) {
        f(&rest[..nl]);
        rest = &rest[nl + 1..];
    }
}

/// One line handed out by [`LineSplitter`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Line<'a> {
    /// The line's bytes, without `\n`, trailing `\r`s or text before a bare `\r`.
    pub bytes: &'a [u8],
    /// Whether the line was longer than the limit and was cut to it.
    pub truncated: bool,
}

/// Splits byte chunks into lines; see the module docs for the policies.
#[derive(Debug, Clone)]
pub struct LineSplitter {
    /// Bytes of the current unterminated line (never more than `max`).
    carry: Vec<u8>,
    /// Longest line kept.
    max: usize,
    /// The current line exceeded `max`; bytes are discarded until `\n` or a bare `\r`.
    overflowed: bool,
    /// The current line ended (so far) in one or more `\r`: whether they are a CRLF or a
    /// bare `\r` is known only when the next byte arrives.
    pending_cr: bool,
    /// NUL bytes skipped since creation.
    junk: u64,
    /// Truncated lines emitted since creation.
    long: u64,
}

impl LineSplitter {
    /// A splitter keeping at most `max_line_bytes` of each line (at least 1).
    pub fn new(max_line_bytes: usize) -> LineSplitter {
        LineSplitter {
            carry: Vec::new(),
            max: max_line_bytes.max(1),
            overflowed: false,
            pending_cr: false,
            junk: 0,
            long: 0,
        }
    }

    /// Feed the next bytes of the stream; `out` receives every line completed by them.
    pub fn feed(&mut self, data: &[u8], out: &mut dyn FnMut(Line<'_>)) {
        // From here on the chunk has no `\r` and no NUL.
        let clean_from = memrchr2(b'\r', 0, data).map_or(0, |i| i + 1);
        let mut rest = data;
        while !rest.is_empty() {
            let at = data.len() - rest.len();
            if at >= clean_from && self.carry.is_empty() && !self.overflowed && !self.pending_cr {
                self.feed_clean(rest, out);
                return;
            }
            match memchr2(b'\n', 0, rest) {
                Some(i) if rest[i] == b'\n' => {
                    self.segment(&rest[..i], true, out);
                    rest = &rest[i + 1..];
                }
                Some(i) => {
                    self.segment(&rest[..i], false, out);
                    let run = rest[i..].iter().position(|&b| b != 0).unwrap_or(rest.len() - i);
                    self.junk += run as u64;
                    rest = &rest[i + run..];
                }
                None => {
                    self.segment(rest, false, out);
                    rest = &[];
                }
            }
        }
    }

    /// [`feed`](Self::feed) for bytes without `\r` or NUL, with nothing carried over.
    fn feed_clean(&mut self, data: &[u8], out: &mut dyn FnMut(Line<'_>)) {
        let mut rest = data;
        while let Some(nl) = find_newline(rest) {
            let line = &rest[..nl];
            let truncated = line.len() > self.max;
            let bytes = if truncated { &line[..self.max] } else { line };
            self.long += u64::from(truncated);
            out(Line { bytes, truncated });
            rest = &rest[nl + 1..];
        }
        self.append(rest);
    }

    /// End of data: hand out the unterminated line, if there is one.
    pub fn finish(&mut self, out: &mut dyn FnMut(Line<'_>)) {
        if !self.carry.is_empty() || self.overflowed {
            self.emit_carry(out);
        }
        self.reset();
    }

    /// Drop the unterminated line (the content it belonged to is gone). Counters are kept.
    pub fn reset(&mut self) {
        self.carry.clear();
        self.overflowed = false;
        self.pending_cr = false;
    }

    /// The unterminated line so far (for showing a pending line; never parse it).
    pub fn partial(&self) -> &[u8] {
        &self.carry
    }

    /// Whether an unterminated line is pending.
    pub fn has_partial(&self) -> bool {
        !self.carry.is_empty() || self.overflowed
    }

    /// NUL bytes skipped since creation.
    pub fn junk_bytes(&self) -> u64 {
        self.junk
    }

    /// Truncated lines emitted since creation.
    pub fn long_lines(&self) -> u64 {
        self.long
    }

    /// Bytes allocated for the carry buffer (bounded by the line limit).
    pub fn capacity(&self) -> usize {
        self.carry.capacity()
    }

    /// One run of bytes without `\n` or NUL; `ends_line` when a `\n` followed it.
    fn segment(&mut self, seg: &[u8], ends_line: bool, out: &mut dyn FnMut(Line<'_>)) {
        let core_len = seg.iter().rposition(|&b| b != b'\r').map_or(0, |i| i + 1);
        let trailing_cr = core_len < seg.len();
        let mut core = &seg[..core_len];
        if core.is_empty() && !ends_line {
            // Only `\r`s (or nothing, next to a NUL): still undecided.
            self.pending_cr |= trailing_cr;
            return;
        }
        if self.pending_cr && !core.is_empty() {
            // The earlier `\r` was bare: what follows replaces the line.
            self.reset();
        }
        self.pending_cr = false;
        if let Some(j) = memrchr(b'\r', core) {
            self.reset();
            core = &core[j + 1..];
        }
        if ends_line {
            if self.carry.is_empty() && !self.overflowed {
                // The whole line is inside this chunk: hand out a slice, no copy.
                let truncated = core.len() > self.max;
                let bytes = if truncated { &core[..self.max] } else { core };
                self.long += u64::from(truncated);
                out(Line { bytes, truncated });
            } else {
                self.append(core);
                self.emit_carry(out);
            }
            self.reset();
        } else {
            self.append(core);
            self.pending_cr = trailing_cr;
        }
    }

    /// Add bytes to the carry, keeping at most `max` and growing capacity no further.
    fn append(&mut self, bytes: &[u8]) {
        if self.overflowed || bytes.is_empty() {
            return;
        }
        let room = self.max - self.carry.len();
        let take = bytes.len().min(room);
        let needed = self.carry.len() + take;
        if needed > self.carry.capacity() {
            // Double as usual, but never past the limit: memory stays at `max`.
            let doubled = (self.carry.capacity() * 2).max(64).min(self.max);
            let target = doubled.max(needed);
            self.carry.reserve_exact(target - self.carry.len());
        }
        self.carry.extend_from_slice(&bytes[..take]);
        if take < bytes.len() {
            self.overflowed = true;
        }
    }

    fn emit_carry(&mut self, out: &mut dyn FnMut(Line<'_>)) {
        let truncated = self.overflowed;
        self.long += u64::from(truncated);
        out(Line { bytes: &self.carry, truncated });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Output of feeding `chunks` then finishing: lines (lossy text), with a `~` suffix on
    /// truncated ones, and whether the final unterminated line came from `finish`.
    fn run(max: usize, chunks: &[&[u8]], finish: bool) -> Vec<String> {
        let mut s = LineSplitter::new(max);
        let mut got = Vec::new();
        let mut push = |l: Line<'_>| {
            let mut t = String::from_utf8_lossy(l.bytes).into_owned();
            if l.truncated {
                t.push('~');
            }
            got.push(t);
        };
        for c in chunks {
            s.feed(c, &mut push);
        }
        if finish {
            s.finish(&mut push);
        }
        got
    }

    /// Feed `data` in pieces of `size` bytes.
    fn run_split(max: usize, data: &[u8], size: usize, finish: bool) -> Vec<String> {
        let chunks: Vec<&[u8]> = data.chunks(size.max(1)).collect();
        run(max, &chunks, finish)
    }

    #[test]
    fn complete_lines_only_until_finish() {
        assert_eq!(run(100, &[b"a\nbc", b"d\ne"], false), ["a", "bcd"]);
        assert_eq!(run(100, &[b"a\nbc", b"d\ne"], true), ["a", "bcd", "e"]);
        assert_eq!(run(100, &[b"\n\n"], false), ["", ""]);
        assert!(run(100, &[b""], true).is_empty());
    }

    #[test]
    fn every_split_size_gives_the_same_lines() {
        let data: &[u8] = b"res=1.0e-3\r\nx\rprogress 10%\rprogress 100%\n\0\0\0tail\0ed\nlast";
        let whole = run(8, &[data], true);
        assert_eq!(whole, ["res=1.0e~", "progress~", "tailed", "last"]);
        for size in 1..=data.len() {
            assert_eq!(run_split(8, data, size, true), whole, "chunk size {size}");
        }
    }

    #[test]
    fn carriage_returns() {
        assert_eq!(run(100, &[b"a\r\n"], false), ["a"]);
        assert_eq!(run(100, &[b"a\r", b"\n"], false), ["a"]);
        assert_eq!(run(100, &[b"a\r\r\n"], false), ["a"]);
        assert_eq!(run(100, &[b"a\r", b"\r", b"\n"], false), ["a"]);
        assert_eq!(run(100, &[b"10%\r50%\r100%\n"], false), ["100%"]);
        assert_eq!(run(100, &[b"10%\r", b"100%\n"], false), ["100%"]);
        assert_eq!(run(100, &[b"abc\r", b"\rdef\n"], false), ["def"]);
        assert_eq!(run(100, &[b"\r\n"], false), [""]);
        // A bare CR resets a line that had overflowed: the text after it is kept whole.
        assert_eq!(run(4, &[b"abcdefgh\rxy\n"], false), ["xy"]);
        // Pending CR survives a NUL run.
        assert_eq!(run(100, &[b"ab\r\0\0\n"], false), ["ab"]);
        assert_eq!(run(100, &[b"ab\r\0\0c\n"], false), ["c"]);
    }

    #[test]
    fn nul_runs_are_skipped_and_counted() {
        let mut s = LineSplitter::new(16);
        let mut got = Vec::new();
        s.feed(b"a\n\0\0\0\0b\0c\n", &mut |l| got.push(l.bytes.to_vec()));
        assert_eq!(got, [b"a".to_vec(), b"bc".to_vec()]);
        assert_eq!(s.junk_bytes(), 5);
        // A megabyte hole is never stored.
        let hole = vec![0u8; 1 << 20];
        s.feed(&hole, &mut |_| panic!("a hole is not a line"));
        assert_eq!(s.junk_bytes(), 5 + (1 << 20));
        assert!(!s.has_partial());
        assert!(s.capacity() <= 16, "capacity {}", s.capacity());
    }

    #[test]
    fn long_lines_keep_the_prefix_and_count() {
        let mut s = LineSplitter::new(4);
        let mut got = Vec::new();
        let mut push = |l: Line<'_>| got.push((l.bytes.to_vec(), l.truncated));
        s.feed(b"abcd\nabcde\nab", &mut push);
        s.feed(b"cdefgh", &mut push);
        s.feed(b"ij\nok\n", &mut push);
        assert_eq!(
            got,
            [
                (b"abcd".to_vec(), false),
                (b"abcd".to_vec(), true),
                (b"abcd".to_vec(), true),
                (b"ok".to_vec(), false)
            ]
        );
        assert_eq!(s.long_lines(), 2);
        assert_eq!(s.capacity(), 4);
    }

    #[test]
    fn carry_capacity_stays_at_the_limit() {
        let max = 1000;
        let mut s = LineSplitter::new(max);
        let piece = [b'x'; 7];
        for _ in 0..10_000 {
            s.feed(&piece, &mut |_| panic!("no newline was fed"));
        }
        assert_eq!(s.partial().len(), max);
        assert_eq!(s.capacity(), max);
        let mut got = Vec::new();
        s.feed(b"\n", &mut |l| got.push((l.bytes.len(), l.truncated)));
        assert_eq!(got, [(max, true)]);
    }

    #[test]
    fn invalid_utf8_and_controls_pass_through_as_bytes() {
        let all: Vec<u8> = (0u8..=255).collect();
        let mut s = LineSplitter::new(1024);
        let mut got = Vec::new();
        s.feed(&all, &mut |l| got.push(l.bytes.to_vec()));
        s.finish(&mut |l| got.push(l.bytes.to_vec()));
        // 0x00 skipped; 0x0A ends the first line; 0x0D is a bare CR in the second line.
        assert_eq!(got[0], (1u8..=9).collect::<Vec<_>>());
        assert_eq!(got[1], (14u8..=255).collect::<Vec<_>>());
        assert_eq!(got.len(), 2);
    }

    #[test]
    fn reset_drops_the_partial_line() {
        let mut s = LineSplitter::new(100);
        let mut got = Vec::new();
        s.feed(b"old partial", &mut |l| got.push(l.bytes.to_vec()));
        s.reset();
        s.feed(b"new\n", &mut |l| got.push(l.bytes.to_vec()));
        assert_eq!(got, [b"new".to_vec()]);
    }

    #[test]
    fn newlines_are_found_at_every_offset_and_length() {
        for len in 0..200 {
            for at in 0..=len {
                let mut hay = vec![b'x'; len];
                if at < len {
                    hay[at] = b'\n';
                }
                let want = (at < len).then_some(at);
                assert_eq!(find_newline(&hay), want, "len {len} newline at {at}");
            }
        }
        // Bytes that differ from `\n` only in the high bit, or that borrow, are not newlines.
        assert_eq!(find_newline(&[0x8a, 0x0b, 0x09, 0x00, 0xff, 0x0a]), Some(5));
        let mut lines = Vec::new();
        each_line(b"a\n\nbc\n", |l| lines.push(l.to_vec()));
        assert_eq!(lines, [b"a".to_vec(), b"".to_vec(), b"bc".to_vec()]);
    }

    proptest! {
        /// Any byte stream, split anywhere, gives the same lines as the stream in one piece.
        #[test]
        fn splitting_never_changes_the_lines(
            data in proptest::collection::vec(
                prop_oneof![Just(b'\n'), Just(b'\r'), Just(0u8), Just(b'a'), any::<u8>()],
                0..200,
            ),
            cuts in proptest::collection::vec(0usize..200, 0..8),
            max in 1usize..12,
        ) {
            let whole = run(max, &[&data], true);
            let mut points: Vec<usize> = cuts.into_iter().map(|c| c.min(data.len())).collect();
            points.sort_unstable();
            let mut chunks: Vec<&[u8]> = Vec::new();
            let mut start = 0;
            for p in points {
                chunks.push(&data[start..p]);
                start = p;
            }
            chunks.push(&data[start..]);
            prop_assert_eq!(run(max, &chunks, true), whole);
        }
    }
}
