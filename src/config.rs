//! The analysis configuration file: a TOML with one section per stage.
//!
//! Every key has a default, so an empty file (or none) is a valid
//! configuration; unknown keys are errors naming the file, the line and the
//! key. `mirrorsite config --defaults` prints every key with its default and
//! a comment saying what it does and where the default comes from.
//!
//! Each section's struct lives in its stage's module and implements
//! [`ConfigSection`]; adding a stage means adding a field to [`Config`]
//! and a line to [`Config::defaults_toml`] and [`Config::validate`].

use crate::align::AlignConfig;
use crate::error::{Error, InputError, InputErrorKind, Result};
use crate::plan::PlanConfig;
use crate::select::SelectConfig;
use crate::signal::SignalConfig;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// A section of the configuration file, documented key by key.
pub trait ConfigSection: Serialize + Default {
    /// Table name in the file.
    const NAME: &'static str;
    /// One sentence about the section.
    const ABOUT: &'static str;
    /// For every key (dotted inside sub-tables, e.g. `quality.clip_bad`), what it
    /// does and the source of its default.
    const KEYS: &'static [(&'static str, &'static str)];
}

/// The whole analysis configuration.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Config {
    /// Signal conditioning and channel quality.
    pub signal: SignalConfig,
    /// Alignment of the intact side onto the EMG clock.
    pub align: AlignConfig,
    /// Per-DoF selection.
    pub select: SelectConfig,
    /// The site plan.
    pub plan: PlanConfig,
}

impl Config {
    /// Reads and checks a configuration file.
    pub fn load(path: impl AsRef<Path>) -> Result<Config> {
        let path = path.as_ref();
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Config::from_toml(&text, path)
    }

    /// Reads `path` when given, else the defaults.
    pub fn load_or_default(path: Option<&Path>) -> Result<Config> {
        path.map_or_else(|| Ok(Config::default()), Config::load)
    }

    /// Parses and checks configuration text; `file` names it in errors.
    pub fn from_toml(text: &str, file: &Path) -> Result<Config> {
        let cfg: Config = toml::from_str(text).map_err(|e| toml_error(&e, text, file))?;
        cfg.validate().map_err(|(key, message)| {
            let mut err =
                InputError::new(file, InputErrorKind::OutOfRange, message).field(key.clone());
            if let Some(line) = locate_key(text, &key) {
                err = err.at_line(line);
            }
            Error::from(err)
        })?;
        Ok(cfg)
    }

    /// Checks every section; on failure the dotted key and the message.
    pub fn validate(&self) -> std::result::Result<(), (String, String)> {
        self.signal
            .validate()
            .map_err(|e| (format!("{}.{}", SignalConfig::NAME, e.key), e.message))?;
        self.align
            .check()
            .map_err(|(k, m)| (format!("{}.{k}", AlignConfig::NAME), m))?;
        self.select
            .check()
            .map_err(|(k, m)| (format!("{}.{k}", SelectConfig::NAME), m))?;
        self.plan
            .check()
            .map_err(|(k, m)| (format!("{}.{k}", PlanConfig::NAME), m))
    }

    /// The default configuration as commented TOML: every key with its
    /// default value and what it means. Parsing it gives [`Config::default`].
    pub fn defaults_toml() -> String {
        let mut out = String::from(
            "# mirrorsite analysis configuration.\n\
             # Every key is optional: a missing key takes the default shown here.\n\
             # Unknown keys are errors.\n",
        );
        render_section::<SignalConfig>(&mut out);
        render_section::<AlignConfig>(&mut out);
        render_section::<SelectConfig>(&mut out);
        render_section::<PlanConfig>(&mut out);
        out
    }
}

fn comment(out: &mut String, text: &str) {
    // Wrap at about 88 columns.
    let mut line = String::from("#");
    for word in text.split_whitespace() {
        if line.len() + word.len() + 1 > 88 {
            out.push_str(&line);
            out.push('\n');
            line = String::from("#");
        }
        line.push(' ');
        line.push_str(word);
    }
    out.push_str(&line);
    out.push('\n');
}

