//! The physics modules depend on each other one way: `physics` and `drivers` are leaves under
//! the model, and `forcing` does not import `model` (issue 13: the two used to import each
//! other). Read from the sources: every `crate::name` path outside comments and
//! `#[cfg(test)]` blocks is an edge from the file's top-level module.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

fn rust_files(dir: &Path, out: &mut Vec<std::path::PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// Top-level module -> the top-level modules its non-test code names through `crate::`.
fn graph() -> BTreeMap<String, BTreeSet<String>> {
    let mut files = Vec::new();
    rust_files(Path::new("src"), &mut files);
    let mut g: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for f in files {
        let rel = f.strip_prefix("src").unwrap();
        let top = rel
            .iter()
            .next()
            .unwrap()
            .to_str()
            .unwrap()
            .trim_end_matches(".rs")
            .to_string();
        if top == "lib" || top == "main" {
            continue;
        }
        let text = std::fs::read_to_string(&f).unwrap();
        let code = text.split("#[cfg(test)]").next().unwrap();
        let edges = g.entry(top.clone()).or_default();
        for line in code.lines().filter(|l| !l.trim_start().starts_with("//")) {
            // `crate::name` and the names inside `use crate::{a::..., b::...}`.
            for (k, _) in line.match_indices("crate::") {
                let rest = &line[k + 7..];
                let names: Vec<&str> = match rest.strip_prefix('{') {
                    Some(list) => list.split(',').map(|s| s.trim()).collect(),
                    None => vec![rest],
                };
                for n in names {
                    let name: String = n
                        .chars()
                        .take_while(|c| c.is_alphanumeric() || *c == '_')
                        .collect();
                    if !name.is_empty() && name != top {
                        edges.insert(name);
                    }
                }
            }
        }
    }
    g
}

/// Whether `to` is reachable from `from`.
fn reaches(g: &BTreeMap<String, BTreeSet<String>>, from: &str, to: &str) -> bool {
    let mut seen = BTreeSet::new();
    let mut stack = vec![from.to_string()];
    while let Some(m) = stack.pop() {
        for n in g.get(&m).into_iter().flatten() {
            if n == to {
                return true;
            }
            if seen.insert(n.clone()) {
                stack.push(n.clone());
            }
        }
    }
    false
}

#[test]
fn physics_drivers_and_forcing_depend_one_way() {
    let g = graph();
    // The check reads what it should: model uses physics, forcing and drivers.
    for dep in ["physics", "forcing", "drivers"] {
        assert!(
            g["model"].contains(dep),
            "model -> {dep} not seen: {:?}",
            g["model"]
        );
    }
    // Physics is pure functions over the grid: it reaches none of the modules built on it.
    // Drivers are plain data the model reads.
    for (m, above) in [
        (
            "physics",
            &["model", "drivers", "forcing", "config", "output", "jobs", "cli"][..],
        ),
        (
            "drivers",
            &["model", "forcing", "config", "output", "jobs", "cli"][..],
        ),
    ] {
        for a in above {
            assert!(!reaches(&g, m, a), "`{m}` reaches `{a}`: {g:?}");
        }
    }
    // A forcing history feeds the model; it does not name it (issue 13: they imported each other).
    assert!(
        !g["forcing"].contains("model"),
        "forcing -> model: {:?}",
        g["forcing"]
    );
}
