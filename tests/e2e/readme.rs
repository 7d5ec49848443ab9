//! The README's `diffusor.fit/1` example is real output: the command it names, run now, prints
//! the same document — the same keys in the same order, the same strings, and the same numbers
//! (to 1e-9 relative, so that a last-digit difference of floating-point summation order on
//! another machine does not fail it).

use serde_json::Value;

use crate::{diffusor, repo, stderr, stdout};

/// The first ```json block of the README.
fn readme_json() -> Value {
    let text = std::fs::read_to_string(repo().join("README.md")).expect("README.md");
    let start = text.find("```json\n").expect("a json block") + "```json\n".len();
    let end = start + text[start..].find("\n```").expect("its end");
    serde_json::from_str(&text[start..end]).expect("the README's JSON parses")
}

fn same(path: &str, a: &Value, b: &Value) {
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            let kx: Vec<&String> = x.keys().collect();
            let ky: Vec<&String> = y.keys().collect();
            assert_eq!(kx, ky, "keys of {path}");
            for (k, v) in x {
                same(&format!("{path}.{k}"), v, &y[k]);
            }
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "length of {path}");
            for (i, (u, v)) in x.iter().zip(y).enumerate() {
                same(&format!("{path}[{i}]"), u, v);
            }
        }
        (Value::Number(x), Value::Number(y)) => {
            let (u, v) = (x.as_f64().expect("f64"), y.as_f64().expect("f64"));
            assert!(
                (u - v).abs() <= 1e-9 * u.abs().max(v.abs()),
                "{path}: README {u}, output {v}"
            );
        }
        _ => assert_eq!(a, b, "{path}"),
    }
}

#[test]
fn the_readme_json_example_is_what_the_program_prints() {
    let out = diffusor(&[
        "fit",
        "--json",
        "--area",
        "0.0707+-0.0007",
        "--conc",
        "1.00+-0.01",
        "sample-data/planar-rep1.csv",
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let printed: Value = serde_json::from_str(&stdout(&out)).expect("json");
    let mut expected = readme_json();
    // The version moves with every release; the README shows the one it was written for.
    expected["version"] = printed["version"].clone();
    same("$", &expected, &printed);
}
