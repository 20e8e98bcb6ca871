//! An `errors` value as written, read into a type when the plan is parsed.
//!
//! The value takes one of three forms: a plain kind (`"hc1"`), a cluster table
//! (`{ kind = "cluster", by = "COLUMN" }`, or two columns for two-way clustering) or a HAC
//! table (`{ kind = "hac", kernel = "bartlett", bandwidth = 4 }`). Everything that can be
//! decided from the value alone is decided here: the kind, the table's keys, the number of
//! cluster columns, the kernel and the bandwidth. A value of none of these forms becomes
//! [`RawErrors::Invalid`] carrying the message that says how to write it, so the validator
//! reports it at the value's place with the plan's key. What needs the data table (that the
//! cluster columns exist and group, that a HAC table has an `order_by`) is left to
//! `plan::validate`.

use crate::plan::HacBandwidth;
use crate::suggest::hint;
use serde::{Deserialize, Deserializer};

/// The plan spelling of the automatic bandwidth rule.
pub const NEWEY_WEST_1994: &str = "newey-west-1994";

/// How HAC errors are written, quoted in their messages.
const HAC_USAGE: &str = "errors = { kind = \"hac\", kernel = \"bartlett\", bandwidth = 4 } (or bandwidth = \"newey-west-1994\")";

/// The message for a value that is neither a kind nor a table with a kind.
const FORMS: &str = "errors must be one of \"classical\", \"hc0\", \"hc1\", \"hc2\", \"hc3\", { kind = \"cluster\", by = \"COLUMN\" }, or { kind = \"hac\", bandwidth = 4 }";

/// The plain kinds, in the order the messages list them.
const PLAIN: [&str; 5] = ["classical", "hc0", "hc1", "hc2", "hc3"];

/// An `errors` value as written in the plan.
#[derive(Debug, Clone, PartialEq)]
pub enum RawErrors {
    /// `"classical"`: homoskedastic.
    Classical,
    /// `"hc0"`: White.
    Hc0,
    /// `"hc1"`: White with n/(n−k).
    Hc1,
    /// `"hc2"`: leverage-adjusted.
    Hc2,
    /// `"hc3"`: jackknife-like.
    Hc3,
    /// `{ kind = "cluster", by = "COLUMN" }`: one-way clusters (the column not yet resolved).
    Cluster(String),
    /// `{ kind = "cluster", by = ["A", "B"] }`: two-way clusters by two different columns.
    TwoWay(String, String),
    /// `{ kind = "hac", kernel = "bartlett", bandwidth = B }`.
    Hac(HacBandwidth),
    /// A value of none of the forms above: what is wrong with it and how to write it.
    Invalid(String),
}

impl<'de> Deserialize<'de> for RawErrors {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        toml::Value::deserialize(d).map(|v| RawErrors::from_value(&v))
    }
}

impl RawErrors {
    /// Reads any TOML value as an `errors` value; never fails (see [`RawErrors::Invalid`]).
    pub fn from_value(v: &toml::Value) -> RawErrors {
        match v {
            toml::Value::String(kind) => from_kind(kind, None),
            toml::Value::Table(t) => from_table(t),
            _ => RawErrors::Invalid(FORMS.to_string()),
        }
    }
}

/// The table form: HAC, or a kind with an optional `by`.
fn from_table(t: &toml::Table) -> RawErrors {
    let kind = t.get("kind").and_then(toml::Value::as_str);
    if kind == Some("hac") {
        return hac(t);
    }
    if let Some(extra) = t.keys().find(|k| *k != "kind" && *k != "by") {
        return RawErrors::Invalid(format!("unknown key `{extra}` in errors; use kind and by"));
    }
    match kind {
        Some(kind) => from_kind(kind, t.get("by")),
        None => RawErrors::Invalid(FORMS.to_string()),
    }
}

/// A kind written as a string, alone or in a table with `by`.
fn from_kind(kind: &str, by: Option<&toml::Value>) -> RawErrors {
    let plain = match kind {
        "cluster" => return cluster(by),
        "hac" => {
            return RawErrors::Invalid(format!("hac errors need a bandwidth: {HAC_USAGE}"));
        }
        "classical" => RawErrors::Classical,
        "hc0" => RawErrors::Hc0,
        "hc1" => RawErrors::Hc1,
        "hc2" => RawErrors::Hc2,
        "hc3" => RawErrors::Hc3,
        unknown => {
            return RawErrors::Invalid(format!(
                "unknown error kind `{}`; use one of \"classical\", \"hc0\", \"hc1\", \"hc2\", \"hc3\", {{ kind = \"cluster\", by = \"COLUMN\" }} or {{ kind = \"hac\", kernel = \"bartlett\", bandwidth = … }}{}",
                crate::escape::clip(unknown, crate::escape::SHOWN),
                hint(unknown, PLAIN.iter().copied().chain(["cluster", "hac"]))
            ));
        }
    };
    match by {
        Some(_) => RawErrors::Invalid("`by` only goes with kind = \"cluster\"".to_string()),
        None => plain,
    }
}

