//! Turns a [`PlanOutcome`] into the figures and the [`Report`] of `crowsnest plan`: the site
//! map with the recommended layout, the modes and energies, error against time, error against
//! sensor count per method, the cost–error front, the condition curves (noise, sampling
//! interval, background error, sensor losses), the single-loss table, and the justification in
//! plain sentences. It words results but chooses nothing: the recommendation comes from
//! `sweep`.

use crate::basis::Basis;
use crate::io::{Measurement, Site};
use crate::select::Layout;
use crate::sweep::{CellOutcome, Goal, PlanOutcome, StudyKind};
use crate::twin::ScoreResult;

use super::curves::{CurveChart, RefLine, Series};
use super::energy::EnergyChart;
use super::field::FieldLayer;
use super::gallery::ModeGallery;
use super::palette::SeriesStyle;
use super::pareto::{ParetoChart, ParetoGroup, ParetoPoint};
use super::report::{Report, ReportFigure, Study, Table};
use super::sitemap::{MapBeam, MapSensor, SiteMap};
use super::{to_svg, RenderError};

/// A figure of the plan, kept as SVG for the report and as PNG for the output folder.
pub struct NamedFigure {
    /// File stem, e.g. `site-map`.
    pub name: String,
    pub svg: String,
    pub png: Vec<u8>,
    pub caption: String,
}

/// Figures and report text of a plan.
pub struct PlanDocument {
    pub figures: Vec<NamedFigure>,
    pub report: Report,
}

/// What the report states besides the outcome (assumptions and provenance).
pub struct PlanFacts {
    pub subtitle: String,
    pub assumptions: Vec<(String, String)>,
    pub layout_csv: String,
    pub layout_geojson: Option<String>,
    pub warnings: Vec<String>,
}

fn figure<F: super::Figure>(
    fig: &F,
    name: &str,
    caption: impl Into<String>,
) -> Result<NamedFigure, RenderError> {
    Ok(NamedFigure {
        name: name.to_string(),
        svg: to_svg(fig, name)?,
        png: super::to_png(fig, name)?,
        caption: caption.into(),
    })
}

fn report_figure(f: &NamedFigure) -> ReportFigure {
    ReportFigure {
        svg: f.svg.clone(),
        caption: f.caption.clone(),
    }
}

/// Velocity channels shown on the map background (all channels when none is a velocity).
fn velocity_channels(site: &Site) -> Vec<usize> {
    let v: Vec<usize> = site
        .channels
        .iter()
        .enumerate()
        .filter(|(_, c)| c.role != crate::io::ChannelRole::Scalar)
        .map(|(i, _)| i)
        .collect();
    if v.is_empty() {
        (0..site.channels.len()).collect()
    } else {
        v
    }
}

/// The site map of a layout, with its beams.
pub fn layout_map<'a>(site: &'a Site, basis: &Basis, layout: &Layout, title: &str) -> SiteMap<'a> {
    let mut map = SiteMap::new(site, title);
    map.background = Some(FieldLayer::std_from_basis(
        site,
        basis,
        &velocity_channels(site),
    ));
    map.sensors = MapSensor::from_layout(layout);
    for e in &layout.entries {
        if matches!(site.kinds[e.kind_idx].measurement, Measurement::Beam(_)) {
            for trace in crate::sensors::beam_traces(site, e.candidate_idx, e.kind_idx) {
                map.beams.push(MapBeam {
                    kind_idx: e.kind_idx,
                    origin: trace.origin,
                    stop: trace.end,
                    gates: trace.gate_centres.clone(),
                });
            }
        }
    }
    map
}

fn time_series(label: &str, score: &ScoreResult, free: bool) -> Series {
    let x = score.curves.iter().map(|c| c.time_s).collect();
    let (mean, sd): (Vec<f64>, Vec<f64>) = score
        .curves
        .iter()
        .map(|c| {
            if free {
                (c.free_mean_rmse, c.free_std_rmse)
            } else {
                (c.mean_rmse, c.std_rmse)
            }
        })
        .unzip();
    Series::with_sd(label, x, mean, &sd)
}

