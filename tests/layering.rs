//! The crate's layers run one way: a module may name (`crate::x`) only modules of the
//! layers below its own. The order is written once, here; a `use crate::` line against
//! it fails this test with the file, the line and the two layers.
//!
//! Unit-test modules (`#[cfg(test)] mod tests`, at the end of a file by this crate's
//! habit) are left out: a test may build its fixtures from a higher layer. Comments are
//! left out too (a doc link is not a dependency).

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

use std::path::Path;

/// Bottom first. Modules in one layer may not name each other.
const LAYERS: &[&[&str]] = &[
    &["msg"],                        // the vocabulary: messages, records, positions
    &["wire", "geometry", "schema"], // decoding and geometry
    &["metrics"],                    // one module per metric family, the catalog, assignment
    &["core"],                       // time alignment and the engine
    &["stats"],                      // run statistics
    &["windows"],                    // sliding windows
    &["rules"],                      // thresholds and verdicts
    &["monitor"],                    // engine + statistics + windows + rules
    &["report"],                     // the run report
    &["gate", "inference", "dashboard", "scenario"],
    &["campaign"],
    &["html"],
    &["logio"],          // log files
    &["config"],         // the one place that reads the config
    &["threads"],        // the drivers' pool for independent pure work
    &["replay", "live"], // the two drivers
    &["cli"],
    &["main"],
];

fn layer_of(module: &str) -> Option<usize> {
    LAYERS.iter().position(|l| l.contains(&module))
}

/// The module a file of `src/` belongs to: its first path component.
fn top_module(rel: &Path) -> String {
    let first = rel.components().next().unwrap().as_os_str().to_string_lossy().to_string();
    first.trim_end_matches(".rs").to_string()
}

fn files(dir: &Path, out: &mut Vec<std::path::PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// The `crate::x` names in code (not comments) before the file's unit tests.
fn crate_refs(text: &str) -> Vec<(usize, String)> {
    let mut out = Vec::new();
    let lines: Vec<&str> = text.lines().collect();
    for (i, line) in lines.iter().enumerate() {
        let t = line.trim_start();
        if t.starts_with("#[cfg(test)]")
            && lines.get(i + 1).is_some_and(|n| n.trim_start().starts_with("mod tests"))
        {
            break;
        }
        if t.starts_with("//") {
            continue;
        }
        let code = line.split("//").next().unwrap_or("");
        let mut rest = code;
        while let Some(at) = rest.find("crate::") {
            let after = &rest[at + "crate::".len()..];
            let name: String = after.chars().take_while(|c| c.is_ascii_alphanumeric() || *c == '_').collect();
            out.push((i + 1, name));
            rest = after;
        }
    }
    out
}

/// Every violation in the crate's sources.
fn violations(src: &Path) -> Vec<String> {
    let mut all = Vec::new();
    files(src, &mut all);
    all.sort();
    let mut bad = Vec::new();
    for p in all {
        let rel = p.strip_prefix(src).unwrap();
        let from = top_module(rel);
        if from == "lib" {
            continue;
        }
        let Some(lf) = layer_of(&from) else {
            bad.push(format!("{}: module `{from}` has no layer in tests/layering.rs", rel.display()));
            continue;
        };
        let text = std::fs::read_to_string(&p).unwrap();
        for (line, to) in crate_refs(&text) {
            if to == from {
                continue;
            }
            match layer_of(&to) {
                Some(lt) if lt < lf => {}
                Some(lt) => bad.push(format!(
                    "{}:{line}: `{from}` (layer {lf}) names `crate::{to}` (layer {lt}): only lower layers may be named",
                    rel.display()
                )),
                None => bad.push(format!("{}:{line}: `crate::{to}` has no layer", rel.display())),
            }
        }
    }
    bad
}

#[test]
fn every_module_names_only_the_layers_below_it() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let bad = violations(&src);
    assert!(bad.is_empty(), "layering violations:\n{}", bad.join("\n"));
}

/// The checker itself catches a planted violation (the vocabulary naming the config) and
/// passes the same tree without it.
#[test]
fn a_planted_violation_is_caught() {
    let dir = std::env::temp_dir().join(format!("plumbline-layering-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("msg")).unwrap();
    std::fs::write(dir.join("msg/mod.rs"), "pub struct A;\n").unwrap();
    std::fs::write(dir.join("config.rs"), "use crate::msg::A;\n").unwrap();
    assert!(violations(&dir).is_empty());
    std::fs::write(dir.join("msg/mod.rs"), "pub struct A;\nfn f(_: &crate::config::Config) {}\n").unwrap();
    let bad = violations(&dir);
    assert_eq!(bad.len(), 1, "{bad:?}");
    assert!(bad[0].starts_with("msg/mod.rs:2: `msg` (layer 0) names `crate::config`"), "{bad:?}");
    // Two modules of one layer may not name each other either.
    std::fs::write(dir.join("msg/mod.rs"), "pub struct A;\n").unwrap();
    std::fs::write(dir.join("replay.rs"), "use crate::live::X;\n").unwrap();
    assert_eq!(violations(&dir).len(), 1);
    // A unit-test module may use a higher layer; a comment is not a dependency.
    std::fs::write(
        dir.join("replay.rs"),
        "// crate::live\n#[cfg(test)]\nmod tests {\n    use crate::cli::X;\n}\n",
    )
    .unwrap();
    assert!(violations(&dir).is_empty(), "{:?}", violations(&dir));
    let _ = std::fs::remove_dir_all(&dir);
}
