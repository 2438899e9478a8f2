//! Every example spec in configs/ generates and passes the internal checks.

mod common;

#[test]
fn every_config_generates() {
    let mut n = 0;
    let mut entries: Vec<_> = std::fs::read_dir("configs")
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    entries.sort();
    for path in entries {
        if !path.is_file() {
            continue; // configs/technologies: the characterised technology files
        }
        let text = std::fs::read_to_string(&path).unwrap();
        if !text.contains("architecture:") {
            continue; // a technology file
        }
        let needs_models = text.contains("gf180") || text.contains("tech_example");
        let model_dir = if text.contains("sky130") {
            let dir =
                std::env::var_os(carrywright::tech::SKY130_DIR_ENV).map(std::path::PathBuf::from);
            if !common::prerequisite(
                dir.is_some(),
                "the SKY130 model folder (CARRYWRIGHT_SKY130_DIR)",
            ) {
                continue;
            }
            dir
        } else if needs_models {
            match common::model_dir() {
                Some(d) => Some(d),
                None => continue,
            }
        } else {
            None
        };
        let s = carrywright::spec::load(&path, &carrywright::spec::LoadOptions { model_dir })
            .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        let g = carrywright::generate(&s).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        assert_eq!(g.files.len(), 5);
        n += 1;
    }
    assert!(n >= 4, "only {n} configs generated");
}
