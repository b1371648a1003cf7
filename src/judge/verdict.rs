//! From findings and criterion results to the run's verdict.
//!
//! Each finding names the verdict it argues for (`supports`). The first verdict of the order
//! `diverging`, `oscillating`, `suspect`, `stalled` that any finding supports wins, and the
//! findings supporting it are the causes. Otherwise the run is `converged` when there is at
//! least one criterion, every criterion holds and no monitor's criteria are still within
//! their hold span (a `holding` finding) — an empty run or one with nothing to judge is never
//! `converged` — and `converging` otherwise. `stale` is decided by the live views,
//! not here.

use super::types::{CriterionResult, Finding, FindingKind, Verdict};

/// Verdicts that findings can force, strongest first.
pub const PRECEDENCE: [Verdict; 4] =
    [Verdict::Diverging, Verdict::Oscillating, Verdict::Suspect, Verdict::Stalled];

/// The verdict, its `since` and the indices of the deciding findings.
///
/// `since`: for `converged`, the iteration from which all criteria held together (the latest
/// of their `since`); otherwise the earliest first iteration of the deciding findings' evidence.
pub fn decide(
    findings: &[Finding],
    criteria: &[CriterionResult],
) -> (Verdict, Option<i64>, Vec<usize>) {
    let supporting = |v: Verdict| -> Vec<usize> {
        findings.iter().enumerate().filter(|(_, f)| f.supports == Some(v)).map(|(i, _)| i).collect()
    };
    let earliest = |causes: &[usize]| causes.iter().map(|&i| findings[i].first).min();
    for v in PRECEDENCE {
        let causes = supporting(v);
        if !causes.is_empty() {
            return (v, earliest(&causes), causes);
        }
    }
    let held = !findings.iter().any(|f| f.kind == FindingKind::Holding);
    if held && !criteria.is_empty() && criteria.iter().all(|c| c.met) {
        let since = criteria.iter().map(|c| c.since).collect::<Option<Vec<_>>>();
        let since = since.and_then(|s| s.into_iter().max());
        return (Verdict::Converged, since, Vec::new());
    }
    let causes = supporting(Verdict::Converging);
    (Verdict::Converging, earliest(&causes), causes)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn finding(first: i64, supports: Option<Verdict>) -> Finding {
        Finding { first, last: first + 10, supports, ..Default::default() }
    }

    fn crit(met: bool, since: Option<i64>) -> CriterionResult {
        CriterionResult { met, since, ..Default::default() }
    }

    #[test]
    fn precedence_and_converged() {
        let f = vec![
            finding(5, Some(Verdict::Stalled)),
            finding(7, Some(Verdict::Suspect)),
            finding(3, Some(Verdict::Oscillating)),
            finding(9, Some(Verdict::Oscillating)),
            finding(1, None),
        ];
        assert_eq!(decide(&f, &[]), (Verdict::Oscillating, Some(3), vec![2, 3]));
        assert_eq!(decide(&f[..2], &[]).0, Verdict::Suspect);
        let info = [finding(1, None)];
        let all = [crit(true, Some(40)), crit(true, Some(70))];
        assert_eq!(decide(&info, &all), (Verdict::Converged, Some(70), vec![]));
        assert_eq!(decide(&info, &[crit(true, Some(1)), crit(false, None)]).0, Verdict::Converging);
        assert_eq!(decide(&[], &[]).0, Verdict::Converging, "nothing to judge is not converged");
        // Criteria met but not yet held: converging, the hold its cause.
        let hold =
            [Finding { kind: FindingKind::Holding, ..finding(60, Some(Verdict::Converging)) }];
        assert_eq!(decide(&hold, &all), (Verdict::Converging, Some(60), vec![0]));
    }
}
