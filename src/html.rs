//! Self-contained HTML reports with SVG plots drawn by `plotters`: no network, no scripts,
//! no web fonts (system sans-serif). Pure: builds a string from collected series and a
//! report; the caller writes the file.

use std::collections::BTreeMap;

use plotters::prelude::*;

use crate::core::Sample;
use crate::metrics::Metric;
use crate::report::Report;
use crate::rules::Outcome;

/// Points kept per plotted metric (evenly thinned beyond).
pub const MAX_POINTS: usize = 3000;

/// A plotted line: (t, value) points.
type Points = Vec<(f64, f64)>;
/// A line to draw: label, colour, points.
type Line<'a> = (&'a str, RGBColor, &'a [(f64, f64)]);

/// Time series collected from a replay for plotting.
#[derive(Debug, Default, Clone)]
pub struct Series {
    by: BTreeMap<(Metric, Option<crate::msg::Role>), Points>,
}

impl Series {
    /// Keeps the samples of the plotted metrics, thinning each to at most `2 * MAX_POINTS`.
    pub fn add(&mut self, samples: &[Sample]) {
        for s in samples.iter().filter(|s| crate::metrics::catalog::row(s.metric).plot) {
            let v = self.by.entry((s.metric, s.role)).or_default();
            v.push((s.t, s.value));
            if v.len() >= 2 * MAX_POINTS {
                // Keep every other point: memory stays bounded, the shape stays.
                let kept: Vec<(f64, f64)> = v.iter().step_by(2).copied().collect();
                *v = kept;
            }
        }
    }

    fn get(&self, m: Metric) -> &[(f64, f64)] {
        self.by.get(&(m, None)).map_or(&[], Vec::as_slice)
    }
}

const INK: RGBColor = RGBColor(20, 20, 20);
const C1: RGBColor = RGBColor(0, 90, 181); // blue
const C2: RGBColor = RGBColor(220, 50, 32); // red
const C3: RGBColor = RGBColor(0, 150, 80); // green
const C4: RGBColor = RGBColor(230, 150, 0); // amber

fn bounds(series: &[&[(f64, f64)]]) -> Option<((f64, f64), (f64, f64))> {
    let pts = series.iter().flat_map(|s| s.iter());
    let (mut x0, mut x1, mut y0, mut y1) =
        (f64::INFINITY, f64::NEG_INFINITY, f64::INFINITY, f64::NEG_INFINITY);
    for &(x, y) in pts {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    if !x0.is_finite() {
        return None;
    }
    if x1 <= x0 {
        x1 = x0 + 1.0;
    }
    // Headroom above the data keeps the legend (upper right) off the lines.
    let pad = ((y1 - y0) * 0.08).max(1e-3);
    Some(((x0, x1), (y0.min(0.0) - if y0 < 0.0 { pad } else { 0.0 }, y1 + 4.0 * pad)))
}

/// A line chart: (label, colour, points); `bands` are shaded time spans (start, end, colour).
fn line_chart(title: &str, y_label: &str, lines: &[Line<'_>], bands: &[(f64, f64, RGBColor)]) -> String {
    let all: Vec<&[(f64, f64)]> = lines.iter().map(|l| l.2).collect();
    let Some(((x0, x1), (y0, y1))) = bounds(&all) else {
        return format!("<p class=\"none\">{title}: no data in this run.</p>");
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 340)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 22).into_font().color(&INK))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(70)
            .build_cartesian_2d(x0..x1, y0..y1);
        let Ok(mut chart) = chart else { return String::new() };
        let _ = chart
            .configure_mesh()
            .x_desc("time (s)")
            .y_desc(y_label)
            .label_style(("sans-serif", 15).into_font().color(&INK))
            .axis_desc_style(("sans-serif", 16).into_font().color(&INK))
            .light_line_style(RGBColor(235, 235, 235))
            .draw();
        for &(a, b, c) in bands {
            let _ = chart.draw_series(std::iter::once(Rectangle::new(
                [(a, y0), (b.max(a + (x1 - x0) * 0.002), y1)],
                c.mix(0.25).filled(),
            )));
        }
        for (label, colour, pts) in lines {
            if pts.is_empty() {
                continue;
            }
            let c = *colour;
            if let Ok(s) = chart.draw_series(LineSeries::new(pts.iter().copied(), c.stroke_width(2))) {
                s.label(*label)
                    .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], c.stroke_width(3)));
            }
        }
        let _ = chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(INK)
            .label_font(("sans-serif", 15).into_font().color(&INK))
            .position(SeriesLabelPosition::UpperRight)
            .draw();
        let _ = root.present();
    }
    svg
}

