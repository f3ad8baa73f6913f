//! A TOML document as a plain tree with source spans, and typed readers over it that
//! produce one-line errors: `file:line:column: key.path = value: what is allowed`.
//!
//! Every table is read with the full list of keys it allows, so an unknown key is an
//! error (with a "did you mean" suggestion when a known key is close).
//!
//! Overrides (`--set KEY=VALUE`, [`super::overrides`]) are applied to this tree before it
//! is read; the values they bring carry their origin, so an error about one names the
//! override instead of a place in the file.

use super::overrides::Override;
use crate::error::Error;
use std::ops::Range;
use std::path::{Path, PathBuf};

/// Where a value or key was written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Span {
    /// A byte range of the case text.
    File(Range<usize>),
    /// Override number `k` of [`Source::overrides`]; the byte range is within its value.
    Set(usize, Range<usize>),
    /// Nowhere (an absent optional section).
    None,
}

impl Span {
    fn file(r: Option<Range<usize>>) -> Span {
        r.map_or(Span::None, Span::File)
    }
}

/// A parsed TOML value with its location in the source.
#[derive(Debug, Clone)]
pub struct Node {
    pub kind: Kind,
    pub span: Span,
}

#[derive(Debug, Clone)]
pub enum Kind {
    Str(String),
    Int(i64),
    Float(f64),
    Bool(bool),
    Datetime,
    Array(Vec<Node>),
    Table(Vec<Entry>),
}

#[derive(Debug, Clone)]
pub struct Entry {
    pub key: String,
    pub key_span: Span,
    pub node: Node,
}

impl Kind {
    /// "a string", "an integer", … (for messages).
    pub fn type_name(&self) -> &'static str {
        match self {
            Kind::Str(_) => "a string",
            Kind::Int(_) => "an integer",
            Kind::Float(_) => "a number",
            Kind::Bool(_) => "a boolean",
            Kind::Datetime => "a date",
            Kind::Array(_) => "an array",
            Kind::Table(_) => "a table",
        }
    }
}

/// The document being read: its name, text, folder (for relative paths) and the
/// overrides applied to it.
#[derive(Debug)]
pub struct Source<'a> {
    pub origin: &'a str,
    pub text: &'a str,
    pub base_dir: &'a Path,
    pub overrides: &'a [Override],
}

impl Source<'_> {
    /// Parses the text and applies the overrides; a syntax error becomes
    /// `origin:line:col: TOML syntax error: …`.
    pub fn parse(&self) -> Result<Node, Error> {
        let doc = toml_edit::ImDocument::parse(self.text).map_err(|e| {
            let msg = one_line(e.message());
            Error::input(format!(
                "{}: TOML syntax error: {msg}",
                self.loc(&Span::file(e.span()))
            ))
        })?;
        let mut root = convert_table(doc.as_table(), Span::File(0..0), &Span::file);
        for (k, o) in self.overrides.iter().enumerate() {
            o.apply(&mut root, k)?;
        }
        Ok(root)
    }

    /// `origin:line:col`, `--set KEY=VALUE` for a value from an override, or `origin`
    /// when the span is unknown.
    pub fn loc(&self, span: &Span) -> String {
        match span {
            Span::File(r) => {
                let (line, col) = line_col(self.text, r.start);
                format!("{}:{line}:{col}", self.origin)
            }
            Span::Set(k, _) => match self.overrides.get(*k) {
                Some(o) => format!("--set {o}"),
                None => self.origin.to_string(),
            },
            Span::None => self.origin.to_string(),
        }
    }

    /// Whether `span` is the value of an override that sets exactly `path`.
    fn set_by_override(&self, span: &Span, path: &str) -> bool {
        matches!(span, Span::Set(k, _) if self.overrides.get(*k).is_some_and(|o| o.path() == path))
    }

    /// `loc: path`, or only `--set KEY=VALUE` when the override sets exactly `path`.
    pub fn at(&self, span: &Span, path: &str) -> String {
        if self.set_by_override(span, path) {
            self.loc(span)
        } else {
            format!("{}: {path}", self.loc(span))
        }
    }

    /// The text a span covers (in the case text or in an override's value).
    fn written(&self, span: &Span) -> &str {
        match span {
            Span::File(r) => self.text.get(r.clone()).unwrap_or(""),
            Span::Set(k, r) => self
                .overrides
                .get(*k)
                .and_then(|o| o.value_text().get(r.clone()))
                .unwrap_or(""),
            Span::None => "",
        }
    }

    /// A path from the case file, resolved against the case file's folder.
    pub fn resolve(&self, rel: &str) -> PathBuf {
        self.base_dir.join(rel)
    }
}