/// One series per method of a study: x = the setting (or sensor count), mean ± 1 std.
fn study_series(
    outcomes: &[CellOutcome],
    study: StudyKind,
    x_of: fn(&CellOutcome) -> f64,
) -> Vec<Series> {
    let mut methods: Vec<&str> = Vec::new();
    for o in outcomes.iter().filter(|o| o.cell.study == study) {
        if !methods.contains(&o.cell.method.as_str()) {
            methods.push(&o.cell.method);
        }
    }
    methods
        .iter()
        .enumerate()
        .map(|(i, m)| {
            let cells: Vec<&CellOutcome> = outcomes
                .iter()
                .filter(|o| o.cell.study == study && o.cell.method == *m)
                .collect();
            let series = Series::with_sd(
                method_label(m),
                cells.iter().map(|o| x_of(o)).collect(),
                cells.iter().map(|o| o.time_mean_rmse.mean).collect(),
                &cells
                    .iter()
                    .map(|o| o.time_mean_rmse.std)
                    .collect::<Vec<_>>(),
            );
            match *m {
                "grid" => series.styled(SeriesStyle::baseline()),
                "random" => series.styled(SeriesStyle {
                    marker: SeriesStyle::nth(i).marker,
                    ..SeriesStyle::baseline()
                }),
                _ => series,
            }
        })
        .collect()
}

/// Words for a method name.
pub fn method_label(method: &str) -> String {
    match method {
        "greedy" => "greedy".into(),
        "recommended" => "recommended layout".into(),
        "exchange" => "greedy + exchange".into(),
        "qr" => "pivoted QR".into(),
        "grid" => "even grid (by hand)".into(),
        "random" => "random (best of draws)".into(),
        other => other.into(),
    }
}

fn fmt(v: f64) -> String {
    if !v.is_finite() {
        "–".into()
    } else if v.abs() >= 100.0 {
        format!("{v:.0}")
    } else if v.abs() >= 1.0 {
        format!("{v:.2}")
    } else {
        format!("{v:.3}")
    }
}

/// An amount of money, digits grouped in threes, with the currency label when there is one.
pub fn money(v: f64, currency: &str) -> String {
    let whole = format!("{:.0}", v.abs());
    let mut grouped = String::new();
    for (i, ch) in whole.chars().enumerate() {
        if i > 0 && (whole.len() - i) % 3 == 0 {
            grouped.push('\u{202f}');
        }
        grouped.push(ch);
    }
    let sign = if v < 0.0 { "−" } else { "" };
    if currency.is_empty() {
        format!("{sign}{grouped}")
    } else {
        format!("{sign}{grouped} {currency}")
    }
}

