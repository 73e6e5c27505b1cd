//! Typed, path-aware access to the tables of `site.toml`: every getter names the full key
//! path (`kinds[2].noise_sd`) in its error, and [`Section::new`] refuses unknown keys with a
//! "did you mean" suggestion found by Levenshtein edit distance (Levenshtein 1966; the
//! standard dynamic programme). Numbers written as integers are accepted where floats are
//! expected. No file access here except the path used in messages.

use std::path::{Path, PathBuf};

use super::IoError;

/// Levenshtein distance between two strings (insertions, deletions, substitutions).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.iter().enumerate() {
        cur[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let substitution = prev[j] + usize::from(ca != cb);
            cur[j + 1] = substitution.min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// The closest of `known` to `word` when it is plausibly a typo (distance at most a third of
/// the word's length, at least 1, at most 3).
pub fn closest<'a>(word: &str, known: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let limit = (word.chars().count() / 3).clamp(1, 3);
    known
        .into_iter()
        .map(|k| (edit_distance(&word.to_lowercase(), &k.to_lowercase()), k))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, k)| k)
}

/// " (did you mean `x`?)" or an empty string.
pub fn did_you_mean<'a>(word: &str, known: impl IntoIterator<Item = &'a str>) -> String {
    match closest(word, known) {
        Some(k) => format!(" (did you mean `{k}`?)"),
        None => String::new(),
    }
}

/// Name of a TOML value's type for messages.
fn type_name(value: &toml::Value) -> &'static str {
    match value {
        toml::Value::String(_) => "a string",
        toml::Value::Integer(_) => "an integer",
        toml::Value::Float(_) => "a number",
        toml::Value::Boolean(_) => "true/false",
        toml::Value::Datetime(_) => "a date",
        toml::Value::Array(_) => "an array",
        toml::Value::Table(_) => "a table",
    }
}

/// One table of `site.toml` with its key path, e.g. `kinds[1]`.
#[derive(Clone, Copy)]
pub struct Section<'a> {
    pub file: &'a Path,
    pub prefix: &'a str,
    pub table: &'a toml::Table,
}

impl<'a> Section<'a> {
    /// Wraps `table`, refusing keys not in `allowed`.
    pub fn new(
        file: &'a Path,
        prefix: &'a str,
        table: &'a toml::Table,
        allowed: &[&str],
    ) -> Result<Self, IoError> {
        for key in table.keys() {
            if !allowed.contains(&key.as_str()) {
                let place = join(prefix, key);
                return Err(IoError::invalid(
                    file,
                    place,
                    format!(
                        "unknown key{}; expected one of: {}",
                        did_you_mean(key, allowed.iter().copied()),
                        allowed.join(", ")
                    ),
                ));
            }
        }
        Ok(Self {
            file,
            prefix,
            table,
        })
    }

    pub fn place(&self, key: &str) -> String {
        join(self.prefix, key)
    }

    pub fn err(&self, key: &str, message: impl Into<String>) -> IoError {
        IoError::invalid(self.file, self.place(key), message)
    }

    pub fn has(&self, key: &str) -> bool {
        self.table.contains_key(key)
    }

