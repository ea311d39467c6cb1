//! The JSON Schemas of the `--json` outputs (`docs/schema/*.schema.json`):
//! the published files equal what `pondus::result::schema` generates (and
//! what `pondus schema COMMAND` prints), they are valid draft 2020-12
//! schemas, and every JSON document in the golden outputs validates against
//! the schema of its subcommand, both as published and in a strict form
//! that allows no key the schema does not list.
//!
//! The validator is the `jsonschema` crate (0.61, draft 2020-12, the draft
//! schemars 1.x emits). A change of the result types rewrites the published
//! files with `PONDUS_BLESS=1 cargo test --test integration schema`.

use crate::util::repo;
use assert_cmd::Command;
use pondus::result::schema::JsonOutput;
use serde_json::Value;
use std::path::PathBuf;

/// The folder of the published schemas.
fn schema_dir() -> PathBuf {
    repo("docs/schema")
}

/// Whether this run rewrites the published files instead of comparing.
fn bless() -> bool {
    std::env::var_os("PONDUS_BLESS").is_some_and(|v| v == "1")
}

/// The published schema of a subcommand, parsed.
fn published(which: JsonOutput) -> Value {
    let path = schema_dir().join(which.file_name());
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// Keywords whose value maps names to schemas.
const SCHEMA_MAPS: [&str; 4] = [
    "properties",
    "$defs",
    "patternProperties",
    "dependentSchemas",
];
/// Keywords whose value is data, not a schema.
const DATA: [&str; 6] = [
    "const",
    "enum",
    "required",
    "default",
    "examples",
    "description",
];

/// Adds `additionalProperties: false` to every object schema that lists
/// `properties` (and does not set it already), through every subschema.
fn close(schema: &mut Value) {
    let Some(map) = schema.as_object_mut() else {
        if let Some(list) = schema.as_array_mut() {
            list.iter_mut().for_each(close);
        }
        return;
    };
    if map.contains_key("properties") && !map.contains_key("additionalProperties") {
        map.insert("additionalProperties".into(), Value::Bool(false));
    }
    for (key, child) in map.iter_mut() {
        if SCHEMA_MAPS.contains(&key.as_str()) {
            child
                .as_object_mut()
                .into_iter()
                .flatten()
                .for_each(|(_, s)| close(s));
        } else if !DATA.contains(&key.as_str()) {
            close(child);
        }
    }
}

/// The strict form of a schema: no key that it does not list.
fn strict(which: JsonOutput) -> Value {
    let mut s = published(which);
    close(&mut s);
    s
}

/// A validator of draft 2020-12 for a schema.
fn validator(schema: &Value) -> jsonschema::Validator {
    jsonschema::draft202012::new(schema).expect("the schema compiles")
}

/// The validation errors of a document, one line each (at most five).
fn errors(v: &jsonschema::Validator, doc: &Value) -> Vec<String> {
    v.iter_errors(doc)
        .take(5)
        .map(|e| format!("at {}: {e}", e.instance_path()))
        .collect()
}

/// One JSON document of a golden file.
struct Doc {
    /// Golden file and where in it (`stdout of …` or `file: …`).
    place: String,
    /// The subcommand that wrote it.
    which: JsonOutput,
    /// The document.
    value: Value,
}

/// The subcommand of a command line (`pondus fit …` → fit).
fn subcommand(command: &str) -> JsonOutput {
    let word = command.split_whitespace().nth(1).unwrap_or("");
    JsonOutput::ALL
        .into_iter()
        .find(|w| w.id() == word)
        .unwrap_or_else(|| panic!("no JSON output for the command '{command}'"))
}

/// Whether a command line has `--json TARGET`.
fn writes_json(command: &str, target: &str) -> bool {
    let args: Vec<&str> = command.split_whitespace().collect();
    args.windows(2).any(|w| w == ["--json", target])
}

/// The blocks of a golden file: (title, body).
fn blocks(text: &str) -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = Vec::new();
    for line in text.split_inclusive('\n') {
        match line.strip_prefix("━━━━ ") {
            Some(title) => out.push((title.trim_end().to_string(), String::new())),
            None => out
                .last_mut()
                .expect("a golden file starts with a block title")
                .1
                .push_str(line),
        }
    }
    out
}