/// A grouped bar chart of (group, [(label, value)]).
fn bar_chart(title: &str, y_label: &str, groups: &[(String, Vec<(&str, f64)>)]) -> String {
    let ymax = groups.iter().flat_map(|g| g.1.iter().map(|b| b.1)).fold(0.0, f64::max);
    if groups.is_empty() || ymax <= 0.0 {
        return format!("<p class=\"none\">{title}: no data in this run.</p>");
    }
    let colours = [C1, C4, C2];
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 340)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let n = groups.len();
        let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 22).into_font().color(&INK))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(80)
            .build_cartesian_2d(0.0..n as f64, 0.0..ymax * 1.15)
        else {
            return String::new();
        };
        let names: Vec<String> = groups.iter().map(|g| g.0.clone()).collect();
        let _ = chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(n * 2 + 1)
            .x_label_formatter(&|x| {
                let i = x.floor() as usize;
                if (x - i as f64 - 0.5).abs() < 0.01 && i < names.len() {
                    names[i].clone()
                } else {
                    String::new()
                }
            })
            .y_desc(y_label)
            .label_style(("sans-serif", 15).into_font().color(&INK))
            .axis_desc_style(("sans-serif", 16).into_font().color(&INK))
            .draw();
        for (k, c) in colours.iter().enumerate() {
            let label = groups[0].1.get(k).map_or("", |b| b.0);
            let bars: Vec<Rectangle<(f64, f64)>> = groups
                .iter()
                .enumerate()
                .filter_map(|(i, g)| g.1.get(k).map(|b| (i, b.1)))
                .map(|(i, v)| {
                    let x = i as f64 + 0.15 + k as f64 * 0.23;
                    Rectangle::new([(x, 0.0), (x + 0.21, v)], c.filled())
                })
                .collect();
            let c = *c;
            if let Ok(s) = chart.draw_series(bars) {
                s.label(label)
                    .legend(move |(x, y)| Rectangle::new([(x, y - 6), (x + 14, y + 6)], c.filled()));
            }
        }
        let _ = chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(INK)
            .label_font(("sans-serif", 15).into_font().color(&INK))
            .position(SeriesLabelPosition::UpperLeft)
            .draw();
        let _ = root.present();
    }
    svg
}

/// A histogram of values into `bins` bins.
fn histogram(title: &str, x_label: &str, values: &[f64], threshold: f64, bins: usize) -> String {
    let (lo, hi) = values.iter().fold((threshold, threshold), |(a, b), &v| (a.min(v), b.max(v)));
    if values.is_empty() {
        return format!("<p class=\"none\">{title}: no data.</p>");
    }
    let hi = if hi > lo { hi } else { lo + 1.0 };
    let w = (hi - lo) / bins as f64;
    let mut counts = vec![0u32; bins];
    for &v in values {
        counts[(((v - lo) / w) as usize).min(bins - 1)] += 1;
    }
    let top = *counts.iter().max().unwrap_or(&1) as f64;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (620, 280)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 19).into_font().color(&INK))
            .margin(10)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d(lo..hi + w * 0.01, 0.0..top * 1.15)
        else {
            return String::new();
        };
        let _ = chart
            .configure_mesh()
            .x_desc(x_label)
            .y_desc("runs")
            .y_label_formatter(&|y| format!("{y:.0}"))
            .label_style(("sans-serif", 14).into_font().color(&INK))
            .draw();
        let _ = chart.draw_series(counts.iter().enumerate().map(|(i, &c)| {
            let x = lo + i as f64 * w;
            Rectangle::new([(x, 0.0), (x + w * 0.95, c as f64)], C1.filled())
        }));
        let _ = chart.draw_series(std::iter::once(PathElement::new(
            vec![(threshold, 0.0), (threshold, top * 1.1)],
            C2.stroke_width(3),
        )));
        let _ = root.present();
    }
    svg
}

const STYLE: &str = "body{font-family:sans-serif;color:#141414;background:#fff;max-width:1000px;margin:1.5em auto;padding:0 1em}svg{max-width:100%;height:auto;display:block}\
h1{font-size:1.6em}h2{font-size:1.25em;margin-top:1.6em;border-bottom:2px solid #141414}\
table{border-collapse:collapse;font-size:0.95em}td,th{border:1px solid #888;padding:3px 8px;text-align:right}\
th{background:#eee}td:first-child,th:first-child{text-align:left}.fail{color:#b00;font-weight:bold}\
.pass{color:#070}.none{color:#555;font-style:italic}.note{color:#444;font-size:0.9em}";

fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;")
}

