//! The library's module graph: no import cycles among the top-level modules of src/, and no
//! library module importing the command line (`cli` sits on top; the library must work without
//! it, e.g. from the Python package or a test).
//!
//! The graph is read from the source text: every `crate::NAME` path outside comments in
//! src/NAME.rs or src/NAME/**.rs is an edge from that file's top-level module to NAME (uses,
//! inline paths and `pub use` re-exports alike). Doc links in comments are not imports.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

type Graph = BTreeMap<String, BTreeSet<String>>;

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// The code of `text` without `//` comments (line and doc comments) and string contents
/// (a message may quote a path). Block comments are not used in src/.
fn code_only(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for line in text.lines() {
        let (mut in_str, mut prev) = (false, ' ');
        let mut chars = line.chars().peekable();
        while let Some(c) = chars.next() {
            if !in_str && c == '/' && chars.peek() == Some(&'/') {
                break;
            }
            if c == '"' && prev != '\\' && prev != '\'' {
                in_str = !in_str;
            } else if !in_str {
                out.push(c);
            }
            prev = if prev == '\\' && c == '\\' { ' ' } else { c };
        }
        out.push('\n');
    }
    out
}

/// The top-level module names `text` refers to through `crate::NAME`.
fn uses(text: &str) -> BTreeSet<String> {
    let code = code_only(text);
    let mut found = BTreeSet::new();
    let mut rest = code.as_str();
    while let Some(i) = rest.find("crate::") {
        let before = rest[..i].chars().last();
        rest = &rest[i + "crate::".len()..];
        if before.is_some_and(|c| c.is_alphanumeric() || c == '_' || c == '$') {
            continue; // `icefold_crate::` or a macro's `$crate::`
        }
        if let Some(group) = rest.strip_prefix('{') {
            // `use crate::{a::X, b}`: every name at the start of an item of the group.
            let inner = &group[..group.find('}').unwrap_or(group.len())];
            for item in inner.split(',') {
                let name: String = item
                    .trim()
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .collect();
                if !name.is_empty() {
                    found.insert(name);
                }
            }
            continue;
        }
        let name: String = rest
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_')
            .collect();
        if !name.is_empty() {
            found.insert(name);
        }
    }
    found
}

/// The module graph of the library in `src`: module -> modules it uses (self-edges dropped).
fn module_graph(src: &Path) -> Graph {
    let mut files = Vec::new();
    rust_files(src, &mut files);
    let mut graph = Graph::new();
    for f in files {
        let rel = f.strip_prefix(src).unwrap();
        let first = rel.components().next().unwrap().as_os_str().to_string_lossy();
        let module = first.trim_end_matches(".rs").to_string();
        if module == "main" || module == "lib" {
            continue;
        }
        let text = std::fs::read_to_string(&f).unwrap();
        let edges = graph.entry(module.clone()).or_default();
        edges.extend(uses(&text).into_iter().filter(|m| *m != module));
    }
    graph
}

/// Every cycle's members (strongly connected components with more than one module), each
/// sorted, by Tarjan's algorithm (common practice).
fn cycles(graph: &Graph) -> Vec<Vec<String>> {
    struct State<'g> {
        graph: &'g Graph,
        index: BTreeMap<&'g str, usize>,
        low: BTreeMap<&'g str, usize>,
        stack: Vec<&'g str>,
        on_stack: BTreeSet<&'g str>,
        out: Vec<Vec<String>>,
    }
    fn visit<'g>(s: &mut State<'g>, v: &'g str) {
        let i = s.index.len();
        s.index.insert(v, i);
        s.low.insert(v, i);
        s.stack.push(v);
        s.on_stack.insert(v);
        for w in s.graph.get(v).into_iter().flatten() {
            let w = w.as_str();
            if !s.index.contains_key(w) {
                visit(s, w);
                let lw = s.low[w];
                let lv = s.low.get_mut(v).unwrap();
                *lv = (*lv).min(lw);
            } else if s.on_stack.contains(w) {
                let iw = s.index[w];
                let lv = s.low.get_mut(v).unwrap();
                *lv = (*lv).min(iw);
            }
        }
        if s.low[v] == s.index[v] {
            let mut comp = Vec::new();
            while let Some(w) = s.stack.pop() {
                s.on_stack.remove(w);
                comp.push(w.to_string());
                if w == v {
                    break;
                }
            }
            if comp.len() > 1 {
                comp.sort();
                s.out.push(comp);
            }
        }
    }
    let mut s = State {
        graph,
        index: BTreeMap::new(),
        low: BTreeMap::new(),
        stack: Vec::new(),
        on_stack: BTreeSet::new(),
        out: Vec::new(),
    };
    for v in graph.keys() {
        if !s.index.contains_key(v.as_str()) {
            visit(&mut s, v);
        }
    }
    s.out.sort();
    s.out
}

fn src() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

#[test]
fn no_import_cycles_among_the_library_modules() {
    let graph = module_graph(&src());
    assert!(
        graph.contains_key("jobs") && graph.contains_key("config"),
        "{graph:?}"
    );
    let found = cycles(&graph);
    assert!(
        found.is_empty(),
        "import cycles among src/ modules: {found:?}\nmodule graph: {graph:#?}"
    );
}

#[test]
fn no_library_module_imports_the_command_line() {
    let graph = module_graph(&src());
    let offenders: Vec<&String> = graph
        .iter()
        .filter(|(m, edges)| *m != "cli" && edges.contains("cli"))
        .map(|(m, _)| m)
        .collect();
    assert!(
        offenders.is_empty(),
        "library modules importing cli: {offenders:?}"
    );
}

#[test]
fn the_graph_reader_sees_uses_paths_and_groups_but_not_comments() {
    // The reader itself: a cycle or a cli import written any of these ways is found.
    let text = "use crate::config::Loaded;\n\
                let x = crate::output::NcReader::open(p);\n\
                use crate::{grid::Grid, model};\n\
                // crate::cli::progress in a comment\n\
                /// [`crate::plot`] in a doc link\n\
                let m = \"crate::jobs in a message\";\n\
                $crate::tally::add();\n";
    let got: Vec<String> = uses(text).into_iter().collect();
    assert_eq!(got, ["config", "grid", "model", "output"]);
    let mut g = Graph::new();
    g.entry("a".into()).or_default().insert("b".into());
    g.entry("b".into()).or_default().insert("c".into());
    g.entry("c".into()).or_default().insert("a".into());
    g.entry("d".into()).or_default().insert("a".into());
    assert_eq!(cycles(&g), vec![vec!["a".to_string(), "b".into(), "c".into()]]);
}