/// Every JSON document of a golden file: the standard output of each
/// command with `--json -`, and each file written with `--json NAME`.
fn golden_docs(name: &str, text: &str) -> Vec<Doc> {
    let blocks = blocks(text);
    let commands: Vec<&str> = blocks
        .iter()
        .filter_map(|(t, _)| t.strip_prefix("command: "))
        .collect();
    let mut docs = Vec::new();
    let mut current = "";
    for (title, body) in &blocks {
        let (place, which) = if let Some(c) = title.strip_prefix("command: ") {
            current = c;
            continue;
        } else if title == "stdout" && writes_json(current, "-") {
            (
                format!("{name}: stdout of '{current}'"),
                subcommand(current),
            )
        } else if let Some(file) = title
            .strip_prefix("file: ")
            .filter(|f| f.ends_with(".json"))
        {
            let writer = commands
                .iter()
                .find(|c| writes_json(c, file))
                .unwrap_or_else(|| panic!("{name}: no command wrote {file} with --json"));
            (format!("{name}: file {file}"), subcommand(writer))
        } else {
            continue;
        };
        let value = serde_json::from_str(body).unwrap_or_else(|e| panic!("{place}: {e}"));
        docs.push(Doc {
            place,
            which,
            value,
        });
    }
    docs
}

/// Every JSON document of every golden file.
fn all_golden_docs() -> Vec<Doc> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(repo("tests/golden"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "txt"))
        .collect();
    files.sort();
    files
        .iter()
        .flat_map(|p| {
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            golden_docs(&name, &std::fs::read_to_string(p).unwrap())
        })
        .collect()
}

/// A golden `fit` document to break on purpose.
fn a_fit_doc() -> Value {
    all_golden_docs()
        .into_iter()
        .find(|d| d.which == JsonOutput::Fit && d.place.contains("precomputed-json-stdout"))
        .expect("the precomputed-json-stdout golden case writes fit JSON to stdout")
        .value
}

#[test]
fn published_schemas_are_the_generated_ones() {
    let mut differ = Vec::new();
    for which in JsonOutput::ALL {
        let path = schema_dir().join(which.file_name());
        let generated = which.text();
        if bless() {
            std::fs::create_dir_all(schema_dir()).unwrap();
            std::fs::write(&path, &generated).unwrap();
        } else if std::fs::read_to_string(&path).ok().as_deref() != Some(generated.as_str()) {
            differ.push(path.display().to_string());
        }
    }
    assert!(
        differ.is_empty(),
        "the published schemas differ from the generated ones (rewrite with PONDUS_BLESS=1 \
         and say why in the commit): {differ:?}"
    );
}

#[test]
fn the_schema_command_prints_the_published_schema() {
    for which in JsonOutput::ALL {
        let out = Command::cargo_bin("pondus")
            .unwrap()
            .args(["schema", which.id()])
            .output()
            .unwrap();
        assert!(out.status.success(), "pondus schema {which}");
        assert_eq!(String::from_utf8(out.stdout).unwrap(), which.text());
    }
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .args(["schema", "columns"])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(2),
        "an unknown subcommand is a usage error"
    );
    assert!(String::from_utf8_lossy(&out.stderr).contains("invalid value 'columns'"));
}

#[test]
fn published_schemas_are_valid_draft_2020_12() {
    for which in JsonOutput::ALL {
        let s = published(which);
        assert_eq!(s["$schema"], "https://json-schema.org/draft/2020-12/schema");
        if let Err(e) = jsonschema::draft202012::meta::validate(&s) {
            panic!("{}: {e}", which.file_name());
        }
        jsonschema::draft202012::meta::validate(&strict(which)).unwrap();
    }
}

