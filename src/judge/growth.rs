//! A growing oscillation decides only when the run corroborates it.
//!
//! One series' cycle growing over a few dozen iterations is as often a stretch of red noise
//! that the spectrum and the envelope happen to read as growth; an instability of the
//! coupled solve grows in every equation at once, each with its own share of noise. So a
//! growing cycle (`health::growing_cycle`) decides `diverging` when another series grows
//! with the same period on its own search ([`GROWTH_SAME_PERIOD`]), or when more of the other
//! series' amplitudes at that very period rise over the same iterations than noise makes
//! rise, or alone once it has grown a hundredfold. Otherwise it stays a note.
//!
//! The period is given, so the other series need no spectral search and no spectral test:
//! each one's envelope at that period ([`super::oscillation::envelope_at`]) is tested for a
//! rise at the one-sided [`PEER_ALPHA`] level (a stationary series rises there at most that
//! often; measured on white noise, well under it), and the count of series that rise is
//! compared with the binomial tail: it corroborates when noise alone would give that many
//! with probability at most [`CORROBORATION_ALPHA`] (one series of up to two looked at, two
//! of three to fourteen, …). The series are taken as independent; the equations of one
//! solve share some of their noise, which makes the level approximate.

use super::Sink;
use super::health;
use super::limits::GROWTH_SAME_PERIOD;
use super::series::View;
use super::types::{FindingKind, Verdict};
use statrs::distribution::{Binomial, DiscreteCDF};

/// One-sided level at which one other series' amplitude at the given period rises (common
/// practice: the lower end of a two-sided 95 % interval).
pub const PEER_ALPHA: f64 = 0.025;

/// Level of the count of rising series against the binomial tail (common practice: 5 %).
pub const CORROBORATION_ALPHA: f64 = 0.05;

/// The fewest of `m` series, each rising by chance with probability [`PEER_ALPHA`], that
/// noise gives with probability at most [`CORROBORATION_ALPHA`].
pub fn peers_needed(m: usize) -> usize {
    let Ok(b) = Binomial::new(PEER_ALPHA, m as u64) else { return usize::MAX };
    (1..=m).find(|&k| b.sf(k as u64 - 1) <= CORROBORATION_ALPHA).unwrap_or(usize::MAX)
}

/// A judged series that may corroborate a growing cycle: its name, view and whether it is a
/// residual (judged in decades).
pub struct Peer<'a> {
    pub name: &'a str,
    pub view: View<'a>,
    pub residual: bool,
}

/// A growing-cycle finding: its index in the findings, period, series and iterations.
struct Candidate {
    index: usize,
    period: f64,
    series: Option<String>,
    span: (i64, i64),
}

/// Let the growing-cycle findings in `sink` decide when the run corroborates them.
pub fn corroborate(sink: &mut Sink, peers: &[Peer<'_>]) {
    let growing: Vec<Candidate> = sink
        .findings
        .iter()
        .enumerate()
        .filter(|(_, f)| f.kind == FindingKind::GrowingOscillation)
        .filter_map(|(index, f)| {
            let period = f.period?;
            Some(Candidate { index, period, series: f.series.clone(), span: (f.first, f.last) })
        })
        .collect();
    for c in &growing {
        let others = growing
            .iter()
            .filter(|o| {
                o.index != c.index
                    && o.series != c.series
                    && (o.period - c.period).abs() <= GROWTH_SAME_PERIOD * c.period
            })
            .count();
        let alone = sink.findings[c.index].supports == Some(Verdict::Diverging);
        let at_period = if alone || others > 0 { Vec::new() } else { rising_at(c, peers) };
        let f = &mut sink.findings[c.index];
        if alone {
            f.detail.push_str(if others > 0 {
                "; grown a hundredfold, and other series grow with the same period: heading for divergence"
            } else {
                "; grown a hundredfold: heading for divergence"
            });
        } else if others > 0 {
            f.supports = Some(Verdict::Diverging);
            f.detail.push_str(&format!(
                "; {others} other series grow with the same period: heading for divergence"
            ));
        } else if !at_period.is_empty() {
            f.supports = Some(Verdict::Diverging);
            f.detail.push_str(&format!(
                "; {} of the other series ({}) grow at the same period over the same iterations: heading for divergence",
                at_period.len(),
                at_period.join(", "),
            ));
        } else {
            f.detail.push_str("; no other series grows with it (noted, not deciding)");
        }
    }
}

/// The other series whose amplitude at `c`'s period rises over `c`'s iterations, when they
/// are more than noise explains ([`peers_needed`]); empty otherwise.
fn rising_at<'a>(c: &Candidate, peers: &[Peer<'a>]) -> Vec<&'a str> {
    let looked: Vec<&Peer<'a>> =
        peers.iter().filter(|q| Some(q.name) != c.series.as_deref()).collect();
    let rising: Vec<&'a str> = looked
        .iter()
        .filter(|q| health::grows_at(&q.view, q.residual, c.period, c.span, 1.0 - PEER_ALPHA))
        .map(|q| q.name)
        .collect();
    if rising.len() >= peers_needed(looked.len()) { rising } else { Vec::new() }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_count_of_rising_series_needed_follows_the_binomial_tail() {
        // Binomial arithmetic at p = 0.025, worked by hand: P(X ≥ 1 | 2) = 1 − 0.975² =
        // 0.0494; P(X ≥ 1 | 3) = 0.0731 > 5 %, P(X ≥ 2 | 3) = 0.0018; P(X ≥ 2 | 14) =
        // 0.0466; P(X ≥ 2 | 15) = 0.0527 > 5 %, P(X ≥ 3 | 15) = 0.0057.
        let cases = [(1, 1), (2, 1), (3, 2), (8, 2), (14, 2), (15, 3), (30, 3)];
        for (m, k) in cases {
            assert_eq!(peers_needed(m), k, "{m} series");
        }
        assert_eq!(peers_needed(0), usize::MAX);
    }
}
