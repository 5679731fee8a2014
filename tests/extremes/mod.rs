//! What the tests of values at the ends of their range share (`settings_extremes`,
//! `scenario_extremes`): the numeric fields of a JSON document, numbers from the whole range
//! of doubles and 64-bit integers, the key a refusal should name, and a panic's words.
#![allow(dead_code)]

use proptest::prelude::*;
use serde_json::Value;

/// Every numeric leaf of `v` (and every `null` one, when `with_null`: an absent optional
/// setting), as JSON pointers below `at`.
pub fn numeric_leaves(v: &Value, at: &str, with_null: bool, out: &mut Vec<String>) {
    match v {
        Value::Object(map) => {
            for (k, child) in map {
                numeric_leaves(child, &format!("{at}/{k}"), with_null, out);
            }
        }
        Value::Array(items) => {
            for (i, child) in items.iter().enumerate() {
                numeric_leaves(child, &format!("{at}/{i}"), with_null, out);
            }
        }
        Value::Number(_) => out.push(at.to_string()),
        Value::Null if with_null => out.push(at.to_string()),
        _ => {}
    }
}

/// A number from anywhere in the range of finite doubles, of `u64` or of `i64`.
pub fn any_json_number() -> impl Strategy<Value = Value> {
    prop_oneof![
        any::<f64>()
            .prop_filter("JSON holds finite numbers", |v| v.is_finite())
            .prop_map(Value::from),
        any::<u64>().prop_map(Value::from),
        any::<i64>().prop_map(Value::from),
    ]
}

/// The key a refusal of the value at `leaf` should name: its last key or, for an array item,
/// the array's key.
pub fn key_of(leaf: &str) -> &str {
    leaf.rsplit('/')
        .find(|k| k.parse::<usize>().is_err())
        .unwrap_or(leaf)
}

/// The words a panic carried.
pub fn panic_words(cause: &(dyn std::any::Any + Send)) -> String {
    cause
        .downcast_ref::<String>()
        .cloned()
        .or_else(|| cause.downcast_ref::<&str>().map(|s| s.to_string()))
        .unwrap_or_default()
}