#[test]
fn every_golden_json_output_validates_against_its_schema() {
    let docs = all_golden_docs();
    let mut failures = Vec::new();
    for which in JsonOutput::ALL {
        let open = validator(&published(which));
        let closed = validator(&strict(which));
        let mine: Vec<&Doc> = docs.iter().filter(|d| d.which == which).collect();
        assert!(
            mine.len() >= 3,
            "only {} golden {which} documents found",
            mine.len()
        );
        for d in mine {
            for (form, v) in [("published", &open), ("strict", &closed)] {
                let e = errors(v, &d.value);
                if !e.is_empty() {
                    failures.push(format!(
                        "{} ({form} {which} schema):\n  {}",
                        d.place,
                        e.join("\n  ")
                    ));
                }
            }
        }
    }
    assert!(
        docs.len() >= 30,
        "only {} golden JSON documents found",
        docs.len()
    );
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn a_changed_type_or_an_unknown_key_fails_strict_validation() {
    let doc = a_fit_doc();
    let open = validator(&published(JsonOutput::Fit));
    let closed = validator(&strict(JsonOutput::Fit));
    assert!(closed.is_valid(&doc) && open.is_valid(&doc));

    // `k` as a string: neither form accepts it.
    let mut wrong_type = doc.clone();
    wrong_type["k"] = Value::from("10");
    let e = errors(&closed, &wrong_type);
    assert!(e.iter().any(|m| m.starts_with("at /k:")), "{e:?}");
    assert!(!open.is_valid(&wrong_type));

    // An unknown key at the top and one inside a study ($defs/Study):
    // strict validation rejects them, the published schema leaves room.
    for pointer in ["", "/studies/0"] {
        let mut extra = doc.clone();
        extra
            .pointer_mut(pointer)
            .unwrap()
            .as_object_mut()
            .unwrap()
            .insert("unexpected_key".into(), Value::from(1));
        let e = errors(&closed, &extra);
        assert!(
            e.iter().any(|m| m.contains("unexpected_key")),
            "{pointer}: {e:?}"
        );
        assert!(open.is_valid(&extra), "{pointer}");
    }

    // A required key missing, a choice outside its words, and a null where
    // the field is not optional: both forms reject them.
    let mut broken = doc.clone();
    broken.as_object_mut().unwrap().remove("heterogeneity");
    assert!(!open.is_valid(&broken));
    let mut broken = doc.clone();
    broken["model"]["tau2_method"] = Value::from("reml2");
    assert!(!open.is_valid(&broken));
    let mut broken = doc;
    broken["studies"][0]["effect"] = Value::Null;
    assert!(!open.is_valid(&broken));
}

#[test]
fn closing_a_schema_reaches_nested_and_referenced_objects() {
    let mut s = serde_json::json!({
        "type": "object",
        "properties": {"a": {"$ref": "#/$defs/A"}, "properties": {"type": "string"}},
        "$defs": {"A": {"anyOf": [{"type": "object", "properties": {"b": {"type": "number"}}}, {"type": "null"}]}}
    });
    close(&mut s);
    assert_eq!(s["additionalProperties"], false);
    assert_eq!(s["$defs"]["A"]["anyOf"][0]["additionalProperties"], false);
    // A property named "properties" is a property, not a schema keyword.
    assert!(s["properties"].get("additionalProperties").is_none());
    assert!(s["properties"]["properties"]
        .get("additionalProperties")
        .is_none());
}

/// Runs `pondus ARGS --json -` in the repository and parses its output.
fn json_of(args: &str) -> Value {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .current_dir(repo(""))
        .args(args.split_whitespace())
        .args(["--json", "-"])
        .write_stdin(Vec::new())
        .output()
        .unwrap();
    assert!(out.status.success(), "pondus {args}");
    serde_json::from_slice(&out.stdout).unwrap()
}

/// The golden outputs never hold the types below (or only as null); these
/// runs do, and they validate strictly too.
#[test]
fn outputs_beyond_the_golden_cases_validate_too() {
    let cases = [
        // Shrunken estimates with a reading scale (ShrunkenReading), and a
        // prediction outside the moderator's range (Prediction.outside_range).
        (
            JsonOutput::Fit,
            "fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes \
             --moderator mode --shrink --at session_minutes=500,mode=online",
            ["/studies/0/shrunken/reading", "/predictions/0/outside_range/0"],
        ),
        // The Knapp–Hartung k confirmed by simulation (SimulatedK, KPower).
        (
            JsonOutput::Plan,
            "plan --measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 \
             --target-power 0.8",
            ["/k_needed_simulated/evaluated/0/power", "/k_needed_answer/check_k"],
        ),
        // Participants per site that differ (n_sites).
        (
            JsonOutput::Plan,
            "plan --measure smd --k 12 --n 40,60,80 --tau2 0.02 --share 0.5 \
             --moderator-effect 0.3 --test z",
            ["/n_sites/2", "/table/0/power"],
        ),
    ];
    for (which, args, pointers) in cases {
        let doc = json_of(args);
        for p in pointers {
            let v = doc.pointer(p);
            assert!(v.is_some_and(|v| !v.is_null()), "{args}: nothing at {p}");
        }
        let e = errors(&validator(&strict(which)), &doc);
        assert!(e.is_empty(), "{args}:\n  {}", e.join("\n  "));
    }
}
