//! The check report as readable text (terminal, `about.txt`) and as JSON (`checks.json`).

use std::path::Path;

use super::{CAUTION, ReportError, Stamp};
use crate::checks::{CheckReport, Severity, Status};

/// The report as indented lines under a `checks` heading.
pub fn check_text(report: &CheckReport) -> String {
    let mut s = Vec::new();
    let verdict = match report.status {
        Status::Clear => "clear: the conditions hold together without strain",
        Status::Strained => "strained: the conditions hold together, but only improbably",
        Status::Clashing => "CLASH: the conditions cannot hold together as written",
    };
    s.push(format!("checks     {verdict} (at {})", report.evaluated_at));
    for f in &report.findings {
        let tag = match f.severity {
            Severity::Clash => "clash ",
            Severity::Strain => "strain",
        };
        s.push(format!("  {tag}   {}", f.message));
        if !f.conditions.is_empty() {
            let named: Vec<String> = f.conditions.iter().map(|c| format!("'{c}'")).collect();
            let where_ = if f.fields.is_empty() {
                String::new()
            } else {
                format!(" [{}]", f.fields.join(", "))
            };
            let minimal = match f.minimal {
                Some(true) => " (each one needed)",
                Some(false) => " (not narrowed down to a set whose every member is needed)",
                None => "",
            };
            s.push(format!(
                "           to blame: {}{where_}{minimal}",
                named.join(", ")
            ));
        }
        s.push(format!("           to resolve: {}", f.remedy));
    }
    if let Some(p) = &report.pins {
        let worst =
            p.z.iter()
                .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
                .map(|(l, z)| format!("; largest |z| {:.2} ('{l}')", z.abs()))
                .unwrap_or_default();
        s.push(format!(
            "  pins     {} from the unconditional forecast: Mahalanobis distance {:.2} (d² = {:.2}, χ²({}) tail 10^{:.2}){worst}",
            if p.pins == 1 { "1 pin".to_string() } else { format!("{} pins", p.pins) },
            p.mahalanobis.sqrt(),
            p.mahalanobis,
            p.pins,
            p.log10_tail
        ));
    }
    if let Some(c) = report
        .corridors
        .as_ref()
        .filter(|c| !c.log10_probability.is_finite())
    {
        s.push(format!(
            "  corridors no proposal of {} met them (probability given the pins below about 10^{:.1}; never above 10^{:.2})",
            c.proposals,
            -(c.proposals as f64).log10(),
            c.log10_bound
        ));
    } else if let Some(c) = &report.corridors {
        s.push(format!(
            "  corridors probability given the pins, every shock free, 10^{:.2} (relative error {:.1}%, {} proposals; never above 10^{:.2}); the exact sampler accepts about {:.1e} of its proposals",
            c.log10_probability,
            100.0 * c.relative_error,
            c.proposals,
            c.log10_bound,
            c.acceptance
        ));
        if !c.saddle_point_found {
            s.push(
                "           note: the tilting saddle point was not found; the sampler stays exact but is as slow as plain rejection"
                    .into(),
            );
        }
    }
    if let Some(p) = &report.plausibility {
        // `+ 0.0` turns a −0 into 0 for printing.
        let law = if p.corridor_part_with_drivers {
            ", drivers only"
        } else {
            ""
        };
        s.push(format!(
            "  plausibility divergence {:.3} nats (pins' mean {:.3}, shape {:.3}, corridors{law} {:.3}; {:.3} per period), coin {:.3}:",
            p.divergence + 0.0,
            p.mean_part + 0.0,
            p.shape_part + 0.0,
            p.corridor_part + 0.0,
            p.per_period + 0.0,
            p.coin
        ));
        s.push(format!("           {}", p.reading));
    }
    if let Some(h) = &report.against_history {
        let about = if h.estimated { "about " } else { "" };
        s.push(format!(
            "  history  the scenario's mean shocks have size {about}{:.2} (a window of history: standard normal under the model); {}",
            h.score, h.reading
        ));
    }
    for note in &report.notes {
        s.push(format!("  note     {note}"));
    }
    s.join("\n")
}

/// `checks.json`: the report, with its scenario, run and the caution.
pub fn write_checks_json(
    path: &Path,
    stamp: &Stamp,
    report: &CheckReport,
) -> Result<(), ReportError> {
    #[derive(serde::Serialize)]
    struct Export<'a> {
        #[serde(flatten)]
        stamp: &'a Stamp,
        #[serde(flatten)]
        report: &'a CheckReport,
        caution: &'static str,
    }
    let io = |error| ReportError::Io {
        path: path.to_path_buf(),
        error,
    };
    let text = serde_json::to_string_pretty(&Export {
        stamp,
        report,
        caution: CAUTION,
    })
    .map_err(|e| io(std::io::Error::other(e)))?;
    super::write_atomic(path, (text + "\n").as_bytes()).map_err(io)
}
