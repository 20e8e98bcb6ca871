//! `--json`: one JSON object on standard output per command, for editors' and auditors'
//! scripts. The shape is documented in docs/json-output.md and versioned by `json_format`;
//! keys are only ever added within a version. Strings are JSON-escaped, so no plan or data
//! text can break the object.

use serde_json::{json, Value};

/// The version of the shapes below.
pub const JSON_FORMAT: u32 = 1;

/// The envelope every command's object shares.
pub fn envelope(command: &str, exit_code: i32, body: Value) -> Value {
    let mut out = json!({
        "json_format": JSON_FORMAT,
        "command": command,
        "exit_code": exit_code,
    });
    if let (Some(o), Value::Object(b)) = (out.as_object_mut(), body) {
        o.extend(b);
    }
    out
}

/// Print `value` as one line.
pub fn emit(value: &Value) {
    println!("{value}");
}

/// The object printed for a command that stopped with an error (exit code 2).
pub fn error(command: &str, message: &str) -> Value {
    envelope(command, 2, json!({ "error": message }))
}