/// Builds every figure and the report of a plan.
pub fn plan_document(
    site: &Site,
    basis: &Basis,
    outcome: &PlanOutcome,
    facts: PlanFacts,
) -> Result<PlanDocument, RenderError> {
    let currency = site.currency.as_str();
    let unit = site
        .channels
        .first()
        .map(|c| c.unit.clone())
        .unwrap_or_default();
    let rec = &outcome.recommendation;
    let chosen = &rec.chosen;
    let layout = &outcome.ranking.layout;
    let mut figures = Vec::new();

    let map = layout_map(site, basis, layout, "Recommended layout");
    figures.push(figure(&map, "site-map", "Recommended sensors, numbered by rank, over the standard deviation of the wind speed in the reduced model. Hatched: exclusion zones; grey: obstacles; rings: existing sensors.")?);
    let gallery = ModeGallery::from_basis(site, basis, velocity_channels(site)[0], 6);
    figures.push(figure(
        &gallery,
        "modes",
        "Leading POD modes of the first velocity channel with their energy fractions.",
    )?);
    let energy = EnergyChart::new(basis.energies.clone(), basis.n_modes());
    figures.push(figure(
        &energy,
        "energies",
        "POD energy per mode and cumulative fraction; the modes kept in the model are marked.",
    )?);

    let mut time_chart = CurveChart::new(
        "Field error over the test span",
        "time (s)",
        format!("field RMSE ({unit})"),
    );
    time_chart.series.push(time_series(
        "recommended layout",
        &outcome.recommended_score,
        false,
    ));
    if let Some((_, grid)) = &outcome.grid_score {
        time_chart
            .series
            .push(
                time_series("even grid, same count", grid, false).styled(SeriesStyle {
                    dashed: false,
                    ..SeriesStyle::baseline()
                }),
            );
    }
    time_chart.series.push(
        time_series("free run (no readings)", &outcome.recommended_score, true)
            .styled(SeriesStyle::baseline()),
    );
    figures.push(figure(
        &time_chart,
        "error-time",
        "Mean ± 1 std over the Monte Carlo runs of the field RMSE at each step.",
    )?);

    let mut count_chart = CurveChart::new(
        "Error against number of new sensors",
        "new sensors (count, existing sensors kept besides)",
        format!("time-mean field RMSE ({unit})"),
    );
    count_chart.series = study_series(&outcome.design, StudyKind::Count, |o| o.cell.setting);
    count_chart.integer_x = true;
    if let Goal::TargetRmse(t) = rec.goal {
        count_chart.ref_lines.push(RefLine {
            value: t,
            label: format!("target {} {unit}", fmt(t)),
        });
    }
    figures.push(figure(&count_chart, "error-count", "Time-mean field RMSE (mean ± 1 std over runs) for each selection method and the two baselines.")?);

    let mut pareto = ParetoChart::new(
        "Cost against error",
        cost_label(currency),
        format!("time-mean field RMSE ({unit})"),
    );
    let mut methods: Vec<&str> = Vec::new();
    for o in outcome.design.iter() {
        if !methods.contains(&o.cell.method.as_str()) {
            methods.push(&o.cell.method);
        }
    }
    let point = |o: &CellOutcome| ParetoPoint {
        cost: o.cost,
        mean: o.time_mean_rmse.mean,
        lo: o.time_mean_rmse.mean - o.time_mean_rmse.std,
        hi: o.upper_band(),
    };
    for m in &methods {
        pareto.groups.push(ParetoGroup {
            label: method_label(m),
            points: outcome
                .design
                .iter()
                .filter(|o| o.cell.method == *m && o.time_mean_rmse.mean.is_finite())
                .map(point)
                .collect(),
            style: None,
        });
    }
    if let Goal::TargetRmse(t) = rec.goal {
        pareto.target = Some(RefLine {
            value: t,
            label: format!("target {} {unit}", fmt(t)),
        });
    }
    pareto.highlight = Some((point(chosen), "recommended".into()));
    figures.push(figure(&pareto, "pareto", "Every scored layout of the count and budget studies; the front joins the layouts no other beats on both cost and error.")?);

    let conditions = [
        (
            StudyKind::Noise,
            "noise",
            "Error against sensor noise",
            "noise multiplier (× each kind's standard deviation)",
        ),
        (
            StudyKind::Interval,
            "interval",
            "Error against sampling interval",
            "interval multiplier (× each kind's sampling interval)",
        ),
        (
            StudyKind::Background,
            "background",
            "Error against background error",
            "",
        ),
        (
            StudyKind::Loss,
            "loss",
            "Error after losing sensors (worst first)",
            "sensors lost, worst first (count)",
        ),
    ];
    let n_kept = layout.entries.iter().filter(|e| e.kept).count();
    let n_new = layout.entries.len() - n_kept;
    let kept_words = if n_kept > 0 {
        format!(
            " plus the {n_kept} existing sensor{}",
            if n_kept == 1 { "" } else { "s" }
        )
    } else {
        String::new()
    };
    let layouts = format!(
        "the recommended layout ({n_new} new sensor{}{kept_words}, {}) and an evenly spaced grid of {n_new} new sensor{}{kept_words}",
        if n_new == 1 { "" } else { "s" },
        money(chosen.cost, currency),
        if n_new == 1 { "" } else { "s" },
    );
    let mut condition_figures = Vec::new();
    for (study, name, title, x_label) in conditions {
        let series = study_series(&outcome.conditions, study, |o| o.cell.setting);
        if series.is_empty() {
            continue;
        }
        let x_label = if study == StudyKind::Background {
            format!("background error, field RMSE of the initial state ({unit})")
        } else {
            x_label.to_string()
        };
        let mut chart = CurveChart::new(title, x_label, format!("time-mean field RMSE ({unit})"));
        chart.series = series;
        if matches!(study, StudyKind::Noise | StudyKind::Interval) {
            chart.log_x = true;
        }
        if study == StudyKind::Loss {
            chart.integer_x = true;
        }
        let f = figure(
            &chart,
            name,
            format!("{title}: {layouts}; mean ± 1 std over runs."),
        )?;
        condition_figures.push(f);
    }

    let justification = justify(currency, &unit, outcome);

    let layout_table = Table {
        caption: format!(
            "Recommended layout, in the order the planner chose it (gain and criterion: log det of the posterior information, nats; costs in {})",
            currency_words(currency)
        ),
        header: [
            "rank",
            "candidate",
            "kind",
            "x (m)",
            "y (m)",
            "gain",
            "criterion",
            format!("cumulative cost ({})", cost_unit(currency)).as_str(),
            "existing",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect(),
        rows: layout
            .entries
            .iter()
            .map(|e| {
                let c = &site.candidates[e.candidate_idx];
                vec![
                    e.rank.to_string(),
                    c.id.clone(),
                    site.kinds[e.kind_idx].name.clone(),
                    fmt(c.position[0]),
                    fmt(c.position[1]),
                    fmt(e.marginal_gain),
                    fmt(e.cumulative_criterion),
                    money(e.cumulative_cost, ""),
                    if e.kept { "yes".into() } else { String::new() },
                ]
            })
            .collect(),
        numeric: vec![0, 3, 4, 5, 6, 7],
    };

    let mut studies = Vec::new();
    let count_table = Table {
        caption: format!(
            "Count and budget studies: setting is the number of new sensors or the budget ({}); sensors include the existing ones; time-mean field RMSE in {unit} over the Monte Carlo runs; costs in {}",
            cost_unit(currency),
            currency_words(currency)
        ),
        header: [
            "study",
            "method",
            "setting",
            "sensors",
            cost_label(currency).as_str(),
            format!("mean ({unit})").as_str(),
            format!("std ({unit})").as_str(),
            format!("p95 ({unit})").as_str(),
            "ratio to free run",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect(),
        rows: outcome
            .design
            .iter()
            .map(|o| {
                vec![
                    o.cell.study.to_string(),
                    method_label(&o.cell.method),
                    match o.cell.study {
                        StudyKind::Budget => money(o.cell.setting, ""),
                        _ => format!("{:.0} new", o.cell.setting),
                    },
                    o.n_sensors.to_string(),
                    money(o.cost, ""),
                    fmt(o.time_mean_rmse.mean),
                    fmt(o.time_mean_rmse.std),
                    fmt(o.time_mean_rmse.p95),
                    fmt(o.ratio_to_free()),
                ]
            })
            .collect(),
        numeric: vec![2, 3, 4, 5, 6, 7, 8],
    };
    studies.push(Study {
        title: "How many sensors".into(),
        paragraphs: vec![format!(
            "Each layout was scored by {} Monte Carlo twin experiments: the reduced model, started from a perturbed state, assimilates noisy readings of the full simulated field taken by exactly these sensors at their sampling rates, and the recovered field is compared with the truth at every step.",
            chosen.n_runs
        )],
        figures: figures
            .iter()
            .filter(|f| matches!(f.name.as_str(), "error-count" | "pareto" | "error-time"))
            .map(report_figure)
            .collect(),
        tables: vec![count_table],
    });
    if !condition_figures.is_empty() {
        studies.push(Study {
            title: "How robust".into(),
            paragraphs: vec![format!(
                "Two layouts under changed conditions: {layouts}. Each is scored with noisier (or quieter) sensors, slower sampling, a worse (or better) initial state, and after losing the sensors whose absence lowers the information most, found one at a time. At ×1 and with no sensor lost the recommended layout scores exactly as in the count and budget studies (each layout keeps one seed stream)."
            )],
            figures: condition_figures.iter().map(report_figure).collect(),
            tables: Vec::new(),
        });
    }

    let sensor_loss = (!outcome.single_losses.is_empty()).then(|| {
        let base = outcome.recommended_score.mean_rmse.mean;
        Study {
            // The section heading already says it.
            title: String::new(),
            paragraphs: vec![format!(
                "Each sensor of the recommended layout removed on its own, worst first. With all sensors the time-mean field RMSE is {} {unit}; the increase is relative to that.",
                fmt(base)
            )],
            figures: Vec::new(),
            tables: vec![Table {
                caption: "Time-mean field RMSE with one sensor lost".into(),
                header: [
                    "lost sensor",
                    "kind",
                    format!("mean ({unit})").as_str(),
                    format!("std ({unit})").as_str(),
                    "increase",
                ]
                    .iter()
                    .map(|s| s.to_string())
                    .collect(),
                rows: outcome
                    .single_losses
                    .iter()
                    .map(|l| {
                        vec![
                            l.candidate.clone(),
                            l.kind.clone(),
                            fmt(l.score.mean_rmse.mean),
                            fmt(l.score.mean_rmse.std),
                            format!("{:+.1} %", 100.0 * (l.score.mean_rmse.mean / base - 1.0)),
                        ]
                    })
                    .collect(),
                numeric: vec![2, 3, 4],
            }],
        }
    });

    let mut site_facts = vec![
        ("site".to_string(), site.name.clone()),
        ("domain".to_string(), domain_text(site)),
        (
            "channels".to_string(),
            site.channels
                .iter()
                .map(|c| format!("{} ({})", c.name, c.unit))
                .collect::<Vec<_>>()
                .join(", "),
        ),
        (
            "candidate mounts".to_string(),
            site.candidates.len().to_string(),
        ),
        (
            "sensor kinds".to_string(),
            site.kinds
                .iter()
                .map(|k| k.name.clone())
                .collect::<Vec<_>>()
                .join(", "),
        ),
        ("exclusion zones".to_string(), site.zones.len().to_string()),
        (
            "existing sensors".to_string(),
            site.existing.len().to_string(),
        ),
        (
            "POD modes kept".to_string(),
            format!(
                "{} ({:.1} % of the fluctuation energy)",
                basis.n_modes(),
                100.0 * basis.captured_fraction()
            ),
        ),
    ];
    const SHOWN_WARNINGS: usize = 5;
    for w in facts.warnings.iter().take(SHOWN_WARNINGS) {
        site_facts.push(("warning".into(), w.clone()));
    }
    if facts.warnings.len() > SHOWN_WARNINGS {
        site_facts.push((
            "warning".into(),
            format!(
                "… and {} more (blocked beams, excluded candidates); `crowsnest check` and the plan's terminal output list them all",
                facts.warnings.len() - SHOWN_WARNINGS
            ),
        ));
    }

    let report = Report {
        title: format!("Sensor plan for {}", site.name),
        subtitle: facts.subtitle,
        site_facts,
        site_figures: figures
            .iter()
            .filter(|f| matches!(f.name.as_str(), "modes" | "energies"))
            .map(report_figure)
            .collect(),
        layout_table,
        layout_csv: facts.layout_csv,
        layout_geojson: facts.layout_geojson,
        layout_figures: figures
            .iter()
            .filter(|f| f.name == "site-map")
            .map(report_figure)
            .collect(),
        justification,
        studies,
        sensor_loss,
        assumptions: facts.assumptions,
        extra_cautions: Vec::new(),
    };
    figures.extend(condition_figures);
    Ok(PlanDocument { figures, report })
}

fn domain_text(site: &Site) -> String {
    match &site.domain {
        crate::io::Domain::Grid(g) => format!(
            "{} × {} grid, {} m × {} m spacing ({} m × {} m)",
            g.nx,
            g.ny,
            g.spacing[0],
            g.spacing[1],
            fmt(g.spacing[0] * (g.nx as f64 - 1.0)),
            fmt(g.spacing[1] * (g.ny as f64 - 1.0))
        ),
        crate::io::Domain::Points(p) => format!("{} points", p.points.len()),
    }
}

/// The justification, in plain sentences.
fn justify(currency: &str, unit: &str, outcome: &PlanOutcome) -> Vec<String> {
    let rec = &outcome.recommendation;
    let chosen = &rec.chosen;
    let layout = &outcome.ranking.layout;
    let n_existing = layout.entries.iter().filter(|e| e.kept).count();
    let n_new = layout.entries.len() - n_existing;
    let mut out = Vec::new();
    let existing = if n_existing > 0 {
        format!(
            " plus the {n_existing} existing sensor{} kept",
            if n_existing == 1 { "" } else { "s" }
        )
    } else {
        String::new()
    };
    out.push(format!(
        "Recommended: {n_new} new sensor{}{existing}, chosen by {} selection, for {} in total.",
        if n_new == 1 { "" } else { "s" },
        method_label(&chosen.cell.method),
        money(chosen.cost, currency)
    ));
    let t = &chosen.time_mean_rmse;
    match rec.goal {
        Goal::TargetRmse(target) if rec.met => out.push(format!(
            "Over {} Monte Carlo twin runs the time-mean field RMSE is {} ± {} {unit} (mean ± 1 std); its upper band {} {unit} meets the target of {} {unit}, and no cheaper studied layout does.",
            chosen.n_runs, fmt(t.mean), fmt(t.std), fmt(chosen.upper_band()), fmt(target)
        )),
        Goal::TargetRmse(target) => out.push(format!(
            "No studied layout meets the target of {} {unit}: the best reaches an upper band of {} {unit} ({} ± {} {unit}). More sensors, quieter kinds or a larger candidate set are needed.",
            fmt(target), fmt(chosen.upper_band()), fmt(t.mean), fmt(t.std)
        )),
        Goal::Budget(budget) if rec.met => out.push(format!(
            "Within the budget of {} it gives the lowest time-mean field RMSE of the studied layouts: {} ± {} {unit} (mean ± 1 std over {} runs).",
            money(budget, currency), fmt(t.mean), fmt(t.std), chosen.n_runs
        )),
        Goal::Budget(budget) => out.push(format!(
            "No studied layout fits the budget of {}; the cheapest costs {}.",
            money(budget, currency), money(chosen.cost, currency)
        )),
    }
    if chosen.free_time_mean_rmse.is_finite() {
        out.push(format!(
            "Without any readings the model drifts to a time-mean error of {} {unit}; these sensors cut it by {:.0} %.",
            fmt(chosen.free_time_mean_rmse),
            100.0 * (1.0 - chosen.ratio_to_free())
        ));
    }
    out.push(grid_sentence(rec, n_existing, currency));
    let gap = outcome.ranking.gap;
    if gap.is_finite() {
        out.push(format!(
            "Optimality: log det of the posterior information is {} nats below the convex-relaxation upper bound (Joshi & Boyd 2009), so no layout of this size and cost can carry more than {} nats more information about the modal coefficients.",
            fmt(gap), fmt(gap)
        ));
    }
    out
}

/// How the recommended layout compares with an evenly spaced grid laid out by hand, in one
/// sentence; says plainly when the grid is as cheap or cheaper.
fn grid_sentence(rec: &crate::sweep::Recommendation, n_existing: usize, currency: &str) -> String {
    let grid_new = |n_sensors: usize| {
        let n = n_sensors.saturating_sub(n_existing);
        format!("{n} new sensor{}", if n == 1 { "" } else { "s" })
    };
    match (&rec.grid_equivalent, rec.saving()) {
        (Some(grid), Some(saving)) if saving.abs() < 0.5 => format!(
            "An evenly spaced grid of {} reaches the same error for the same money ({}): on this site the optimised layout buys no saving over a grid laid out by hand.",
            grid_new(grid.n_sensors), money(grid.cost, currency)
        ),
        (Some(grid), Some(saving)) if saving > 0.0 => format!(
            "An evenly spaced grid laid out by hand needs {} ({}) to reach the same error; the recommended layout saves {}.",
            grid_new(grid.n_sensors), money(grid.cost, currency), money(saving, currency)
        ),
        (Some(grid), Some(saving)) => format!(
            "On this site an evenly spaced grid is cheaper: a grid of {} laid out by hand gets the same error for {}, {} less than the recommended layout. Consider the grid, or a tighter target where the optimised layouts pull ahead (see the count study).",
            grid_new(grid.n_sensors), money(grid.cost, currency), money(-saving, currency)
        ),
        _ => format!(
            "No evenly spaced grid of up to {} reaches the same error.",
            grid_new(rec.max_grid_studied)
        ),
    }
}

/// Words for the currency in captions.
fn currency_words(currency: &str) -> String {
    if currency.is_empty() {
        "the site's currency units (site.toml gives no `currency`)".into()
    } else {
        currency.into()
    }
}

/// Unit of costs: the site's currency, or "currency units" when it gives none.
pub fn cost_unit(currency: &str) -> &str {
    if currency.is_empty() {
        "currency units"
    } else {
        currency
    }
}

/// Label of a cost axis, with its unit.
pub fn cost_label(currency: &str) -> String {
    format!("cost ({})", cost_unit(currency))
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;
    use crate::sweep::{recommend, Cell, RmseStats};

    fn cell(idx: usize, method: &str, n: usize, cost: f64, mean: f64) -> CellOutcome {
        CellOutcome {
            cell_idx: idx,
            cell: Cell {
                study: StudyKind::Count,
                method: method.into(),
                setting: n as f64,
            },
            n_sensors: n,
            cost,
            criterion: 0.0,
            time_mean_rmse: RmseStats {
                mean,
                std: 0.01,
                ..RmseStats::default()
            },
            final_rmse: RmseStats::default(),
            free_time_mean_rmse: 2.0,
            n_runs: 8,
            n_diverged: 0,
            sensors: String::new(),
        }
    }

    #[test]
    fn a_cheaper_grid_is_called_cheaper_not_a_small_saving() {
        // The grid reaches the greedy layout's error with more sensors but cheaper kinds.
        let cells = vec![
            cell(0, "greedy", 2, 20_000.0, 0.5),
            cell(1, "grid", 2, 5_000.0, 0.9),
            cell(2, "grid", 3, 7_500.0, 0.45),
        ];
        let rec = recommend(&cells, Goal::TargetRmse(0.6)).unwrap();
        let text = grid_sentence(&rec, 0, "EUR");
        assert!(text.contains("grid is cheaper"), "{text}");
        assert!(text.contains("7\u{202f}500 EUR"), "{text}");
        assert!(text.contains("12\u{202f}500 EUR less"), "{text}");
        assert!(!text.contains("small"), "{text}");

        let cells = vec![
            cell(0, "greedy", 2, 5_000.0, 0.5),
            cell(1, "grid", 4, 9_000.0, 0.45),
        ];
        let rec = recommend(&cells, Goal::TargetRmse(0.6)).unwrap();
        let text = grid_sentence(&rec, 1, "");
        assert!(text.contains("needs 3 new sensors ("), "{text}");
        assert!(text.contains("saves 4\u{202f}000."), "{text}");
    }

    #[test]
    fn money_groups_digits_and_names_the_currency() {
        assert_eq!(money(58_300.0, "EUR"), "58\u{202f}300 EUR");
        assert_eq!(money(-1_234_567.0, ""), "−1\u{202f}234\u{202f}567");
        assert_eq!(cost_label("EUR"), "cost (EUR)");
        assert_eq!(cost_label(""), "cost (currency units)");
    }
}
