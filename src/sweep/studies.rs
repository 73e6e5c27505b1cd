//! The studies `plan` runs and `sweep` offers, as lists of cells: which methods each study
//! compares and at which settings. Cell order is study by study, method by method, setting by
//! setting — the canonical order shards and journals refer to.

use super::cells::{Cell, StudyKind};

/// One study: methods compared at settings.
#[derive(Debug, Clone, PartialEq)]
pub struct StudySpec {
    pub kind: StudyKind,
    pub methods: Vec<String>,
    pub settings: Vec<f64>,
}

impl StudySpec {
    pub fn new(kind: StudyKind, methods: &[&str], settings: Vec<f64>) -> Self {
        Self {
            kind,
            methods: methods.iter().map(|m| m.to_string()).collect(),
            settings,
        }
    }
}

/// All cells of the studies, in canonical order.
pub fn cells_of(specs: &[StudySpec]) -> Vec<Cell> {
    specs
        .iter()
        .flat_map(|spec| {
            spec.methods.iter().flat_map(move |method| {
                spec.settings.iter().map(move |&setting| Cell {
                    study: spec.kind,
                    method: method.clone(),
                    setting,
                })
            })
        })
        .collect()
}

/// Methods compared by the count study: the designs and both baselines.
pub const COUNT_METHODS: [&str; 5] = ["greedy", "exchange", "qr", "grid", "random"];
/// Layouts compared when the conditions change: the recommended layout itself and the evenly
/// spaced grid with as many new sensors.
pub const CONDITION_METHODS: [&str; 2] = [super::context::RECOMMENDED, "grid"];

/// Sensor counts 1..=max.
pub fn count_settings(max_count: usize) -> Vec<f64> {
    (1..=max_count).map(|k| k as f64).collect()
}

/// Number of budget levels of the budget study.
pub const N_BUDGET_LEVELS: usize = 8;

/// Budgets from the cheapest sensor to `top` (the user's budget, or the cost of the largest
/// layout of the count study) in equal ratios, so cheap layouts of many low-cost sensors are
/// studied as finely as expensive ones: the cheapest layout meeting a target is often far
/// below the largest layout's cost. Levels between the ends are rounded to three significant
/// figures (a budget a person would write); `top` is kept exactly.
pub fn budget_settings(top: f64, cheapest: f64) -> Vec<f64> {
    if !(top.is_finite() && cheapest.is_finite() && cheapest > 0.0) || top <= cheapest {
        return vec![top.max(cheapest)];
    }
    let ratio = top / cheapest;
    let last = N_BUDGET_LEVELS - 1;
    let mut budgets: Vec<f64> = (0..=last)
        .map(|i| {
            if i == last {
                return top;
            }
            let b = cheapest * ratio.powf(i as f64 / last as f64);
            // Three significant figures, scaling by an exact power of ten either way so no
            // binary fraction of a tenth creeps in (13.7, not 13.700000000000001).
            let exponent = b.log10().floor() as i32 - 2;
            let rounded = if exponent >= 0 {
                let unit = 10f64.powi(exponent);
                (b / unit).round() * unit
            } else {
                let scale = 10f64.powi(-exponent);
                (b * scale).round() / scale
            };
            rounded.clamp(cheapest, top)
        })
        .collect();
    budgets.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs().max(1.0));
    budgets
}

/// Noise multipliers on every kind's standard deviation.
pub const NOISE_MULTIPLIERS: [f64; 4] = [0.5, 1.0, 2.0, 4.0];
/// Multipliers on every kind's sampling interval.
pub const INTERVAL_MULTIPLIERS: [f64; 4] = [1.0, 2.0, 5.0, 10.0];
/// Multipliers on the base background error.
pub const BACKGROUND_MULTIPLIERS: [f64; 4] = [0.5, 1.0, 2.0, 4.0];

/// The first phase of a plan: layouts by count and by budget.
pub fn design_studies(max_count: usize, budgets: Vec<f64>) -> Vec<StudySpec> {
    vec![
        StudySpec::new(StudyKind::Count, &COUNT_METHODS, count_settings(max_count)),
        StudySpec::new(StudyKind::Budget, &["greedy", "exchange"], budgets),
    ]
}

/// The second phase: the recommended layout and the grid of the same size under changed
/// conditions and sensor losses.
/// Interval multipliers above `max_multiplier` (the slowest sensor would stop reporting
/// within the test span) are left out.
pub fn condition_studies(
    base_background: f64,
    max_loss: usize,
    max_multiplier: f64,
) -> Vec<StudySpec> {
    let mut specs = vec![
        StudySpec::new(
            StudyKind::Noise,
            &CONDITION_METHODS,
            NOISE_MULTIPLIERS.to_vec(),
        ),
        StudySpec::new(
            StudyKind::Interval,
            &CONDITION_METHODS,
            INTERVAL_MULTIPLIERS
                .iter()
                .copied()
                .filter(|&m| m <= max_multiplier)
                .collect(),
        ),
        StudySpec::new(
            StudyKind::Background,
            &CONDITION_METHODS,
            BACKGROUND_MULTIPLIERS
                .iter()
                .map(|m| m * base_background)
                .collect(),
        ),
    ];
    if max_loss > 0 {
        specs.push(StudySpec::new(
            StudyKind::Loss,
            &CONDITION_METHODS,
            (0..=max_loss).map(|f| f as f64).collect(),
        ));
    }
    specs
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_come_study_by_study_method_by_method() {
        let cells = cells_of(&design_studies(3, vec![100.0, 200.0]));
        assert_eq!(cells.len(), 5 * 3 + 2 * 2);
        assert_eq!(cells[0].key(), "count/greedy/1");
        assert_eq!(cells[3].key(), "count/exchange/1");
        assert_eq!(cells[15].key(), "budget/greedy/100");
    }

    #[test]
    fn budgets_run_from_the_cheapest_sensor_to_the_top_in_equal_ratios() {
        // 1000 → 128 000: a ratio of 2 per level.
        assert_eq!(
            budget_settings(128_000.0, 1000.0),
            vec![1000.0, 2000.0, 4000.0, 8000.0, 16000.0, 32000.0, 64000.0, 128_000.0]
        );
        // Rounded to three significant figures inside, the top kept exactly.
        let b = budget_settings(376_321.5, 2100.0);
        assert_eq!(b.len(), N_BUDGET_LEVELS);
        assert_eq!(b[0].to_bits(), 2100.0f64.to_bits());
        assert_eq!(b[1].to_bits(), 4410.0f64.to_bits());
        assert_eq!(b[N_BUDGET_LEVELS - 1].to_bits(), 376_321.5f64.to_bits());
        assert!(b.windows(2).all(|w| w[0] < w[1]), "{b:?}");
        // Levels closer than the rounding collapse; a top below the cheapest sensor is one level.
        assert_eq!(budget_settings(1001.0, 1000.0), vec![1000.0, 1001.0]);
        assert_eq!(budget_settings(500.0, 600.0), vec![600.0]);
        // Small amounts keep exact decimals: 10 → 20 in equal ratios.
        let small = budget_settings(20.0, 10.0);
        assert_eq!(small[3].to_string(), "13.5");
    }
}
