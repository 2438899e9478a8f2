//! `carrywright schema`: JSON Schemas (draft 2020-12) of the spec, technology and sweep
//! formats, so editors can complete and check the files. Hand-written beside the parsers
//! (`spec.rs`, `tech.rs`, `sweep/`); `tests/schema.rs` checks every file in configs/ against
//! them and that every key they list is one the parsers accept.

use serde_json::{json, Value};

/// A number, or a quantity with an SI prefix and optional unit (`20f`, `1.5n`, `3.3`).
fn quantity(desc: &str) -> Value {
    json!({"description": desc, "type": ["number", "string"]})
}

fn conditions() -> Value {
    json!({
        "type": "object",
        "additionalProperties": false,
        "description": "Corner, temperature and supply; written into every deck.",
        "properties": {
            "corner": {"type": "string", "description": "A library section the technology lists (GF180MCU typical/ff/ss/fs/sf, SKY130 tt/ff/ss/fs/sf)."},
            "temp": {"type": "number", "description": "degC, -55 to 175."},
            "vdd": {"type": "number", "description": "Volts, 70 % to 130 % of the technology's nominal."}
        }
    })
}

/// The adder spec.
pub fn spec() -> Value {
    let archs = [
        "ripple",
        "manchester",
        "carry-skip",
        "carry-select",
        "lookahead",
        "kogge-stone",
        "brent-kung",
        "sklansky",
        "han-carlson",
        "ladner-fischer",
        "knowles",
    ];
    json!({
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "carrywright-spec",
        "title": "carrywright adder spec",
        "type": "object",
        "additionalProperties": false,
        "required": ["name", "width", "architecture"],
        "properties": {
            "name": {"type": "string", "pattern": "^[A-Za-z_][A-Za-z0-9_]*$", "description": "Module and subcircuit name; not a Verilog or SPICE keyword."},
            "width": {"type": "integer", "minimum": 1, "maximum": 128},
            "architecture": {"enum": archs},
            "style": {"enum": ["static", "dynamic"]},
            "block": {"description": "Bits per block or group, or sqrt / auto (carry-skip, carry-select).", "anyOf": [{"type": "integer", "minimum": 1}, {"enum": ["sqrt", "auto"]}]},
            "buffers": {"description": "none | auto | {every: K} | {at: [bits]} | {fanout: F}", "anyOf": [
                {"enum": ["none", "auto"]},
                {"type": "object", "additionalProperties": false, "properties": {
                    "every": {"type": "integer", "minimum": 1},
                    "at": {"type": "array", "items": {"type": "integer", "minimum": 1}},
                    "inverting": {"type": "boolean"},
                    "fanout": {"type": "integer", "minimum": 2, "maximum": 64}
                }}
            ]},
            "technology": {"type": "string", "description": "A built-in name (generic, gf180mcu-3v3, sky130-1v8 and their characterised corners) or a technology file's path."},
            "conditions": conditions(),
            "sizing": {"anyOf": [
                {"const": "auto"},
                {"type": "object", "additionalProperties": false, "properties": {
                    "mode": {"enum": ["auto", "manual"]},
                    "unit_n": quantity("Unit NMOS width, um."),
                    "pn_ratio": quantity("PMOS/NMOS width ratio."),
                    "keeper": quantity("Keeper W/L as a fraction of a unit NMOS (0, or 0.02 to 0.9)."),
                    "buffer": quantity("Drive of carry-path buffers, 1 to 32."),
                    "pass": quantity("Role multiplier: carry-path pass devices."),
                    "generate": quantity("Role multiplier: generate/kill devices and footers."),
                    "precharge": quantity("Role multiplier: precharge devices (dynamic)."),
                    "output": quantity("Role multiplier: each sum's output inverter."),
                    "carry": quantity("Role multiplier: prefix cells and the full adder's carry half."),
                    "fanout": {"type": "boolean", "description": "Prefix cells sized by their fan-out (2x or 4x output inverters on heavy loads); default true."},
                    "taper": quantity("Manchester chains (manchester, carry-skip): drive of each segment's first chain cell over its last, 1 (none) to 4."),
                    "input_cap": quantity("Largest capacitance an input may present, farads (e.g. 15f).")
                }}
            ]},
            "parasitics": {"type": "object", "additionalProperties": false, "properties": {
                "wire_per_bit": quantity("Wire capacitance per bit pitch, farads (e.g. 0.5f).")
            }},
            "testbench": {"type": "object", "additionalProperties": false, "properties": {
                "random": {"type": "integer", "minimum": 0, "maximum": 1000000},
                "seed": {"type": "integer", "minimum": 0},
                "load": quantity("Load on every output, farads."),
                "period": quantity("Vector period, seconds."),
                "step": quantity("Transient print step, seconds."),
                "drivers": {"enum": ["buffered", "ideal"]}
            }}
        }
    })
}

