//! The summary as a short text table for the terminal (`twinaudit run` and `demo`), and the
//! shortcut findings both the table and the HTML report print.

use super::summary::Summary;

/// A short human-readable table of the summary.
pub fn render_text(s: &Summary) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "{} pairs: {} judged, {} errors. Failure rate {} ({:.0}% Wilson intervals)\n",
        s.n_pairs,
        s.n_judged,
        s.n_errors,
        s.failure_rate.describe(),
        100.0 * s.confidence
    ));
    if let Some(p) = &s.placebo {
        out.push_str(&format!(
            "placebo controls (same edit on free background, must hold): {} pairs, {} errors, flip rate {}\n",
            p.n_pairs,
            p.n_errors,
            p.flip_rate.describe()
        ));
    }
    if let Some(d) = s
        .placebo_corrected
        .as_ref()
        .and_then(|c| c.overall.difference)
    {
        out.push_str(&format!(
            "placebo-corrected failure rate (real failures minus placebo flips, same pairs): {}\n",
            d.describe()
        ));
    }
    for a in &s.original_accuracy {
        out.push_str(&format!(
            "original accuracy, {} questions: {}\n",
            a.question_kind.as_str(),
            a.accuracy.describe()
        ));
    }
    if !s.by_kind_and_role.is_empty() {
        out.push_str(
            "\nby question kind and edited role (distractor rows: the answer must hold)\n",
        );
        for r in &s.by_kind_and_role {
            let what = if r.role == "distractor" {
                "flip rate"
            } else {
                "failure rate"
            };
            out.push_str(&format!(
                "  {:<8} {:<11} {:<13} {}\n",
                r.question_kind.as_str(),
                r.role,
                what,
                r.failure_rate.describe()
            ));
        }
    }
    if !s.distractor_labels.is_empty() {
        out.push_str("\ndistractors ranked by the flip rate their edits cause\n");
        for r in s.distractor_labels.iter().take(6) {
            out.push_str(&format!(
                "  {:<8} {:<14} {}\n",
                r.question_kind.as_str(),
                r.label,
                r.flip_rate.describe()
            ));
        }
    }
    for line in shortcut_findings(s) {
        out.push_str(&format!("  finding: {line}\n"));
    }
    out.push_str(&format!(
        "\n{:<10} {:<11} {:<8} {:<7} {:>6}  {}\n",
        "operation",
        "role",
        "question",
        "expect",
        "pairs",
        if s.placebo.is_some() {
            "failure rate [interval] (failed/judged) | placebo flip rate"
        } else {
            "failure rate [interval] (failed/judged)"
        }
    ));
    for g in &s.groups {
        let what = if g.relation == "same" {
            "flipped"
        } else {
            "did not reach expected"
        };
        let placebo = match (&s.placebo, &g.placebo_flip_rate) {
            (None, _) => String::new(),
            (Some(_), Some(rate)) => format!(" | placebo {}", rate.describe()),
            (Some(_), None) => " | placebo none".to_string(),
        };
        out.push_str(&format!(
            "{:<10} {:<11} {:<8} {:<7} {:>6}  {} {}{}{}\n",
            g.operation,
            g.role,
            g.question_kind.as_str(),
            g.relation,
            g.n_pairs,
            g.failure_rate.describe(),
            what,
            if g.n_errors > 0 {
                format!(", {} errors", g.n_errors)
            } else {
                String::new()
            },
            placebo
        ));
    }
    out
}

/// Distractor labels whose flip rate lies wholly above some target-edit failure rate (the two
/// Wilson intervals do not overlap): editing what the question is *not* about moves the answer
/// more often than editing what it is about fails to.
pub fn shortcut_findings(s: &Summary) -> Vec<String> {
    let mut out = Vec::new();
    for d in &s.distractor_labels {
        let Some(d_low) = d.flip_rate.low else {
            continue;
        };
        let below: Vec<String> = s
            .by_kind_and_role
            .iter()
            .filter(|t| t.role == "target" && t.failure_rate.high.is_some_and(|h| h < d_low))
            .map(|t| format!("{} {}", t.question_kind.as_str(), t.failure_rate.describe()))
            .collect();
        if !below.is_empty() {
            out.push(format!(
                "{} answers flip on {} of edits to the {:?} distractor, more often than target edits fail ({}): the model likely reads the {} instead of the asked object",
                d.question_kind.as_str(),
                d.flip_rate.describe(),
                d.label,
                below.join("; "),
                d.label
            ));
        }
    }
    out
}