    pub fn get(&self, key: &str) -> Option<&'a toml::Value> {
        self.table.get(key)
    }

    pub fn req(&self, key: &str, what: &str) -> Result<&'a toml::Value, IoError> {
        self.table
            .get(key)
            .ok_or_else(|| self.err(key, format!("missing required key; expected {what}")))
    }

    fn wrong_type(&self, key: &str, value: &toml::Value, what: &str) -> IoError {
        self.err(
            key,
            format!("found {} ({value}), expected {what}", type_name(value)),
        )
    }

    pub fn as_str(
        &self,
        key: &str,
        value: &'a toml::Value,
        what: &str,
    ) -> Result<&'a str, IoError> {
        value
            .as_str()
            .ok_or_else(|| self.wrong_type(key, value, what))
    }

    pub fn req_str(&self, key: &str, what: &str) -> Result<&'a str, IoError> {
        let value = self.req(key, what)?;
        self.as_str(key, value, what)
    }

    pub fn opt_str(&self, key: &str, what: &str) -> Result<Option<&'a str>, IoError> {
        self.get(key).map(|v| self.as_str(key, v, what)).transpose()
    }

    /// A finite number (integer or float).
    pub fn as_f64(&self, key: &str, value: &toml::Value, what: &str) -> Result<f64, IoError> {
        let number = match value {
            toml::Value::Float(f) => *f,
            toml::Value::Integer(i) => *i as f64,
            _ => return Err(self.wrong_type(key, value, what)),
        };
        if !number.is_finite() {
            return Err(self.err(key, format!("found {number}, expected a finite number")));
        }
        Ok(number)
    }

    pub fn req_f64(&self, key: &str, what: &str) -> Result<f64, IoError> {
        let value = self.req(key, what)?;
        self.as_f64(key, value, what)
    }

    pub fn opt_f64(&self, key: &str, what: &str) -> Result<Option<f64>, IoError> {
        self.get(key).map(|v| self.as_f64(key, v, what)).transpose()
    }

    /// A number > 0 (the unit is named in `what`).
    pub fn req_positive(&self, key: &str, what: &str) -> Result<f64, IoError> {
        let v = self.req_f64(key, what)?;
        if v <= 0.0 {
            return Err(self.err(key, format!("found {v}, expected {what} > 0")));
        }
        Ok(v)
    }

    /// A number ≥ 0.
    pub fn req_non_negative(&self, key: &str, what: &str) -> Result<f64, IoError> {
        let v = self.req_f64(key, what)?;
        if v < 0.0 {
            return Err(self.err(key, format!("found {v}, expected {what} >= 0")));
        }
        Ok(v)
    }

    pub fn req_count(&self, key: &str, what: &str, min: usize) -> Result<usize, IoError> {
        let value = self.req(key, what)?;
        let n = value
            .as_integer()
            .ok_or_else(|| self.wrong_type(key, value, what))?;
        if n < min as i64 {
            return Err(self.err(key, format!("found {n}, expected {what} >= {min}")));
        }
        usize::try_from(n).map_err(|_| self.err(key, format!("found {n}, too large")))
    }

    /// A pair of numbers `[a, b]`.
    pub fn as_pair(&self, key: &str, value: &toml::Value, what: &str) -> Result<[f64; 2], IoError> {
        let items = value
            .as_array()
            .ok_or_else(|| self.wrong_type(key, value, what))?;
        if items.len() != 2 {
            return Err(self.err(
                key,
                format!("found an array of {} values, expected {what}", items.len()),
            ));
        }
        Ok([
            self.as_f64(key, &items[0], what)?,
            self.as_f64(key, &items[1], what)?,
        ])
    }

    pub fn req_pair(&self, key: &str, what: &str) -> Result<[f64; 2], IoError> {
        let value = self.req(key, what)?;
        self.as_pair(key, value, what)
    }

    pub fn req_array(&self, key: &str, what: &str) -> Result<&'a Vec<toml::Value>, IoError> {
        let value = self.req(key, what)?;
        value
            .as_array()
            .ok_or_else(|| self.wrong_type(key, value, what))
    }

    /// A sub-table (`[grid]`) or `None`.
    pub fn opt_table(&self, key: &str) -> Result<Option<&'a toml::Table>, IoError> {
        match self.get(key) {
            None => Ok(None),
            Some(toml::Value::Table(t)) => Ok(Some(t)),
            Some(v) => Err(self.wrong_type(key, v, &format!("a table `[{key}]`"))),
        }
    }

    /// An array of tables (`[[kinds]]`), empty when absent.
    pub fn table_array(&self, key: &str) -> Result<Vec<&'a toml::Table>, IoError> {
        match self.get(key) {
            None => Ok(Vec::new()),
            Some(toml::Value::Array(items)) => items
                .iter()
                .enumerate()
                .map(|(idx, item)| {
                    item.as_table().ok_or_else(|| {
                        self.err(
                            &format!("{key}[{idx}]"),
                            format!("found {}, expected a table `[[{key}]]`", type_name(item)),
                        )
                    })
                })
                .collect(),
            Some(v) => Err(self.wrong_type(key, v, &format!("an array of tables `[[{key}]]`"))),
        }
    }

    /// A path resolved against `root` (absolute paths stay), which must exist.
    pub fn req_file(&self, key: &str, root: &Path, what: &str) -> Result<PathBuf, IoError> {
        let name = self.req_str(key, what)?;
        self.file_at(key, root, name)
    }

    pub fn opt_file(&self, key: &str, root: &Path, what: &str) -> Result<Option<PathBuf>, IoError> {
        match self.opt_str(key, what)? {
            Some(name) => self.file_at(key, root, name).map(Some),
            None => Ok(None),
        }
    }

    fn file_at(&self, key: &str, root: &Path, name: &str) -> Result<PathBuf, IoError> {
        let path = root.join(name);
        if !path.is_file() {
            return Err(self.err(
                key,
                format!(
                    "file {} not found (paths are relative to the site directory)",
                    path.display()
                ),
            ));
        }
        Ok(path)
    }
}

fn join(prefix: &str, key: &str) -> String {
    if prefix.is_empty() {
        key.to_string()
    } else {
        format!("{prefix}.{key}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levenshtein_known_values() {
        // Classic worked example: kitten → sitting needs 3 edits (common practice).
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("flaw", "lawn"), 2);
        assert_eq!(edit_distance("same", "same"), 0);
    }

    #[test]
    fn suggestions() {
        let keys = ["origin", "spacing", "nx", "ny", "solid", "weights"];
        assert_eq!(closest("spacng", keys), Some("spacing"));
        assert_eq!(closest("orgin", keys), Some("origin"));
        assert_eq!(closest("temperature", keys), None);
        let table: toml::Table = toml::from_str("spacng = 1.0").unwrap();
        let path = Path::new("site.toml");
        let err = Section::new(path, "grid", &table, &keys)
            .err()
            .unwrap()
            .to_string();
        assert!(
            err.contains("grid.spacng: unknown key (did you mean `spacing`?)"),
            "{err}"
        );
    }

    #[test]
    fn typed_getters_name_the_key() {
        let table: toml::Table = toml::from_str("a = \"x\"\nb = -1\nc = [1, 2, 3]").unwrap();
        let s = Section {
            file: Path::new("site.toml"),
            prefix: "kinds[0]",
            table: &table,
        };
        let e = s.req_f64("a", "a noise in m/s").unwrap_err().to_string();
        assert!(
            e.contains("kinds[0].a: found a string (\"x\"), expected a noise in m/s"),
            "{e}"
        );
        let e = s
            .req_positive("b", "a spacing in m")
            .unwrap_err()
            .to_string();
        assert!(e.contains("found -1, expected a spacing in m > 0"), "{e}");
        let e = s.req_pair("c", "[x, y] in m").unwrap_err().to_string();
        assert!(e.contains("array of 3 values"), "{e}");
        let e = s.req_f64("d", "a number").unwrap_err().to_string();
        assert!(e.contains("kinds[0].d: missing required key"), "{e}");
    }
}