/// `by` of a cluster table: one column, or a list of two different ones.
fn cluster(by: Option<&toml::Value>) -> RawErrors {
    let names: Vec<String> = match by {
        Some(toml::Value::String(b)) => vec![b.clone()],
        Some(toml::Value::Array(a)) => a
            .iter()
            .filter_map(|x| x.as_str().map(String::from))
            .collect(),
        _ => return RawErrors::Invalid(
            "cluster errors need by = \"COLUMN\" (or a list of two columns for two-way clustering)"
                .to_string(),
        ),
    };
    match names.as_slice() {
        [one] => RawErrors::Cluster(one.clone()),
        [a, b] if a == b => {
            RawErrors::Invalid("two-way clustering needs two different columns".to_string())
        }
        [a, b] => RawErrors::TwoWay(a.clone(), b.clone()),
        _ => RawErrors::Invalid("cluster errors take one or two cluster columns".to_string()),
    }
}

/// The HAC table: its keys, the kernel and the bandwidth.
fn hac(t: &toml::Table) -> RawErrors {
    if let Some(extra) = t
        .keys()
        .find(|k| !["kind", "kernel", "bandwidth"].contains(&k.as_str()))
    {
        return RawErrors::Invalid(format!(
            "unknown key `{extra}` in hac errors; use kind, kernel and bandwidth: {HAC_USAGE}"
        ));
    }
    match t.get("kernel") {
        None => {}
        Some(toml::Value::String(k)) if k == "bartlett" => {}
        Some(other) => {
            return RawErrors::Invalid(format!(
                "kernel {other} is not available; the one HAC kernel is \"bartlett\""
            ))
        }
    }
    match t.get("bandwidth") {
        Some(toml::Value::Integer(b)) if *b >= 1 && *b <= i64::from(u32::MAX) => {
            RawErrors::Hac(HacBandwidth::Stated(*b as u32))
        }
        Some(toml::Value::String(s)) if s == NEWEY_WEST_1994 => {
            RawErrors::Hac(HacBandwidth::NeweyWest1994)
        }
        Some(other) => RawErrors::Invalid(format!(
            "bandwidth {other} is not valid: give a whole number of at least 1 (lag d gets weight 1 − d/bandwidth) or \"{NEWEY_WEST_1994}\""
        )),
        None => RawErrors::Invalid(format!("hac errors need a bandwidth: {HAC_USAGE}")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> RawErrors {
        #[derive(Deserialize)]
        struct Holder {
            errors: RawErrors,
        }
        let holder: Holder = toml::from_str(&format!("errors = {text}")).expect("valid TOML");
        holder.errors
    }

    fn invalid(text: &str) -> String {
        match read(text) {
            RawErrors::Invalid(m) => m,
            other => panic!("{text} read as {other:?}"),
        }
    }

    #[test]
    fn each_form_reads_as_its_variant() {
        assert_eq!(read("\"classical\""), RawErrors::Classical);
        assert_eq!(read("\"hc0\""), RawErrors::Hc0);
        assert_eq!(read("\"hc1\""), RawErrors::Hc1);
        assert_eq!(read("{ kind = \"hc2\" }"), RawErrors::Hc2);
        assert_eq!(read("\"hc3\""), RawErrors::Hc3);
        assert_eq!(
            read("{ kind = \"cluster\", by = \"village\" }"),
            RawErrors::Cluster("village".into())
        );
        assert_eq!(
            read("{ kind = \"cluster\", by = [\"village\", \"week\"] }"),
            RawErrors::TwoWay("village".into(), "week".into())
        );
        assert_eq!(
            read("{ kind = \"hac\", bandwidth = 3 }"),
            RawErrors::Hac(HacBandwidth::Stated(3))
        );
        assert_eq!(
            read("{ kind = \"hac\", kernel = \"bartlett\", bandwidth = \"newey-west-1994\" }"),
            RawErrors::Hac(HacBandwidth::NeweyWest1994)
        );
    }

    #[test]
    fn each_wrong_shape_says_how_to_write_it() {
        assert!(invalid("3").starts_with("errors must be one of"));
        assert!(invalid("{ by = \"v\" }").starts_with("errors must be one of"));
        assert!(invalid("\"hc4\"").starts_with("unknown error kind `hc4`"));
        assert!(invalid("\"hac\"").starts_with("hac errors need a bandwidth"));
        assert!(invalid("{ kind = \"hc1\", by = \"v\" }").starts_with("`by` only goes with"));
        assert!(invalid("{ kind = \"cluster\", on = \"v\" }").starts_with("unknown key `on`"));
        assert!(invalid("\"cluster\"").starts_with("cluster errors need by"));
        assert!(invalid("{ kind = \"cluster\", by = [] }").starts_with("cluster errors take one"));
        assert!(invalid("{ kind = \"cluster\", by = [\"a\", \"a\"] }")
            .starts_with("two-way clustering needs two different"));
        assert!(invalid("{ kind = \"hac\", bandwidth = 2, by = \"t\" }")
            .starts_with("unknown key `by` in hac errors"));
        assert!(
            invalid("{ kind = \"hac\", kernel = \"parzen\", bandwidth = 2 }")
                .starts_with("kernel \"parzen\" is not available")
        );
        assert!(
            invalid("{ kind = \"hac\", bandwidth = 0 }").starts_with("bandwidth 0 is not valid")
        );
        assert!(invalid("{ kind = \"hac\" }").starts_with("hac errors need a bandwidth"));
    }
}
