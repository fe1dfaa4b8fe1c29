//! Where things are in a profile's text: field paths, their line and column, and the walk
//! that finds keys the profile format does not have (with a did-you-mean).

use std::fmt;
use std::ops::Range;

use toml::de::{DeTable, DeValue};
use toml::Spanned;

/// One step of a field path: a key or an array index.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Seg {
    /// A key in a table.
    Key(String),
    /// An index into an array.
    Index(usize),
}

/// A field path such as `model.points[2].counts`.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct FieldPath(pub Vec<Seg>);

impl FieldPath {
    /// The path of a top-level key.
    pub fn key(name: &str) -> Self {
        FieldPath(vec![Seg::Key(name.to_string())])
    }
    /// This path with a key added.
    pub fn then(&self, name: &str) -> Self {
        let mut segs = self.0.clone();
        segs.push(Seg::Key(name.to_string()));
        FieldPath(segs)
    }
    /// This path with an index added.
    pub fn at(&self, index: usize) -> Self {
        let mut segs = self.0.clone();
        segs.push(Seg::Index(index));
        FieldPath(segs)
    }
    /// The path with indices left out, as the schema names tables.
    fn schema_name(&self) -> String {
        let keys: Vec<&str> = self
            .0
            .iter()
            .filter_map(|s| match s {
                Seg::Key(k) => Some(k.as_str()),
                Seg::Index(_) => None,
            })
            .collect();
        keys.join(".")
    }
}

impl fmt::Display for FieldPath {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.0.is_empty() {
            return f.write_str("(file)");
        }
        for (i, seg) in self.0.iter().enumerate() {
            match seg {
                Seg::Key(k) if i == 0 => write!(f, "{k}")?,
                Seg::Key(k) => write!(f, ".{k}")?,
                Seg::Index(n) => write!(f, "[{n}]")?,
            }
        }
        Ok(())
    }
}

/// The keys each table of a kind of file may hold, by schema name (the table's path with
/// indices left out; "" for the top).
pub type Schema = &'static [(&'static str, &'static [&'static str])];

/// The keys each table of a profile may hold.
pub const PROFILE_SCHEMA: Schema = &[
    (
        "",
        &[
            "name",
            "description",
            "ohms",
            "reference_frequency",
            "adc",
            "model",
            "frequency_correction",
            "offset",
            "limits",
            "uncertainty",
            "temperature",
        ],
    ),
    (
        "adc",
        &["bits", "vref", "divider", "zero_counts", "clip_margin"],
    ),
    (
        "model",
        &[
            "kind",
            "axis",
            "temperature",
            "n",
            "vl",
            "xti",
            "eg_ev",
            "slope",
            "intercept",
            "points",
        ],
    ),
    (
        "model.points",
        &["applied", "counts", "std_counts", "samples", "temp_c"],
    ),
    ("frequency_correction", &["kind", "points"]),
    ("frequency_correction.points", &["freq", "db"]),
    ("offset", &["db", "points"]),
    ("offset.points", &["freq", "db"]),
    ("limits", &["detector_max_dbm", "reference_max_dbm"]),
    (
        "uncertainty",
        &[
            "source",
            "offset",
            "source_swr",
            "source_return_loss",
            "detector_swr",
            "detector_return_loss",
            "front_swr",
            "front_return_loss",
            "front_is_attenuator",
            "dut_swr",
            "dut_return_loss",
        ],
    ),
    (
        "temperature",
        &[
            "channel",
            "sensor",
            "r0_ohms",
            "t0_c",
            "beta_k",
            "a",
            "b",
            "c",
            "fixed_ohms",
            "placement",
            "volts_per_c",
            "volts_at_0c",
            "c_per_count",
            "c_at_zero",
            "window_s",
            "u_c",
        ],
    ),
    ("uncertainty.source", &["db", "k"]),
    ("uncertainty.offset", &["db", "k"]),
    ("uncertainty.source_swr", &["freq", "swr"]),
    ("uncertainty.detector_swr", &["freq", "swr"]),
    ("uncertainty.front_swr", &["freq", "swr"]),
    ("uncertainty.dut_swr", &["freq", "swr"]),
    ("uncertainty.source_return_loss", &["freq", "return_loss"]),
    ("uncertainty.detector_return_loss", &["freq", "return_loss"]),
    ("uncertainty.front_return_loss", &["freq", "return_loss"]),
    ("uncertainty.dut_return_loss", &["freq", "return_loss"]),
];

/// The closest of `candidates` to `word`, when it is close enough to be a likely typo.
pub fn did_you_mean<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    candidates
        .iter()
        .map(|c| (strsim::jaro_winkler(word, c), *c))
        .filter(|(score, _)| *score > 0.8)
        .max_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, c)| c)
}

/// A profile's parsed text, kept for locating fields.
pub struct Located<'a> {
    text: &'a str,
    root: Spanned<DeTable<'a>>,
}

impl<'a> Located<'a> {
    /// Parses the TOML; the error carries its byte span.
    pub fn parse(text: &'a str) -> Result<Self, toml::de::Error> {
        let root = DeTable::parse(text)?;
        Ok(Located { text, root })
    }

    /// True when the file holds no keys at all (only comments and blank lines).
    pub fn is_blank(&self) -> bool {
        self.root.get_ref().is_empty()
    }

    /// 1-based line and column of a byte offset.
    pub fn line_col(&self, offset: usize) -> (usize, usize) {
        line_col(self.text, offset)
    }

