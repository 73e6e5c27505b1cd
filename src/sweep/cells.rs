//! Cells of a study and their stable identity, plus sharding of a cell list.

use std::fmt;
use std::str::FromStr;

/// What a study varies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum StudyKind {
    /// Number of sensors, 1..K.
    Count,
    /// Budget in the site's currency.
    Budget,
    /// Multiplier on every kind's noise standard deviation.
    Noise,
    /// Multiplier on every kind's sampling interval.
    Interval,
    /// Background (initial-state) error, field units.
    Background,
    /// Number of sensors lost, removed worst-first.
    Loss,
}

impl StudyKind {
    pub const ALL: [StudyKind; 6] = [
        StudyKind::Count,
        StudyKind::Budget,
        StudyKind::Noise,
        StudyKind::Interval,
        StudyKind::Background,
        StudyKind::Loss,
    ];

    pub fn name(self) -> &'static str {
        match self {
            StudyKind::Count => "count",
            StudyKind::Budget => "budget",
            StudyKind::Noise => "noise",
            StudyKind::Interval => "interval",
            StudyKind::Background => "background",
            StudyKind::Loss => "loss",
        }
    }

    /// Unit of the setting, for tables and axis labels.
    pub fn setting_unit(self) -> &'static str {
        match self {
            StudyKind::Count | StudyKind::Loss => "sensors",
            StudyKind::Budget => "currency",
            StudyKind::Noise | StudyKind::Interval => "multiplier",
            StudyKind::Background => "field units",
        }
    }
}

impl fmt::Display for StudyKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for StudyKind {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        StudyKind::ALL
            .into_iter()
            .find(|k| k.name() == s)
            .ok_or_else(|| {
                format!("unknown study `{s}`, expected one of count, budget, noise, interval, background, loss")
            })
    }
}

/// One point of a study: a method at a setting.
#[derive(Debug, Clone, PartialEq)]
pub struct Cell {
    pub study: StudyKind,
    pub method: String,
    pub setting: f64,
}

impl Cell {
    /// Stable text identity, used for journals, seeds and merging.
    pub fn key(&self) -> String {
        format!(
            "{}/{}/{}",
            self.study,
            self.method,
            format_setting(self.setting)
        )
    }
}

/// Shortest text that reads back to the same `f64`.
pub fn format_setting(value: f64) -> String {
    format!("{value}")
}

/// One slice of a cell list for batch clusters: shard `index` of `count` (0-based) takes
/// every cell whose position modulo `count` is `index`, so shards balance across methods.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    pub index: usize,
    pub count: usize,
}

impl Shard {
    pub const WHOLE: Shard = Shard { index: 0, count: 1 };

    pub fn owns(&self, cell_idx: usize) -> bool {
        cell_idx % self.count == self.index
    }
}

impl FromStr for Shard {
    type Err = String;

    /// Parses `i/N` with 1 ≤ i ≤ N (1-based on the command line, as job arrays count).
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let bad = || format!("found `{s}`, expected i/N with 1 <= i <= N, e.g. 2/8");
        let (i, n) = s.split_once('/').ok_or_else(bad)?;
        let i: usize = i.trim().parse().map_err(|_| bad())?;
        let n: usize = n.trim().parse().map_err(|_| bad())?;
        if n == 0 || i == 0 || i > n {
            return Err(bad());
        }
        Ok(Shard {
            index: i - 1,
            count: n,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_partition_the_cells() {
        let shards: Vec<Shard> = (1..=3).map(|i| format!("{i}/3").parse().unwrap()).collect();
        for cell_idx in 0..10 {
            assert_eq!(shards.iter().filter(|s| s.owns(cell_idx)).count(), 1);
        }
        assert!("0/3".parse::<Shard>().is_err());
        assert!("4/3".parse::<Shard>().is_err());
        assert!("x".parse::<Shard>().is_err());
    }

    #[test]
    fn cell_key_is_stable() {
        let cell = Cell {
            study: StudyKind::Noise,
            method: "greedy-d".into(),
            setting: 0.5,
        };
        assert_eq!(cell.key(), "noise/greedy-d/0.5");
        assert_eq!("loss".parse::<StudyKind>(), Ok(StudyKind::Loss));
    }
}
