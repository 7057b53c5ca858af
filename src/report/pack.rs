//! The briefing pack: what a risk committee reads. In one folder, written file by file
//! atomically: a chart per series (`charts/NAME.png`) and, for every series that carries a
//! condition, where its move comes from (`charts/sources-NAME.png`); the tables (`fans.csv`,
//! `summary.csv`, `attribution.csv`, `checks.json`, and with a second scenario `compare.csv`
//! and `compare-summary.csv`); and `briefing.html`, one self-contained page (charts inline,
//! no remote resource) with the narrative, the conditions in plain words, the checks, the
//! statistics, the model and the caution, printable section by section.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::attribution::{linear_units, series_part, shock_parts};
use super::charts::{BarPart, series_chart, stacked_chart};
use super::summary::{HEADLINE, StatKind, band};
use super::{
    CAUTION, ReportError, write_atomic, write_attribution, write_checks_json, write_fans,
    write_summary,
};
use crate::checks::{Severity, Status, one_in};
use crate::compare::{Change, Comparison, write_compare};
use crate::run::{RunOutcome, summary};
use crate::scenario::{Bound, CorridorSpec, PinSpec, ScenarioFile, Setup, Units};

fn io(path: &Path) -> impl Fn(std::io::Error) -> ReportError + '_ {
    move |error| ReportError::Io {
        path: path.to_path_buf(),
        error,
    }
}

