//! `report.html`: one self-contained file (inline SVG figures, inline CSS, no scripts, no
//! external assets) assembled from plain data — a [`Report`] of text, key–value facts,
//! [`Table`]s and [`ReportFigure`]s (SVG strings from [`super::to_svg`]).
//!
//! Sections, in order: site summary; recommended layout (table, CSV and GeoJSON as
//! downloadable `data:` links and shown in `<details>`); why this layout (the justification
//! sentences, as given); studies; what one lost sensor costs; assumptions; cautions (the
//! standard ones below always, plus any the caller adds). The builder only arranges what it
//! is given: it computes no statistic and words no recommendation itself.

use std::fmt::Write as _;
use std::path::Path;

use super::html::{data_uri, escape, inline_svg, style_sheet};
use super::RenderError;

/// A figure in the report: an SVG document and its caption.
#[derive(Debug, Clone)]
pub struct ReportFigure {
    pub svg: String,
    pub caption: String,
}

/// A table: header cells, rows of text cells; columns listed in `numeric` are right-aligned.
#[derive(Debug, Clone, Default)]
pub struct Table {
    pub caption: String,
    pub header: Vec<String>,
    pub rows: Vec<Vec<String>>,
    pub numeric: Vec<usize>,
}

/// A study (or any titled block): paragraphs, figures, tables.
#[derive(Debug, Clone, Default)]
pub struct Study {
    pub title: String,
    pub paragraphs: Vec<String>,
    pub figures: Vec<ReportFigure>,
    pub tables: Vec<Table>,
}

/// Everything the report shows.
#[derive(Debug, Clone, Default)]
pub struct Report {
    /// e.g. "Sensor plan for harbour-quay".
    pub title: String,
    /// One line under the title (tool version, date, seed).
    pub subtitle: String,
    /// Site facts: name, domain, points, channels, candidates, kinds, zones...
    pub site_facts: Vec<(String, String)>,
    /// Figures of the site itself (site map, modes, energies).
    pub site_figures: Vec<ReportFigure>,
    pub layout_table: Table,
    /// The layout as `layout.csv` text.
    pub layout_csv: String,
    /// The layout as GeoJSON text, when the site has a geographic origin.
    pub layout_geojson: Option<String>,
    pub layout_figures: Vec<ReportFigure>,
    /// Plain sentences: why this layout, what the grid baseline would need, the gap.
    pub justification: Vec<String>,
    pub studies: Vec<Study>,
    /// What one lost sensor costs (the worst single failure and its effect).
    pub sensor_loss: Option<Study>,
    /// Model, filter, noise, sampling, number of runs, seed, ...
    pub assumptions: Vec<(String, String)>,
    /// Cautions beyond the standard ones.
    pub extra_cautions: Vec<String>,
}

/// Cautions every report carries.
pub const STANDARD_CAUTIONS: [&str; 5] = [
    "This report is a planning aid computed from a reduced-order model and simulated \
     measurements. It is not a certified design and does not replace a site survey.",
    "Instrument siting must follow the exposure rules of WMO-No. 8 (Guide to Instruments and \
     Methods of Observation) and local codes; masts, roofs and fixings need structural review.",
    "Near runways, helipads, cranes and berths, aviation and port authority rules govern what \
     may be mounted where and how high; obtain their approval before installation.",
    "Scanning lidars must be operated within their laser-safety class limits (IEC 60825-1) \
     and any local restrictions on beam paths near people, aircraft and vessels.",
    "Results depend on the flow data, model, noise and sampling assumptions listed above. \
     Have the plan reviewed by licensed practitioners before decisions on crane stops, \
     aviation or structures rely on it.",
];

fn facts(out: &mut String, items: &[(String, String)]) {
    out.push_str("<dl class=\"facts\">\n");
    for (k, v) in items {
        let _ = writeln!(out, "<dt>{}</dt><dd>{}</dd>", escape(k), escape(v));
    }
    out.push_str("</dl>\n");
}

fn figure(out: &mut String, fig: &ReportFigure) {
    let _ = writeln!(
        out,
        "<figure>\n{}\n<figcaption>{}</figcaption>\n</figure>",
        inline_svg(&fig.svg, &fig.caption),
        escape(&fig.caption)
    );
}