fn doc_of<S: ConfigSection>(key: &str) -> &'static str {
    S::KEYS
        .iter()
        .find(|(k, _)| *k == key)
        .map(|(_, d)| *d)
        .unwrap_or("(undocumented)")
}

/// Keys directly inside the table at `prefix`, in the order of `S::KEYS`.
fn keys_at<S: ConfigSection>(prefix: &str) -> impl Iterator<Item = &'static str> + '_ {
    S::KEYS
        .iter()
        .filter_map(move |(k, _)| k.strip_prefix(prefix).filter(|rest| !rest.contains('.')))
}

fn render_table<S: ConfigSection>(out: &mut String, header: &str, prefix: &str, t: &toml::Table) {
    out.push_str(&format!("\n[{header}]\n"));
    for k in keys_at::<S>(prefix) {
        if let Some(v) = t.get(k).filter(|v| !v.is_table()) {
            comment(out, doc_of::<S>(&format!("{prefix}{k}")));
            out.push_str(&format!("{k} = {v}\n"));
        }
    }
    for k in keys_at::<S>(prefix) {
        if let Some(toml::Value::Table(sub)) = t.get(k) {
            let key = format!("{prefix}{k}");
            out.push('\n');
            comment(out, doc_of::<S>(&key));
            render_table::<S>(out, &format!("{header}.{k}"), &format!("{key}."), sub);
        }
    }
}

fn render_section<S: ConfigSection>(out: &mut String) {
    let table = toml::Table::try_from(S::default()).expect("defaults serialise to a TOML table");
    out.push('\n');
    comment(out, S::ABOUT);
    render_table::<S>(out, S::NAME, "", &table);
}

/// 1-based line of a byte offset.
fn line_of(text: &str, offset: usize) -> usize {
    text[..offset.min(text.len())].matches('\n').count() + 1
}

/// Dotted name of the table whose header precedes `line` (1-based).
fn table_at(text: &str, line: usize) -> String {
    text.lines()
        .take(line)
        .filter_map(|l| {
            let l = l.trim();
            (l.starts_with('[') && !l.starts_with("[[")).then(|| {
                l.trim_start_matches('[')
                    .split(']')
                    .next()
                    .unwrap_or("")
                    .trim()
                    .to_string()
            })
        })
        .last()
        .unwrap_or_default()
}

fn toml_error(e: &toml::de::Error, text: &str, file: &Path) -> Error {
    let msg = e.message().to_string();
    let kind = if msg.starts_with("unknown field") {
        InputErrorKind::Unexpected
    } else if msg.starts_with("invalid") || msg.contains("expected") {
        InputErrorKind::BadValue
    } else {
        InputErrorKind::Malformed
    };
    let mut err = InputError::new(file, kind, msg);
    if let Some(span) = e.span() {
        let line = line_of(text, span.start);
        err = err.at_line(line);
        let src_line = text.lines().nth(line - 1).unwrap_or("");
        let spanned = text
            .get(span.clone())
            .unwrap_or("")
            .trim()
            .trim_matches(['"', '[', ']']);
        let key = match src_line.split_once('=') {
            Some((k, _)) if !src_line.trim_start().starts_with('[') => k.trim().to_string(),
            _ => spanned.to_string(),
        };
        let table = if src_line.trim_start().starts_with('[') {
            String::new()
        } else {
            table_at(text, line)
        };
        let field = match (table.is_empty(), key.is_empty()) {
            (_, true) => table,
            (true, false) => key,
            (false, false) => format!("{table}.{key}"),
        };
        if !field.is_empty() {
            err = err.field(field);
        }
    }
    err.into()
}