fn verdict_table(r: &Report) -> String {
    if r.verdicts.is_empty() {
        return "<p class=\"none\">No rules configured.</p>".into();
    }
    let mut t = String::from("<table><tr><th>rule</th><th>severity</th><th>verdict</th><th>worst</th><th>threshold</th><th>times raised</th></tr>");
    for v in &r.verdicts {
        let class = match v.verdict {
            Outcome::Fail => "fail",
            Outcome::Pass => "pass",
            Outcome::NoData => "none",
        };
        t += &format!(
            "<tr><td>{}</td><td>{}</td><td class=\"{class}\">{}</td><td>{}</td><td>{} {}</td><td>{}</td></tr>",
            esc(&v.rule),
            v.severity,
            v.verdict,
            v.worst.map(|w| format!("{w:.4}")).unwrap_or_else(|| "-".into()),
            v.direction,
            v.threshold,
            v.raised
        );
    }
    t + "</table>"
}

/// The HTML report of one run.
pub fn run_report(r: &Report, s: &Series) -> String {
    run_report_with(r, s, "")
}

/// A gate's table as an HTML section.
pub fn gate_section(rows: &[crate::gate::Row]) -> String {
    let f = |x: Option<f64>| x.map(|v| format!("{v:.5}")).unwrap_or_else(|| "-".into());
    let mut t = String::from("<h2>Gate against the baseline</h2><table><tr><th>metric</th><th>stat</th><th>baseline</th><th>candidate</th><th>allowed change</th><th>status</th></tr>");
    for r in rows {
        let class = match r.status {
            crate::gate::Status::Regressed => "fail",
            crate::gate::Status::Improved => "pass",
            _ => "",
        };
        t += &format!(
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{:.5}</td><td class=\"{class}\">{}</td></tr>",
            esc(&r.metric),
            esc(&r.stat),
            f(r.baseline),
            f(r.candidate),
            r.allowed,
            r.status
        );
    }
    t + "</table>"
}

/// The HTML report of one run with an extra section (a gate table) after the verdicts.
pub fn run_report_with(r: &Report, s: &Series, extra: &str) -> String {
    let gospa = line_chart(
        "GOSPA and its parts",
        "m (parts: m^p)",
        &[
            ("gospa", INK, s.get(Metric::Gospa)),
            ("localization", C1, s.get(Metric::GospaLocalization)),
            ("missed", C2, s.get(Metric::GospaMissed)),
            ("false", C4, s.get(Metric::GospaFalse)),
        ],
        &[],
    );
    let bands: Vec<(f64, f64, RGBColor)> = r.collisions.iter().map(|c| (c.start, c.end, C2)).collect();
    let clearance = line_chart(
        "Clearance (collisions shaded red)",
        "m",
        &[("clearance", C1, s.get(Metric::Clearance)), ("path clearance", C3, s.get(Metric::PathClearance))],
        &bands,
    );
    let ego = line_chart(
        "Ego pose error",
        "m",
        &[
            ("position", INK, s.get(Metric::EgoPositionError)),
            ("lateral (left +)", C1, s.get(Metric::EgoLateralError)),
            ("longitudinal (forward +)", C4, s.get(Metric::EgoLongitudinalError)),
        ],
        &[],
    );
    let groups: Vec<(String, Vec<(&str, f64)>)> = r
        .transport
        .iter()
        .filter_map(|(role, t)| {
            t.latency_s.map(|l| {
                (role.to_string(), vec![("p50", l.p50 * 1e3), ("p95", l.p95 * 1e3), ("p99", l.p99 * 1e3)])
            })
        })
        .collect();
    let latency = bar_chart("Latency per role (recv - stamp)", "ms", &groups);
    // Alert bands: one lane per rule, raised to cleared (or the end of the run).
    let end = r.duration_s.max(1.0);
    let mut spans: BTreeMap<String, Vec<(f64, f64)>> = BTreeMap::new();
    let mut open: BTreeMap<String, f64> = BTreeMap::new();
    for e in &r.alerts {
        let key = format!("{}{}", e.rule, e.role.as_ref().map(|x| format!(" [{x}]")).unwrap_or_default());
        if e.kind == crate::rules::AlertKind::Raised {
            open.insert(key, e.t);
        } else if let Some(t0) = open.remove(&key) {
            spans.entry(key).or_default().push((t0, e.t));
        }
    }
    let t_end = r.alerts.iter().map(|e| e.t).fold(end, f64::max);
    for (k, t0) in open {
        spans.entry(k).or_default().push((t0, t_end));
    }
    let lanes: Vec<(String, Vec<(f64, f64)>)> = spans.into_iter().collect();
    let alerts = if lanes.is_empty() {
        "<p class=\"none\">No alerts were raised.</p>".to_string()
    } else {
        let t0 = r.alerts.iter().map(|e| e.t).fold(f64::INFINITY, f64::min).min(0.0);
        let mut svg = String::new();
        {
            let h = 80 + 34 * lanes.len() as u32;
            let root = SVGBackend::with_string(&mut svg, (960, h)).into_drawing_area();
            let _ = root.fill(&WHITE);
            let names: Vec<String> = lanes.iter().map(|l| l.0.clone()).collect();
            if let Ok(mut chart) = ChartBuilder::on(&root)
                .caption(
                    "Alerts raised (bands from raise to clear)",
                    ("sans-serif", 22).into_font().color(&INK),
                )
                .margin(12)
                .x_label_area_size(40)
                .y_label_area_size(230)
                .build_cartesian_2d(t0..t_end, 0.0..lanes.len() as f64)
            {
                let _ = chart
                    .configure_mesh()
                    .x_desc("time (s)")
                    .y_labels(lanes.len() * 2 + 1)
                    .y_label_formatter(&|y| {
                        let i = y.floor() as usize;
                        if (y - i as f64 - 0.5).abs() < 0.01 && i < names.len() {
                            names[i].clone()
                        } else {
                            String::new()
                        }
                    })
                    .label_style(("sans-serif", 14).into_font().color(&INK))
                    .disable_y_mesh()
                    .draw();
                for (i, (_, sp)) in lanes.iter().enumerate() {
                    let _ = chart.draw_series(sp.iter().map(|&(a, b)| {
                        Rectangle::new(
                            [(a, i as f64 + 0.2), (b.max(a + (t_end - t0) * 0.003), i as f64 + 0.8)],
                            C2.filled(),
                        )
                    }));
                }
            }
            let _ = root.present();
        }
        svg
    };
    format!(
        "<!doctype html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>plumbline report</title><style>{STYLE}</style></head><body>\
<h1>plumbline report: {}</h1><p class=\"note\">{:.1} s of stamps; {} tracking steps, {} ego steps; {} records, {} rejected; {} collision(s). \
plumbline {} &middot; config {} &middot; input {}</p>\
<h2>Rule verdicts</h2>{}{extra}<h2>Tracking</h2>{gospa}<h2>Clearance</h2>{clearance}<h2>Localization</h2>{ego}<h2>Transport</h2>{latency}<h2>Alerts</h2>{alerts}\
<p class=\"note\">A measurement and alerting aid, not a safety function.</p></body></html>\n",
        esc(&r.input),
        r.duration_s,
        r.steps.tracking.evaluated,
        r.steps.ego.evaluated,
        r.records.accepted,
        r.records.rejected,
        r.collisions.len(),
        r.version,
        esc(&r.config_digest),
        esc(&r.input_digest),
        verdict_table(r),
    )
}

