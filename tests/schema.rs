//! `carrywright schema`: every file in configs/ is valid against its JSON Schema (checked by
//! a small validator of the keywords the schemas use: type, enum, const, properties,
//! additionalProperties, required, items, anyOf, minimum, maximum, minItems, $ref; JSON
//! Schema draft 2020-12, json-schema.org), every key the schemas list is one the parsers
//! accept, and a key they do not list is refused by both.

use serde_json::Value;
use std::path::Path;

fn check(schema: &Value, v: &Value, defs: &[(&str, Value)], path: &str) -> Result<(), String> {
    if let Some(r) = schema.get("$ref").and_then(Value::as_str) {
        let target = &defs
            .iter()
            .find(|(id, _)| *id == r)
            .ok_or(format!("no {r}"))?
            .1;
        return check(target, v, defs, path);
    }
    if let Some(any) = schema.get("anyOf").and_then(Value::as_array) {
        let errs: Vec<String> = any
            .iter()
            .filter_map(|s| check(s, v, defs, path).err())
            .collect();
        if errs.len() == any.len() {
            return Err(format!("{path}: no alternative fits: {}", errs.join(" | ")));
        }
    }
    if let Some(c) = schema.get("const") {
        if c != v {
            return Err(format!("{path}: not {c}"));
        }
    }
    if let Some(e) = schema.get("enum").and_then(Value::as_array) {
        if !e.contains(v) {
            return Err(format!("{path}: {v} not in {e:?}"));
        }
    }
    if let Some(t) = schema.get("type") {
        let types: Vec<&str> = match t {
            Value::String(s) => vec![s.as_str()],
            Value::Array(a) => a.iter().filter_map(Value::as_str).collect(),
            _ => vec![],
        };
        let fits = types.iter().any(|t| match *t {
            "object" => v.is_object(),
            "array" => v.is_array(),
            "string" => v.is_string(),
            "number" => v.is_number(),
            "integer" => v.is_i64() || v.is_u64(),
            "boolean" => v.is_boolean(),
            _ => false,
        });
        if !fits {
            return Err(format!("{path}: {v} is not {types:?}"));
        }
    }
    if let Some(x) = v.as_f64() {
        if schema
            .get("minimum")
            .and_then(Value::as_f64)
            .is_some_and(|m| x < m)
        {
            return Err(format!("{path}: {x} below the minimum"));
        }
        if schema
            .get("maximum")
            .and_then(Value::as_f64)
            .is_some_and(|m| x > m)
        {
            return Err(format!("{path}: {x} above the maximum"));
        }
    }
    if let Some(a) = v.as_array() {
        if schema
            .get("minItems")
            .and_then(Value::as_u64)
            .is_some_and(|m| (a.len() as u64) < m)
        {
            return Err(format!("{path}: too few items"));
        }
        if let Some(items) = schema.get("items") {
            for (i, x) in a.iter().enumerate() {
                check(items, x, defs, &format!("{path}[{i}]"))?;
            }
        }
    }
    if let Some(o) = v.as_object() {
        let props = schema.get("properties").and_then(Value::as_object);
        for r in schema
            .get("required")
            .and_then(Value::as_array)
            .into_iter()
            .flatten()
        {
            let k = r.as_str().unwrap();
            if !o.contains_key(k) {
                return Err(format!("{path}: `{k}` is required"));
            }
        }
        for (k, x) in o {
            match props.and_then(|p| p.get(k)) {
                Some(s) => check(s, x, defs, &format!("{path}.{k}"))?,
                None if schema.get("additionalProperties") == Some(&Value::Bool(false)) => {
                    return Err(format!("{path}: unknown key `{k}`"))
                }
                None => {}
            }
        }
    }
    Ok(())
}

fn yaml(path: &Path) -> Value {
    serde_yaml::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn files(dir: &Path) -> Vec<std::path::PathBuf> {
    let mut v: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "yaml"))
        .collect();
    v.sort();
    v
}

#[test]
fn every_config_is_valid_against_its_schema() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs");
    let defs = [("carrywright-spec", carrywright::schema::spec())];
    let (spec, tech, sweep) = (
        carrywright::schema::spec(),
        carrywright::schema::technology(),
        carrywright::schema::sweep(),
    );
    let mut counts = (0, 0, 0);
    for f in files(&root) {
        let v = yaml(&f);
        let schema = if v.get("architecture").is_some() {
            counts.0 += 1;
            &spec
        } else {
            counts.1 += 1;
            &tech
        };
        check(schema, &v, &defs, "").unwrap_or_else(|e| panic!("{}: {e}", f.display()));
    }
    for f in files(&root.join("technologies")) {
        counts.1 += 1;
        check(&tech, &yaml(&f), &defs, "").unwrap_or_else(|e| panic!("{}: {e}", f.display()));
    }
    for f in files(&root.join("sweeps")) {
        counts.2 += 1;
        check(&sweep, &yaml(&f), &defs, "").unwrap_or_else(|e| panic!("{}: {e}", f.display()));
    }
    assert!(
        counts.0 >= 10 && counts.1 >= 15 && counts.2 >= 1,
        "{counts:?}"
    );
}

/// The schema and the spec parser agree on the keys: each key the schema lists (top level
/// and inside conditions, sizing, parasitics, testbench) is not an unknown field to the
/// parser, and a key it does not list is refused by the schema and the parser alike.
#[test]
fn schema_keys_are_the_parsers_keys() {
    let spec = carrywright::schema::spec();
    let parse = |y: &str| {
        carrywright::spec::parse(y, "t", Path::new("."), &Default::default())
            .err()
            .map(|e| e.to_string())
            .unwrap_or_default()
    };
    let base = "name: t\nwidth: 8\narchitecture: ripple\n";
    let props = spec["properties"].as_object().unwrap();
    for k in props.keys() {
        if ["name", "width", "architecture"].contains(&k.as_str()) {
            continue;
        }
        let e = parse(&format!("{base}{k}: 1\n"));
        assert!(!e.contains("unknown field"), "{k}: {e}");
    }
    for (outer, alt) in [
        ("conditions", None),
        ("parasitics", None),
        ("testbench", None),
        ("sizing", Some(1)),
    ] {
        let s = &props[outer];
        let obj = match alt {
            Some(i) => &s["anyOf"][i],
            None => s,
        };
        for k in obj["properties"].as_object().unwrap().keys() {
            let e = parse(&format!("{base}{outer}: {{{k}: 1}}\n"));
            assert!(!e.contains("unknown field"), "{outer}.{k}: {e}");
        }
        let e = parse(&format!("{base}{outer}: {{bogus_key: 1}}\n"));
        assert!(e.contains("unknown field"), "{outer}: {e}");
        let v: Value = serde_yaml::from_str(&format!("{base}{outer}: {{bogus_key: 1}}\n")).unwrap();
        assert!(
            check(&spec, &v, &[], "").is_err(),
            "{outer}: the schema took bogus_key"
        );
    }
    let v: Value = serde_yaml::from_str(&format!("{base}colour: red\n")).unwrap();
    assert!(check(&spec, &v, &[], "").is_err());
    assert!(parse(&format!("{base}colour: red\n")).contains("unknown field"));
}