/// A technology file (own models, or a characterised file over a built-in one).
pub fn technology() -> Value {
    let timing = json!({"type": "object", "description": "Characterised timing parameters, as `carrywright characterize` writes them."});
    json!({
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "carrywright-technology",
        "title": "carrywright technology file",
        "anyOf": [
            {
                "type": "object",
                "additionalProperties": false,
                "required": ["name", "base"],
                "properties": {
                    "name": {"type": "string"},
                    "base": {"type": "string", "description": "The built-in technology these values characterise."},
                    "conditions": conditions(),
                    "timing": timing
                }
            },
            {
                "type": "object",
                "additionalProperties": false,
                "required": ["name", "vdd", "l_min", "w_min", "nmos", "pmos", "unit_n", "pn_ratio"],
                "properties": {
                    "name": {"type": "string"},
                    "vdd": {"type": "number"},
                    "l_min": {"type": "number", "description": "um"},
                    "w_min": {"type": "number", "description": "um"},
                    "nmos": {"type": "string"},
                    "pmos": {"type": "string"},
                    "unit_n": {"type": "number"},
                    "pn_ratio": {"type": "number"},
                    "step": {"type": ["number", "string"]},
                    "include": {"type": "array", "items": {"type": "string"}},
                    "lib": {"type": "array", "items": {"type": "object", "additionalProperties": false, "required": ["file", "section"], "properties": {"file": {"type": "string"}, "section": {"type": "string"}}}},
                    "device_prefix": {"type": "string"},
                    "size_suffix": {"type": "string"},
                    "diffusion_um": {"type": "number", "minimum": 0.01, "maximum": 10, "description": "contacted diffusion length past the gate, um (device lines carry ad as pd ps)"},
                    "diffusion_shared_um": {"type": "number", "minimum": 0.01, "maximum": 10, "description": "uncontacted diffusion between two gates in series, um (default: diffusion_um; needs it)"},
                    "conditions": conditions(),
                    "timing": timing
                }
            }
        ]
    })
}

/// A sweep file.
pub fn sweep() -> Value {
    let mut vary = serde_json::Map::new();
    for k in crate::sweep::KEYS {
        vary.insert((*k).into(), json!({"type": "array", "minItems": 1}));
    }
    let mut exclude = serde_json::Map::new();
    for k in crate::sweep::KEYS {
        exclude.insert((*k).into(), json!({}));
    }
    json!({
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "carrywright-sweep",
        "title": "carrywright sweep file",
        "type": "object",
        "additionalProperties": false,
        "required": ["base"],
        "properties": {
            "base": {"anyOf": [{"type": "string", "description": "A spec file, relative to the sweep file."}, {"$ref": "carrywright-spec"}]},
            "vary": {"type": "object", "additionalProperties": false, "properties": vary},
            "exclude": {"type": "array", "items": {"type": "object", "additionalProperties": false, "properties": exclude}},
            "target": {"type": "object", "additionalProperties": false, "required": ["delay"], "properties": {
                "delay": quantity("Delay every listed corner must meet, seconds (e.g. 10n)."),
                "margin": {"type": ["number", "string"], "description": "A fraction or a percentage (10%)."}
            }}
        }
    })
}

/// All three, by name.
pub fn all() -> Value {
    json!({"spec": spec(), "technology": technology(), "sweep": sweep()})
}