/// The HTML report of a campaign: one histogram of the worst value per rule.
pub fn campaign_report(agg: &crate::campaign::CampaignReport, rules: &[crate::rules::Rule]) -> String {
    let mut body = String::new();
    body += "<table><tr><th>rule</th><th>severity</th><th>failures</th><th>failure rate</th><th>95% interval (Clopper-Pearson)</th></tr>";
    for r in &agg.rules {
        match &r.failure_rate {
            Some(x) => {
                body += &format!(
                    "<tr><td>{}</td><td>{}</td><td>{}/{}</td><td>{:.4}</td><td>{:.4} to {:.4}</td></tr>",
                    esc(&r.rule),
                    r.severity,
                    x.failures,
                    x.runs,
                    x.rate,
                    x.lower,
                    x.upper
                )
            }
            None => {
                body += &format!(
                    "<tr><td>{}</td><td>{}</td><td colspan=\"3\">no data</td></tr>",
                    esc(&r.rule),
                    r.severity
                )
            }
        }
    }
    body += "</table>";
    for (r, rule) in agg.rules.iter().zip(rules) {
        let x = format!(
            "worst {} of {} over {} windows",
            rule.stat.name(),
            rule.metric.name(),
            rule.window_label
        );
        body += &histogram(
            &format!("{}: worst value per run (red line: threshold)", r.rule),
            &x,
            &r.worst_values,
            rule.threshold,
            20,
        );
    }
    format!(
        "<!doctype html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>plumbline campaign</title><style>{STYLE}</style></head><body>\
<h1>plumbline campaign: {} runs</h1><p class=\"note\">{} run(s) with a critical failure; {} unreadable.</p><h2>Rules</h2>{body}\
<p class=\"note\">A measurement and alerting aid, not a safety function.</p></body></html>\n",
        agg.runs,
        agg.critical_failures,
        agg.unreadable.len()
    )
}