/// A file name for a series (letters, digits, `-` and `_` kept).
fn file_name(name: &str) -> String {
    name.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect()
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Standard base64 (RFC 4648) for inline images.
fn base64(bytes: &[u8]) -> String {
    const ABC: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            *chunk.get(1).unwrap_or(&0),
            *chunk.get(2).unwrap_or(&0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for k in 0..4 {
            if k <= chunk.len() {
                out.push(ABC[((n >> (18 - 6 * k)) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// A series or shock as people name it, with the units of a condition on it in words.
fn target(
    file: &ScenarioFile,
    series: &Option<String>,
    shock: &Option<String>,
    units: Units,
) -> (String, String) {
    let spec = |n: &str| file.series.iter().find(|s| s.name == n);
    match (series, shock) {
        (Some(s), _) => spec(s).map_or((s.clone(), units.words()), |spec| {
            (spec.shown().to_string(), spec.measure(units))
        }),
        (None, Some(j)) => (
            format!("the {} shock", spec(j).map_or(j.as_str(), |s| s.shown())),
            "standard deviations".into(),
        ),
        _ => ("?".into(), units.words()),
    }
}

/// A pin in plain words, naming series as the scenario file labels them.
pub fn pin_words(file: &ScenarioFile, p: &PinSpec) -> String {
    let (what, measure) = target(file, &p.series, &p.shock, p.units);
    format!(
        "{what} is fixed at {} ({measure}) in {}{}",
        p.value,
        p.period,
        if p.active { "" } else { " (switched off)" }
    )
}

/// A corridor in plain words, naming series as the scenario file labels them.
pub fn corridor_words(file: &ScenarioFile, c: &CorridorSpec) -> String {
    let bound = |b: &Option<Bound>| match b {
        None => None,
        Some(Bound::Same(v)) => Some(v.to_string()),
        Some(Bound::Each(v)) => Some(format!(
            "{} by period",
            v.iter()
                .map(|x| x.map_or("open".into(), |x| x.to_string()))
                .collect::<Vec<_>>()
                .join(", ")
        )),
    };
    let range = match (bound(&c.lower), bound(&c.upper)) {
        (Some(a), Some(b)) => format!("between {a} and {b}"),
        (Some(a), None) => format!("at or above {a}"),
        (None, Some(b)) => format!("at or below {b}"),
        (None, None) => "anywhere (both sides open)".into(),
    };
    let (what, measure) = target(file, &c.series, &c.shock, c.units);
    format!(
        "{what} stays {range} ({measure}) from {} to {}{}",
        c.from,
        c.to,
        if c.active { "" } else { " (switched off)" }
    )
}

/// The files of a pack, written into `dir`; returns them in the order written.
/// `progress` hears what is being written ("chart 3 of 14").
pub fn write_pack(
    dir: &Path,
    setup: &Setup,
    out: &RunOutcome,
    compared: Option<&Comparison>,
    progress: &dyn Fn(&str),
) -> Result<Vec<PathBuf>, ReportError> {
    let charts = dir.join("charts");
    std::fs::create_dir_all(&charts).map_err(io(&charts))?;
    let mut written = Vec::new();
    let mut figures = String::new();
    let conditioned = conditioned(setup);
    let count = setup.n()
        + if out.attribution.is_some() {
            conditioned.len()
        } else {
            0
        };
    for i in 0..setup.n() {
        progress(&format!("chart {} of {count}", i + 1));
        let path = charts.join(format!("{:02}-{}.png", i + 1, file_name(&setup.names[i])));
        series_chart(&path, setup, &out.fans, i)?;
        figures.push_str(&figure(
            &path,
            &format!("{}: the scenario's fan", setup.shown(i)),
        )?);
        written.push(path);
    }
    let mut sources = String::new();
    if let Some(a) = &out.attribution {
        for (k, &i) in conditioned.iter().enumerate() {
            progress(&format!("chart {} of {count}", setup.n() + k + 1));
            let (terms, units) = linear_units(setup, i);
            let parts = shock_parts(a, &setup.names, &terms, i);
            let bars: Vec<BarPart> = parts
                .iter()
                .map(|p| BarPart {
                    name: &p.name,
                    values: p.values.clone(),
                })
                .collect();
            let total = series_part(a.n, &terms, &a.total, i);
            let path = charts.join(format!(
                "{:02}-{}-sources.png",
                i + 1,
                file_name(&setup.names[i])
            ));
            let title = format!(
                "{}: conditional minus unconditional mean, by shock",
                setup.shown(i)
            );
            stacked_chart(&path, setup, &title, &units, &bars, &total)?;
            sources.push_str(&figure(&path, &title)?);
            written.push(path);
        }
    }
    progress("tables and the page");
    let fans = dir.join("fans.csv");
    write_fans(&fans, &out.stamp, &out.fans)?;
    written.push(fans);
    let stats = dir.join("summary.csv");
    write_summary(&stats, &out.stamp, &out.summary)?;
    written.push(stats);
    if let Some(a) = &out.attribution {
        let path = dir.join("attribution.csv");
        write_attribution(&path, &out.stamp, setup, a)?;
        written.push(path);
    }
    let checks = dir.join("checks.json");
    write_checks_json(&checks, &out.stamp, &out.checks)?;
    written.push(checks);
    if let Some(c) = compared {
        let path = dir.join("compare.csv");
        write_compare(&path, &c.stamp, c)?;
        written.push(path);
        let path = dir.join("compare-summary.csv");
        write_summary(&path, &c.stamp, &c.statistics)?;
        written.push(path);
    }
    let html = dir.join("briefing.html");
    let page = page(setup, out, compared, &figures, &sources);
    write_atomic(&html, page.as_bytes()).map_err(io(&html))?;
    written.push(html);
    remove_stale(dir, &charts, &written)?;
    Ok(written)
}

/// Remove what an earlier pack left that this one did not write: its charts (series since
/// removed or renamed) and its tables (a comparison, an attribution), so that the folder
/// holds one pack.
fn remove_stale(dir: &Path, charts: &Path, written: &[PathBuf]) -> Result<(), ReportError> {
    let old_charts = std::fs::read_dir(charts)
        .map_err(io(charts))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|e| e == "png"));
    let old_tables = crate::report::COMMAND_FILES.iter().map(|n| dir.join(n));
    for path in old_charts.chain(old_tables) {
        if path.exists() && !written.contains(&path) {
            std::fs::remove_file(&path).map_err(io(&path))?;
        }
    }
    Ok(())
}

/// Series with an active pin or corridor, in the scenario's order.
fn conditioned(setup: &Setup) -> Vec<usize> {
    let f = &setup.file;
    (0..setup.n())
        .filter(|&i| {
            let name = Some(&setup.names[i]);
            f.pins.iter().any(|p| p.active && p.series.as_ref() == name)
                || f.corridors
                    .iter()
                    .any(|c| c.active && c.series.as_ref() == name)
        })
        .collect()
}

fn figure(path: &Path, caption: &str) -> Result<String, ReportError> {
    let bytes = std::fs::read(path).map_err(io(path))?;
    Ok(format!(
        "<figure><img alt=\"{}\" src=\"data:image/png;base64,{}\"><figcaption>{}</figcaption></figure>\n",
        escape(caption),
        base64(&bytes),
        escape(caption)
    ))
}

const STYLE: &str = "body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;max-width:1000px;margin:2em auto;padding:0 1em;color:#222;line-height:1.45}
h1{margin-bottom:.2em}h2{border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:2em}
.caution{background:#f4efe4;border-left:4px solid #b08a3c;padding:.6em .9em}
.clash{color:#b02a1c}.strain{color:#9a6a00}.clear{color:#2f7a3f}
figure{margin:1.2em 0}figure img{max-width:100%;border:1px solid #ddd}figcaption{font-size:.9em;color:#555}
table{border-collapse:collapse;font-size:.9em}td,th{border-bottom:1px solid #e3e3e3;padding:.25em .6em;text-align:right}th:first-child,td:first-child{text-align:left}
pre{background:#f6f6f6;padding:.8em;overflow-x:auto;font-size:.85em}
.meta{color:#555;font-size:.9em}
@media print{body{max-width:none;margin:0}section{page-break-before:always}section:first-of-type{page-break-before:avoid}figure{page-break-inside:avoid}a{color:inherit}}";

fn page(
    setup: &Setup,
    out: &RunOutcome,
    compared: Option<&Comparison>,
    figures: &str,
    sources: &str,
) -> String {
    let f = &setup.file;
    let mut h = String::new();
    let _ = write!(
        h,
        "<!doctype html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>{} — briefing</title><style>{STYLE}</style></head><body>\n",
        escape(&f.name)
    );
    let _ = writeln!(
        h,
        "<header><h1>{}</h1><p class=\"meta\">Scenario briefing made by Tiltyard {} from {} ({} series, {} periods ahead, seed {}).</p><p class=\"caution\">{}</p></header>",
        escape(&f.name),
        env!("CARGO_PKG_VERSION"),
        escape(&setup.path.display().to_string()),
        setup.n(),
        f.horizon,
        f.seed,
        escape(CAUTION)
    );
    let _ = write!(
        h,
        "<section><h2>Narrative</h2><p>{}</p>\n<h3>Conditions</h3><ul>\n",
        escape(&f.narrative)
    );
    for p in &f.pins {
        let _ = writeln!(h, "<li>{}</li>", escape(&pin_words(f, p)));
    }
    for c in &f.corridors {
        let _ = writeln!(h, "<li>{}</li>", escape(&corridor_words(f, c)));
    }
    if f.pins.is_empty() && f.corridors.is_empty() {
        h.push_str("<li>none: the paths are the model's unconditional forecast</li>\n");
    }
    let drivers = match &f.drivers {
        None => "Every structural shock may move to meet them.".to_string(),
        Some(d) => format!(
            "Only these structural shocks may move to meet them: {}; the others keep their usual distribution.",
            crate::scenario::describe_drivers(d)
        ),
    };
    let _ = writeln!(h, "</ul><p>{}</p>", escape(&drivers));
    if let Some(t) = &out.tilt {
        let _ = writeln!(
            h,
            "<p>Targets on the distribution, met by tilting the weights of the paths as little as possible (relative entropy {:.3} nats; the fans rest on about {:.0} of {} paths):</p><ul>",
            t.divergence, t.effective_paths, t.paths
        );
        for m in &t.targets {
            let _ = writeln!(h, "<li>{}</li>", escape(&m.label));
        }
        h.push_str("</ul>\n");
    }
    h.push_str("</section>\n");
    checks(&mut h, out);
    let _ = write!(
        h,
        "<section><h2>Paths</h2><p>Grey: the model's forecast without the conditions (90% band, dashed median). Teal: under the scenario (90%, 68% and 50% bands, median). Rose diamonds: pins; violet boxes: corridors.</p>\n{figures}</section>\n"
    );
    if !sources.is_empty() {
        let ordering: Vec<&str> = setup
            .ordering
            .iter()
            .map(|&i| setup.names[i].as_str())
            .collect();
        let _ = write!(
            h,
            "<section><h2>Where it comes from</h2><p>For each series with a condition: how far the scenario moves its mean from the unconditional forecast, split by the structural shocks that carry it (the parts add up to the total line). The split depends on the identification ordering: {}.</p>\n{sources}</section>\n",
            escape(&ordering.join(", "))
        );
    }
    statistics(&mut h, setup, out);
    if let Some(c) = compared {
        comparison(&mut h, c);
    }
    let _ = write!(
        h,
        "<section><h2>Model and data</h2><pre>{}</pre></section>\n<footer><p class=\"caution\">{}</p></footer>\n</body></html>\n",
        escape(&summary(setup, out)),
        escape(CAUTION)
    );
    h
}

fn checks(h: &mut String, out: &RunOutcome) {
    let r = &out.checks;
    let (class, verdict) = match r.status {
        Status::Clear => (
            "clear",
            "Clear: the conditions hold together, and not improbably.",
        ),
        Status::Strained => (
            "strain",
            "Strained: the conditions hold together, but only improbably.",
        ),
        Status::Clashing => ("clash", "Clash: the conditions cannot hold together."),
    };
    let _ = writeln!(
        h,
        "<section><h2>Checks</h2><p class=\"{class}\"><strong>{verdict}</strong> (evaluated at {}).</p><ul>",
        escape(&r.evaluated_at)
    );
    for finding in &r.findings {
        let class = match finding.severity {
            Severity::Clash => "clash",
            Severity::Strain => "strain",
        };
        let blame = if finding.conditions.is_empty() {
            String::new()
        } else {
            format!(" To blame: {}.", finding.conditions.join("; "))
        };
        let _ = writeln!(
            h,
            "<li class=\"{class}\">{}.{} To resolve: {}.</li>",
            escape(finding.message.trim_end_matches('.')),
            escape(&blame),
            escape(finding.remedy.trim_end_matches('.'))
        );
    }
    h.push_str("</ul>\n");
    if let Some(c) = &r.corridors {
        let _ = writeln!(
            h,
            "<p>The corridors hold with probability {} given the pins, with every shock free (10^{:.1}).</p>",
            one_in(c.log10_probability),
            c.log10_probability
        );
    }
    if let Some(p) = &r.pins {
        let _ = writeln!(
            h,
            "<p>Pins this far from the unconditional forecast, or farther, come up {} of the time (10^{:.1}).</p>",
            one_in(p.log10_tail),
            p.log10_tail
        );
    }
    if let Some(p) = &r.plausibility {
        let _ = writeln!(
            h,
            "<p>Plausibility: {} ({:.2} nats).</p>",
            escape(&p.reading),
            p.divergence
        );
    }
    if let Some(s) = &r.against_history {
        let _ = writeln!(h, "<p>Against history, {}.</p>", escape(&s.reading));
    }
    h.push_str("</section>\n");
}

fn statistics(h: &mut String, setup: &Setup, out: &RunOutcome) {
    h.push_str("<section><h2>Summary statistics</h2><p>Medians with 5% and 95% bands over the paths; the deviation is a conditional path's statistic minus that of the unconditional path it was made from.</p><table><tr><th>series</th><th>statistic</th><th>units</th><th>under the scenario</th><th>deviation from the unconditional</th></tr>\n");
    for name in &setup.names {
        for stat in HEADLINE {
            let find = |kind: StatKind| {
                out.summary
                    .iter()
                    .find(|s| &s.series == name && s.statistic == stat && s.kind == kind)
            };
            if let (Some(c), Some(d)) = (find(StatKind::Conditional), find(StatKind::Deviation)) {
                let _ = writeln!(
                    h,
                    "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                    escape(name),
                    stat.replace('_', " "),
                    escape(&c.units),
                    band(&c.quantiles),
                    band(&d.quantiles)
                );
            }
        }
    }
    h.push_str("</table><p>Every statistic, calendar-year averages included, is in summary.csv.</p></section>\n");
}

fn comparison(h: &mut String, c: &Comparison) {
    let _ = writeln!(
        h,
        "<section><h2>Compared with {}</h2><ul>",
        escape(&c.second)
    );
    for change in &c.conditions {
        let text = match change {
            Change::Added(t) => format!("only in {}: {t}", c.second),
            Change::Removed(t) => format!("only here: {t}"),
            Change::Changed { first, second } => format!("here {first}; there {second}"),
        };
        let _ = writeln!(h, "<li>{}</li>", escape(&text));
    }
    if c.conditions.is_empty() {
        h.push_str("<li>the same conditions</li>\n");
    }
    let _ = writeln!(
        h,
        "</ul><p>{} The difference by series and period is in compare.csv, the statistics' in compare-summary.csv.</p></section>",
        if c.paired {
            "The two were drawn from the same posterior draws and shocks, so their difference is the conditions' effect."
        } else {
            "The two were drawn with different models, draws or seeds: only their medians are compared."
        }
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 4648 §10 test vectors.
    #[test]
    fn base64_matches_the_standard_vectors() {
        for (plain, coded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(plain.as_bytes()), coded);
        }
    }
}