/// 1-based line and column (in characters) of a byte offset.
pub fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let mut offset = offset.min(text.len());
    while !text.is_char_boundary(offset) {
        offset -= 1;
    }
    let before = &text[..offset];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, col)
}

/// Joins a multi-line message into one line.
pub fn one_line(s: &str) -> String {
    s.lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join("; ")
}

/// How a parsed range becomes a [`Span`] (in the file, or in an override's value).
pub(crate) type SpanOf<'f> = &'f dyn Fn(Option<Range<usize>>) -> Span;

fn convert_table(t: &toml_edit::Table, span: Span, at: SpanOf) -> Node {
    let entries = t
        .iter()
        .map(|(k, item)| Entry {
            key: k.to_string(),
            key_span: at(t.key(k).and_then(|k| k.span())),
            node: convert_item(item, at),
        })
        .collect();
    let own = at(t.span());
    Node {
        kind: Kind::Table(entries),
        span: if own == Span::None { span } else { own },
    }
}

pub(crate) fn convert_item(item: &toml_edit::Item, at: SpanOf) -> Node {
    match item {
        toml_edit::Item::Value(v) => convert_value(v, at),
        toml_edit::Item::Table(t) => convert_table(t, Span::None, at),
        toml_edit::Item::ArrayOfTables(a) => Node {
            kind: Kind::Array(a.iter().map(|t| convert_table(t, Span::None, at)).collect()),
            span: at(a.span()),
        },
        toml_edit::Item::None => Node {
            kind: Kind::Table(vec![]),
            span: Span::None,
        },
    }
}

fn convert_value(v: &toml_edit::Value, at: SpanOf) -> Node {
    use toml_edit::Value as V;
    let kind = match v {
        V::String(s) => Kind::Str(s.value().clone()),
        V::Integer(i) => Kind::Int(*i.value()),
        V::Float(f) => Kind::Float(*f.value()),
        V::Boolean(b) => Kind::Bool(*b.value()),
        V::Datetime(_) => Kind::Datetime,
        V::Array(a) => Kind::Array(a.iter().map(|x| convert_value(x, at)).collect()),
        V::InlineTable(t) => Kind::Table(
            t.iter()
                .map(|(k, v)| Entry {
                    key: k.to_string(),
                    key_span: at(t.key(k).and_then(|k| k.span())),
                    node: convert_value(v, at),
                })
                .collect(),
        ),
    };
    Node {
        kind,
        span: at(v.span()),
    }
}

/// Levenshtein distance, ignoring ASCII case.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.to_ascii_lowercase().chars().collect();
    let b: Vec<char> = b.to_ascii_lowercase().chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.iter().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            let sub = prev[j] + usize::from(ca != cb);
            cur[j + 1] = sub.min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

/// The known word closest to `word`, when it is close enough to be a likely typo.
pub fn suggest<'k>(word: &str, known: &[&'k str]) -> Option<&'k str> {
    let limit = (word.chars().count() / 3).max(1);
    known
        .iter()
        .map(|k| (edit_distance(word, k), *k))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, k)| k)
}

