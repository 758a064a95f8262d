//! The README's glossary is the metric catalog rendered: each metric's name, unit, meaning,
//! Prometheus family, dashboard label and which way is worse, from the one place the code
//! defines them. `PLUMBLINE_UPDATE_GLOSSARY=1 cargo test --test glossary` rewrites it.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

use plumbline::metrics::catalog::glossary_markdown;

const START: &str = "<!-- glossary:start (generated from src/metrics/catalog.rs) -->\n";
const END: &str = "<!-- glossary:end -->";

#[test]
fn the_readme_glossary_is_the_catalog() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md");
    let readme = std::fs::read_to_string(&path).unwrap();
    let (a, rest) = readme.split_once(START).expect("README has the glossary start marker");
    let (table, b) = rest.split_once(END).expect("README has the glossary end marker");
    let want = glossary_markdown();
    if std::env::var_os("PLUMBLINE_UPDATE_GLOSSARY").is_some() {
        std::fs::write(&path, format!("{a}{START}{want}{END}{b}")).unwrap();
        return;
    }
    assert_eq!(
        table, want,
        "the README glossary differs from the catalog: rerun with PLUMBLINE_UPDATE_GLOSSARY=1"
    );
    // Every metric is in it once, by its report name.
    for m in plumbline::metrics::Metric::ALL {
        assert_eq!(table.matches(&format!("| `{}` |", m.name())).count(), 1, "{}", m.name());
    }
}