    /// The span of the value at `path`, or of the nearest enclosing value that exists.
    pub fn span_of(&self, path: &FieldPath) -> Range<usize> {
        let mut span = self.root.span();
        let mut table: Option<&DeTable> = Some(self.root.get_ref());
        let mut array: Option<&toml::de::DeArray> = None;
        for seg in &path.0 {
            let next = match (seg, table, array) {
                (Seg::Key(k), Some(t), _) => {
                    t.iter().find(|(key, _)| key.get_ref() == k).map(|(_, v)| v)
                }
                (Seg::Index(i), _, Some(a)) => a.get(*i),
                _ => None,
            };
            let Some(value) = next else { break };
            span = value.span();
            table = value.get_ref().as_table();
            array = value.get_ref().as_array();
        }
        span
    }

    /// The path of the innermost key or value whose span holds `offset`. A table's own
    /// span may cover only its `[header]`, so every table is searched, not just those whose
    /// span holds the offset.
    pub fn path_at(&self, offset: usize) -> FieldPath {
        let mut path = FieldPath::default();
        search_table(self.root.get_ref(), offset, &mut path, &|k, v| {
            v.span().contains(&offset) || k.is_some_and(|k| k.span().contains(&offset))
        });
        path
    }

    /// The path of the table that starts at `offset` (serde points a missing field there).
    pub fn table_at(&self, offset: usize) -> FieldPath {
        let mut path = FieldPath::default();
        search_table(self.root.get_ref(), offset, &mut path, &|_, v| {
            v.get_ref().is_table() && v.span().start == offset
        });
        path
    }

    /// Every key that `schema` does not have: (path, span, message).
    pub fn unknown_keys(&self, schema: Schema) -> Vec<(FieldPath, Range<usize>, String)> {
        let mut found = Vec::new();
        walk_table(
            schema,
            self.root.get_ref(),
            &FieldPath::default(),
            &mut found,
        );
        found
    }
}

type Matcher<'m> = dyn Fn(Option<&Spanned<toml::de::DeString>>, &Spanned<DeValue>) -> bool + 'm;

/// Depth-first search for the deepest entry that `hit` accepts; leaves its path in `path`.
fn search_table(table: &DeTable, offset: usize, path: &mut FieldPath, hit: &Matcher) -> bool {
    for (key, value) in table {
        path.0.push(Seg::Key(key.get_ref().to_string()));
        if search_value(value, offset, path, hit) || hit(Some(key), value) {
            return true;
        }
        path.0.pop();
    }
    false
}

fn search_value(
    value: &Spanned<DeValue>,
    offset: usize,
    path: &mut FieldPath,
    hit: &Matcher,
) -> bool {
    match value.get_ref() {
        DeValue::Table(inner) => search_table(inner, offset, path, hit),
        DeValue::Array(items) => {
            for (i, item) in items.iter().enumerate() {
                path.0.push(Seg::Index(i));
                if search_value(item, offset, path, hit) || hit(None, item) {
                    return true;
                }
                path.0.pop();
            }
            false
        }
        _ => false,
    }
}

fn walk_table(
    schema: Schema,
    table: &DeTable,
    path: &FieldPath,
    found: &mut Vec<(FieldPath, Range<usize>, String)>,
) {
    let schema_name = path.schema_name();
    let Some((_, allowed)) = schema.iter().find(|(name, _)| *name == schema_name) else {
        return;
    };
    for (key, value) in table {
        let key_path = path.then(key.get_ref());
        if !allowed.contains(&key.get_ref().as_ref()) {
            let hint = did_you_mean(key.get_ref(), allowed)
                .map(|c| format!("did you mean `{c}`? "))
                .unwrap_or_default();
            let message = format!(
                "unknown key `{}`; {hint}this table takes: {}",
                key.get_ref(),
                allowed.join(", ")
            );
            found.push((key_path, key.span(), message));
            continue;
        }
        match value.get_ref() {
            DeValue::Table(inner) => walk_table(schema, inner, &key_path, found),
            DeValue::Array(items) => {
                for (i, item) in items.iter().enumerate() {
                    if let DeValue::Table(inner) = item.get_ref() {
                        walk_table(schema, inner, &key_path.at(i), found);
                    }
                }
            }
            _ => {}
        }
    }
}

/// 1-based line and column of a byte offset in `text`.
pub fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    let before = &text.as_bytes()[..offset];
    let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
    let line_start = before
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(0, |p| p + 1);
    let column = String::from_utf8_lossy(&before[line_start..])
        .chars()
        .count()
        + 1;
    (line, column)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_spans_and_paths_of_nested_fields() {
        let text = "name = \"x\"\n[model]\nkind = \"table\"\n[[model.points]]\napplied = \"0dBm\"\ncounts = 12\n";
        let doc = Located::parse(text).unwrap();
        let path = FieldPath::key("model").then("points").at(0).then("counts");
        let span = doc.span_of(&path);
        assert_eq!(doc.line_col(span.start), (6, 10));
        assert_eq!(
            doc.path_at(span.start).to_string(),
            "model.points[0].counts"
        );
    }

    #[test]
    fn unknown_keys_come_with_a_suggestion() {
        let doc = Located::parse("name = \"x\"\n[adc]\nbitz = 12\n").unwrap();
        let found = doc.unknown_keys(PROFILE_SCHEMA);
        assert_eq!(found.len(), 1);
        assert_eq!(found[0].0.to_string(), "adc.bitz");
        assert!(found[0].2.contains("did you mean `bits`"), "{}", found[0].2);
    }
}