fn quoted_list(items: &[&str], quote: &str) -> String {
    items
        .iter()
        .map(|k| format!("{quote}{k}{quote}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A table at a key path, with its allowed keys checked.
#[derive(Debug, Clone)]
pub struct Table<'a> {
    pub src: &'a Source<'a>,
    pub path: String,
    pub span: Span,
    entries: &'a [Entry],
}

/// A value with an owned path (array elements, table members).
#[derive(Debug, Clone)]
pub struct Value<'a> {
    pub src: &'a Source<'a>,
    pub node: &'a Node,
    pub path: String,
}

impl<'a> Value<'a> {
    pub fn root(src: &'a Source<'a>, node: &'a Node) -> Self {
        Value {
            src,
            node,
            path: String::new(),
        }
    }

    /// The value as written in the file or the override (one line, shortened).
    pub fn written(&self) -> String {
        let raw = one_line(self.src.written(&self.node.span));
        if raw.chars().count() > 40 {
            format!("{}…", raw.chars().take(40).collect::<String>())
        } else {
            raw
        }
    }

    /// `loc: path = value: msg`.
    pub fn err(&self, msg: impl std::fmt::Display) -> Error {
        let written = self.written();
        if written.is_empty() || matches!(self.node.kind, Kind::Table(_)) {
            return self.err_at(msg);
        }
        let at = self.src.at(&self.node.span, &self.path);
        if self.src.set_by_override(&self.node.span, &self.path) {
            // The override names the key and the value.
            return Error::input(format!("{at}: {msg}"));
        }
        Error::input(format!("{at} = {written}: {msg}"))
    }

    /// `loc: path: msg` (without the value).
    pub fn err_at(&self, msg: impl std::fmt::Display) -> Error {
        Error::input(format!(
            "{}: {msg}",
            self.src.at(&self.node.span, &self.path)
        ))
    }

    fn wrong_type(&self, expected: &str) -> Error {
        self.err(format!(
            "expected {expected}, found {}",
            self.node.kind.type_name()
        ))
    }

    /// A finite number (integers accepted).
    pub fn f64(&self) -> Result<f64, Error> {
        let v = match self.node.kind {
            Kind::Float(f) => f,
            Kind::Int(i) => i as f64,
            _ => return Err(self.wrong_type("a number")),
        };
        if !v.is_finite() {
            return Err(self.err("must be a finite number"));
        }
        Ok(v)
    }

    /// A whole number ≥ 0 (a float with no fractional part is accepted).
    pub fn usize(&self) -> Result<usize, Error> {
        let v = match self.node.kind {
            Kind::Int(i) => i as f64,
            Kind::Float(f) if f.fract() == 0.0 => f,
            Kind::Float(_) => return Err(self.err("expected a whole number")),
            _ => return Err(self.wrong_type("a whole number")),
        };
        if !(0.0..=1e15).contains(&v) {
            return Err(self.err("must be a whole number ≥ 0"));
        }
        Ok(v as usize)
    }

    /// A whole number in `lo..=hi`; the message names the range (and `what`, if given).
    pub fn usize_in(&self, lo: usize, hi: usize, what: &str) -> Result<usize, Error> {
        let range = if what.is_empty() {
            format!("must be a whole number from {lo} to {hi}")
        } else {
            format!("must be a whole number from {lo} to {hi} ({what})")
        };
        let v = match self.node.kind {
            Kind::Int(i) => i as f64,
            Kind::Float(f) if f.fract() == 0.0 => f,
            Kind::Float(_) => return Err(self.err(range)),
            _ => return Err(self.wrong_type("a whole number")),
        };
        if !(lo as f64..=hi as f64).contains(&v) {
            return Err(self.err(range));
        }
        Ok(v as usize)
    }

    pub fn bool(&self) -> Result<bool, Error> {
        match self.node.kind {
            Kind::Bool(b) => Ok(b),
            _ => Err(self.wrong_type("true or false")),
        }
    }

    pub fn str(&self) -> Result<&'a str, Error> {
        match &self.node.kind {
            Kind::Str(s) => Ok(s),
            _ => Err(self.wrong_type("a string")),
        }
    }

    /// A string from a fixed set of choices.
    pub fn choice(&self, allowed: &[&'static str]) -> Result<&'static str, Error> {
        let s = self.str()?;
        if let Some(c) = allowed.iter().find(|c| **c == s) {
            return Ok(c);
        }
        let hint = suggest(s, allowed)
            .map(|k| format!(" (did you mean \"{k}\"?)"))
            .unwrap_or_default();
        Err(self.err(format!(
            "unknown choice{hint}; allowed: {}",
            quoted_list(allowed, "\"")
        )))
    }

    pub fn is_table(&self) -> bool {
        matches!(self.node.kind, Kind::Table(_))
    }

    pub fn is_number(&self) -> bool {
        matches!(self.node.kind, Kind::Float(_) | Kind::Int(_))
    }

    /// The elements of an array; paths `path[1]`, `path[2]`, … (counted from 1).
    pub fn array(&self) -> Result<Vec<Value<'a>>, Error> {
        match &self.node.kind {
            Kind::Array(items) => Ok(items
                .iter()
                .enumerate()
                .map(|(i, node)| Value {
                    src: self.src,
                    node,
                    path: format!("{}[{}]", self.path, i + 1),
                })
                .collect()),
            _ => Err(self.wrong_type("an array")),
        }
    }

    /// The value as a table whose keys must all be in `allowed`.
    pub fn table(&self, allowed: &[&str]) -> Result<Table<'a>, Error> {
        let t = self.named_table()?;
        t.check_keys(allowed)?;
        Ok(t)
    }

    /// The value as a table whose keys are names chosen by the user (any key allowed).
    pub fn named_table(&self) -> Result<Table<'a>, Error> {
        let Kind::Table(entries) = &self.node.kind else {
            return Err(self.wrong_type("a table"));
        };
        Ok(Table {
            src: self.src,
            path: self.path.clone(),
            span: self.node.span.clone(),
            entries,
        })
    }
}

impl<'a> Table<'a> {
    fn child_path(&self, key: &str) -> String {
        if self.path.is_empty() {
            key.to_string()
        } else {
            format!("{}.{key}", self.path)
        }
    }