fn table(out: &mut String, t: &Table) {
    out.push_str("<table>\n");
    if !t.caption.is_empty() {
        let _ = writeln!(out, "<caption>{}</caption>", escape(&t.caption));
    }
    let class = |idx: usize| {
        if t.numeric.contains(&idx) {
            " class=\"num\""
        } else {
            ""
        }
    };
    out.push_str("<thead><tr>");
    for (idx, h) in t.header.iter().enumerate() {
        let _ = write!(out, "<th{}>{}</th>", class(idx), escape(h));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for row in &t.rows {
        out.push_str("<tr>");
        for (idx, cell) in row.iter().enumerate() {
            let _ = write!(out, "<td{}>{}</td>", class(idx), escape(cell));
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table>\n");
}

fn study(out: &mut String, s: &Study, level: u8) {
    let _ = writeln!(out, "<h{level}>{}</h{level}>", escape(&s.title));
    for p in &s.paragraphs {
        let _ = writeln!(out, "<p>{}</p>", escape(p));
    }
    for f in &s.figures {
        figure(out, f);
    }
    for t in &s.tables {
        table(out, t);
    }
}

impl Report {
    /// The complete HTML document.
    pub fn to_html(&self) -> String {
        let mut out = String::with_capacity(1 << 16);
        let _ = write!(
            out,
            "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
             <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
             <title>{}</title>\n<style>{}</style>\n</head>\n<body>\n<main>\n",
            escape(&self.title),
            style_sheet()
        );
        let _ = writeln!(
            out,
            "<header><h1>{}</h1><p>{}</p></header>",
            escape(&self.title),
            escape(&self.subtitle)
        );
        let mut toc = vec![
            ("site", "Site summary"),
            ("layout", "Recommended layout"),
            ("why", "Why this layout"),
        ];
        if !self.studies.is_empty() {
            toc.push(("studies", "Studies"));
        }
        if self.sensor_loss.is_some() {
            toc.push(("loss", "What one lost sensor costs"));
        }
        toc.push(("assumptions", "Assumptions"));
        toc.push(("cautions", "Cautions"));
        out.push_str("<nav><ol>");
        for (id, name) in &toc {
            let _ = write!(out, "<li><a href=\"#{id}\">{name}</a></li>");
        }
        out.push_str("</ol></nav>\n");

        out.push_str("<section id=\"site\">\n<h2>Site summary</h2>\n");
        facts(&mut out, &self.site_facts);
        for f in &self.site_figures {
            figure(&mut out, f);
        }
        out.push_str("</section>\n");

        out.push_str("<section id=\"layout\">\n<h2>Recommended layout</h2>\n");
        table(&mut out, &self.layout_table);
        out.push_str("<p class=\"downloads\">");
        let _ = write!(
            out,
            "<a download=\"layout.csv\" href=\"{}\">Download layout.csv</a>",
            data_uri("text/csv", &self.layout_csv)
        );
        if let Some(geo) = &self.layout_geojson {
            let _ = write!(
                out,
                "<a download=\"layout.geojson\" href=\"{}\">Download layout.geojson</a>",
                data_uri("application/geo+json", geo)
            );
        }
        out.push_str("</p>\n");
        let _ = writeln!(
            out,
            "<details><summary>layout.csv</summary><pre>{}</pre></details>",
            escape(&self.layout_csv)
        );
        if let Some(geo) = &self.layout_geojson {
            let _ = writeln!(
                out,
                "<details><summary>layout.geojson (RFC 7946, WGS84, longitude before latitude)</summary><pre>{}</pre></details>",
                escape(geo)
            );
        }
        for f in &self.layout_figures {
            figure(&mut out, f);
        }
        out.push_str("</section>\n");

        out.push_str("<section id=\"why\">\n<h2>Why this layout</h2>\n");
        for p in &self.justification {
            let _ = writeln!(out, "<p>{}</p>", escape(p));
        }
        out.push_str("</section>\n");

        if !self.studies.is_empty() {
            out.push_str("<section id=\"studies\">\n<h2>Studies</h2>\n");
            for s in &self.studies {
                study(&mut out, s, 3);
            }
            out.push_str("</section>\n");
        }
        if let Some(loss) = &self.sensor_loss {
            out.push_str("<section id=\"loss\">\n<h2>What one lost sensor costs</h2>\n");
            let inner = Study {
                title: String::new(),
                ..loss.clone()
            };
            if !loss.title.is_empty() {
                let _ = writeln!(out, "<p><strong>{}</strong></p>", escape(&loss.title));
            }
            for p in &inner.paragraphs {
                let _ = writeln!(out, "<p>{}</p>", escape(p));
            }
            for f in &inner.figures {
                figure(&mut out, f);
            }
            for t in &inner.tables {
                table(&mut out, t);
            }
            out.push_str("</section>\n");
        }

        out.push_str("<section id=\"assumptions\">\n<h2>Assumptions</h2>\n");
        facts(&mut out, &self.assumptions);
        out.push_str("</section>\n");

        out.push_str(
            "<section id=\"cautions\">\n<h2>Cautions</h2>\n<div class=\"cautions\"><ul>\n",
        );
        for c in STANDARD_CAUTIONS
            .iter()
            .map(|s| s.to_string())
            .chain(self.extra_cautions.iter().cloned())
        {
            let _ = writeln!(out, "<li>{}</li>", escape(&c));
        }
        out.push_str("</ul></div>\n</section>\n");
        let _ = writeln!(
            out,
            "<footer>Made with crowsnest {}. Figures are inline SVG; this file needs no network access.</footer>",
            env!("CARGO_PKG_VERSION")
        );
        out.push_str("</main>\n</body>\n</html>\n");
        out
    }
}

/// Writes the report to `path` atomically.
pub fn write_report(path: &Path, report: &Report) -> Result<(), RenderError> {
    let html = report.to_html();
    crate::io::atomic::write_bytes_atomic(path, html.as_bytes())?;
    Ok(())
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::needless_range_loop)]
mod tests {
    use super::*;

    #[test]
    fn report_has_every_section_and_no_external_reference() {
        let report = Report {
            title: "Plan <test>".into(),
            layout_csv: "rank,candidate\n1,m1\n".into(),
            layout_geojson: Some("{\"type\":\"FeatureCollection\",\"features\":[]}".into()),
            justification: vec!["Because & therefore.".into()],
            studies: vec![Study {
                title: "Count".into(),
                ..Default::default()
            }],
            sensor_loss: Some(Study::default()),
            assumptions: vec![("seed".into(), "7".into())],
            ..Default::default()
        };
        let html = report.to_html();
        for id in [
            "site",
            "layout",
            "why",
            "studies",
            "loss",
            "assumptions",
            "cautions",
        ] {
            assert!(
                html.contains(&format!("<section id=\"{id}\">")),
                "missing section {id}"
            );
        }
        assert!(html.contains("Plan &lt;test&gt;"));
        assert!(html.contains("Because &amp; therefore."));
        assert!(html.contains("WMO-No. 8"));
        assert!(html.contains("download=\"layout.geojson\""));
        for banned in [
            "<script", "http://", "https://", "src=\"", "@import", "url(",
        ] {
            assert!(!html.contains(banned), "report contains {banned}");
        }
    }
}