/// 1-based line where the dotted `key` (e.g. `signal.quality.clip_bad`) is set.
fn locate_key(text: &str, key: &str) -> Option<usize> {
    let (table, leaf) = key.rsplit_once('.')?;
    let mut current = String::new();
    for (i, l) in text.lines().enumerate() {
        let t = l.trim();
        if t.starts_with('[') {
            current = t
                .trim_start_matches('[')
                .split(']')
                .next()
                .unwrap_or("")
                .trim()
                .to_string();
        } else if let Some((k, _)) = t.split_once('=') {
            if current == table && k.trim() == leaf {
                return Some(i + 1);
            }
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeSet;

    #[test]
    fn defaults_parse_back_to_defaults() {
        let text = Config::defaults_toml();
        let cfg = Config::from_toml(&text, Path::new("defaults.toml")).unwrap();
        assert_eq!(cfg, Config::default());
        assert!(!text.contains("(undocumented)"), "{text}");
    }

    #[test]
    fn every_documented_key_exists_and_every_key_is_documented() {
        fn keys(t: &toml::Table, prefix: &str, out: &mut BTreeSet<String>) {
            for (k, v) in t {
                let key = format!("{prefix}{k}");
                if let toml::Value::Table(sub) = v {
                    keys(sub, &format!("{key}."), out);
                }
                out.insert(key);
            }
        }
        let mut actual = BTreeSet::new();
        keys(
            &toml::Table::try_from(SignalConfig::default()).unwrap(),
            "",
            &mut actual,
        );
        let documented: BTreeSet<String> = SignalConfig::KEYS
            .iter()
            .map(|(k, _)| k.to_string())
            .collect();
        assert_eq!(actual, documented);
    }

    #[test]
    fn empty_file_is_the_default() {
        let cfg = Config::from_toml("", Path::new("a.toml")).unwrap();
        assert_eq!(cfg, Config::default());
    }

    #[test]
    fn partial_file_overrides_only_its_keys() {
        let text = "[signal]\nmains = 60\nenvelope = \"rms\"\n[signal.quality]\nclip_bad = 0.2\n";
        let cfg = Config::from_toml(text, Path::new("a.toml")).unwrap();
        assert_eq!(cfg.signal.mains, crate::signal::Mains::Fixed(60.0));
        assert_eq!(cfg.signal.envelope, crate::signal::EnvelopeKind::Rms);
        assert_eq!(cfg.signal.quality.clip_bad, 0.2);
        assert_eq!(cfg.signal.bandpass_hz, [20.0, 450.0]);
    }

    #[test]
    fn unknown_key_names_file_line_and_key() {
        let text = "[signal]\nenvelope_hz = 4.0\n\n[signal.quality]\nclip_badd = 0.2\n";
        let err = Config::from_toml(text, Path::new("cfg.toml")).unwrap_err();
        let e = err.as_input().expect("an input error");
        assert_eq!(e.kind, InputErrorKind::Unexpected);
        assert_eq!(e.line, Some(5));
        assert_eq!(e.field.as_deref(), Some("signal.quality.clip_badd"));
        assert_eq!(e.file, Path::new("cfg.toml"));
    }

    #[test]
    fn unknown_section_and_bad_type_are_errors() {
        let err = Config::from_toml("[sgnal]\n", Path::new("c.toml")).unwrap_err();
        let e = err.as_input().unwrap();
        assert_eq!((e.line, e.field.as_deref()), (Some(1), Some("sgnal")));
        let err =
            Config::from_toml("[signal]\nnotch_q = \"high\"\n", Path::new("c.toml")).unwrap_err();
        let e = err.as_input().unwrap();
        assert_eq!(e.kind, InputErrorKind::BadValue);
        assert_eq!(
            (e.line, e.field.as_deref()),
            (Some(2), Some("signal.notch_q"))
        );
    }

    #[test]
    fn out_of_range_value_names_its_line() {
        let text = "[signal]\n\n[signal.quality]\nclip_bad = 3.0\n";
        let err = Config::from_toml(text, Path::new("c.toml")).unwrap_err();
        let e = err.as_input().unwrap();
        assert_eq!(e.kind, InputErrorKind::OutOfRange);
        assert_eq!(e.line, Some(4));
        assert_eq!(e.field.as_deref(), Some("signal.quality.clip_bad"));
    }
}