    fn check_keys(&self, allowed: &[&str]) -> Result<(), Error> {
        for e in self.entries {
            if allowed.contains(&e.key.as_str()) {
                continue;
            }
            let hint = match suggest(&e.key, allowed) {
                Some(k) => format!("; did you mean `{k}`?"),
                None if allowed.is_empty() => "; this table takes no keys".to_string(),
                None => format!("; allowed here: {}", quoted_list(allowed, "`")),
            };
            return Err(Error::input(format!(
                "{}: unknown key `{}`{hint}",
                self.src.at(&e.key_span, &self.child_path(&e.key)),
                e.key
            )));
        }
        Ok(())
    }

    /// The keys present, in file order.
    pub fn keys(&self) -> impl Iterator<Item = &'a str> {
        self.entries.iter().map(|e| e.key.as_str())
    }

    pub fn has(&self, key: &str) -> bool {
        self.entries.iter().any(|e| e.key == key)
    }

    pub fn get(&self, key: &str) -> Option<Value<'a>> {
        self.entries.iter().find(|e| e.key == key).map(|e| Value {
            src: self.src,
            node: &e.node,
            path: self.child_path(key),
        })
    }

    /// Location of a key (for errors about the key itself).
    pub fn key_loc(&self, key: &str) -> String {
        let span = self
            .entries
            .iter()
            .find(|e| e.key == key)
            .map(|e| e.key_span.clone())
            .filter(|s| *s != Span::None);
        self.src.loc(&span.unwrap_or(self.span.clone()))
    }

    /// `loc: path: msg` at the table itself.
    pub fn err(&self, msg: impl std::fmt::Display) -> Error {
        let path = if self.path.is_empty() {
            String::new()
        } else {
            format!(" {}:", self.path)
        };
        Error::input(format!("{}:{path} {msg}", self.src.loc(&self.span)))
    }

    /// A required key; `what` says what it is when it is missing.
    pub fn req(&self, key: &str, what: &str) -> Result<Value<'a>, Error> {
        self.get(key).ok_or_else(|| {
            Error::input(format!(
                "{}: {}: missing key ({what})",
                self.src.loc(&self.span),
                self.child_path(key)
            ))
        })
    }

    pub fn opt_f64(&self, key: &str) -> Result<Option<f64>, Error> {
        self.get(key).map(|v| v.f64()).transpose()
    }

    pub fn f64_or(&self, key: &str, default: f64) -> Result<f64, Error> {
        Ok(self.opt_f64(key)?.unwrap_or(default))
    }

    pub fn bool_or(&self, key: &str, default: bool) -> Result<bool, Error> {
        Ok(self
            .get(key)
            .map(|v| v.bool())
            .transpose()?
            .unwrap_or(default))
    }

    /// A sub-table that may be absent.
    pub fn opt_table(&self, key: &str, allowed: &[&str]) -> Result<Option<Table<'a>>, Error> {
        self.get(key).map(|v| v.table(allowed)).transpose()
    }

    /// Exactly one of `keys` must be present: returns it and its value.
    pub fn one_of(
        &self,
        keys: &[&'static str],
        what: &str,
    ) -> Result<(&'static str, Value<'a>), Error> {
        let mut found: Option<(&'static str, Value<'a>)> = None;
        for k in keys {
            if let Some(v) = self.get(k) {
                if let Some((first, _)) = &found {
                    return Err(Error::input(format!(
                        "{}: {}: conflicts with `{first}`; give only one {what} ({})",
                        self.key_loc(k),
                        self.child_path(k),
                        quoted_list(keys, "`").replace(", ", " | ")
                    )));
                }
                found = Some((k, v));
            }
        }
        found.ok_or_else(|| {
            self.err(format!(
                "missing {what}: give one of {}",
                quoted_list(keys, "`")
            ))
        })
    }

    /// Fails when `key` is present: it only applies when `condition` holds.
    pub fn only_with(&self, key: &str, condition: &str) -> Result<(), Error> {
        match self.get(key) {
            Some(_) => Err(Error::input(format!(
                "{}: {}: only allowed with {condition}",
                self.key_loc(key),
                self.child_path(key)
            ))),
            None => Ok(()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn distance_and_suggestion() {
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("Temperature_c", "temperature_C"), 0);
        assert_eq!(suggest("nn", &["n", "l", "alpha_per_m"]), Some("n"));
        assert_eq!(suggest("depht_m", &["depth_m", "cells"]), Some("depth_m"));
        assert_eq!(suggest("zzzz", &["depth_m", "cells"]), None);
    }

    #[test]
    fn line_and_column() {
        let t = "a = 1\nbé = 2\n";
        assert_eq!(line_col(t, 0), (1, 1));
        assert_eq!(line_col(t, 6), (2, 1));
        assert_eq!(line_col(t, 10), (2, 4));
    }
}
