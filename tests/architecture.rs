//! The architecture, checked: every file of `src/` belongs to a layer (the
//! folder it sits in), imports only from its own layer and the layers
//! allowed below it, and no chain of imports between files comes back to
//! where it started; and no file or function grows past the sizes a
//! reader can hold without a reason written at its top.
//!
//! The imports are read as text: every `crate::…` path (with `use`
//! groups `{…}` expanded) and every `super::…` path, in the code before a
//! file's first test module (`#[cfg(test)] mod …`; a module's own tests
//! may reach up, say to make a recording with `synth`). A path is resolved to the longest prefix
//! that names a module file, so `crate::fitting::measurement::Measurement`
//! is an edge to `src/fitting/measurement.rs` (or its folder's `mod.rs`).
//!
//! Run alone: `cargo test --release --test architecture -- --nocapture`.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// The layers from the bottom up, and what each may import besides itself.
const LAYERS: &[(&str, &[&str])] = &[
    ("base", &[]),
    ("signal", &["base"]),
    ("physics", &["base"]),
    ("fitting", &["base", "signal", "physics"]),
    ("acceptance", &["base", "signal", "physics", "fitting"]),
    (
        "report",
        &["base", "signal", "physics", "fitting", "acceptance"],
    ),
    (
        "app",
        &[
            "base",
            "signal",
            "physics",
            "fitting",
            "acceptance",
            "report",
        ],
    ),
];

/// Files at the top of `src/` that stand above every layer.
const ROOT_FILES: &[&str] = &["lib.rs", "main.rs"];

fn src_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    let mut entries: Vec<_> = std::fs::read_dir(dir)
        .expect("src/ is readable")
        .map(|e| e.expect("directory entry").path())
        .collect();
    entries.sort();
    for path in entries {
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

/// The module path of a file: `src/fitting/pipeline.rs` → `fitting::pipeline`,
/// `src/report/mod.rs` → `report`, `src/lib.rs` → ``.
fn module_of(rel: &Path) -> Vec<String> {
    let mut parts: Vec<String> = rel
        .components()
        .map(|c| c.as_os_str().to_string_lossy().into_owned())
        .collect();
    let last = parts.pop().expect("a file name");
    let stem = last.trim_end_matches(".rs");
    if !matches!(stem, "mod" | "lib" | "main") {
        parts.push(stem.to_string());
    }
    parts
}

/// Everything before a file's first test module.
fn before_tests(text: &str) -> &str {
    text.split("#[cfg(test)]\nmod ").next().unwrap_or("")
}

/// The code a file ships ([`before_tests`]), with line comments removed so
/// that doc examples do not count as imports.
fn shipped_code(text: &str) -> String {
    before_tests(text)
        .lines()
        .map(|line| match line.find("//") {
            Some(i) => &line[..i],
            None => line,
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// Expands the path tree that starts at `s` (just after `crate::` or
/// `super::`), pushing every full path into `out`; returns how many bytes
/// it consumed.
fn expand(s: &[u8], prefix: &[String], out: &mut Vec<Vec<String>>) -> usize {
    let mut i = 0;
    let mut path = prefix.to_vec();
    loop {
        while i < s.len() && s[i].is_ascii_whitespace() {
            i += 1;
        }
        if i < s.len() && s[i] == b'{' {
            i += 1;
            loop {
                i += expand(&s[i..], &path, out);
                while i < s.len() && (s[i].is_ascii_whitespace() || s[i] == b',') {
                    i += 1;
                }
                if i >= s.len() || s[i] == b'}' {
                    return (i + 1).min(s.len());
                }
            }
        }
        let start = i;
        while i < s.len() && (s[i].is_ascii_alphanumeric() || s[i] == b'_') {
            i += 1;
        }
        if i > start {
            path.push(String::from_utf8_lossy(&s[start..i]).into_owned());
        }
        if s[i..].starts_with(b"::") {
            i += 2;
            continue;
        }
        out.push(path);
        return i;
    }
}

/// Every module path a file's shipped code refers to.
fn references(code: &str, module: &[String]) -> Vec<Vec<String>> {
    let bytes = code.as_bytes();
    let mut out = Vec::new();
    for (anchor, base) in [
        ("crate::", Vec::new()),
        ("super::", {
            let mut m = module.to_vec();
            m.pop();
            m
        }),
    ] {
        let mut from = 0;
        while let Some(pos) = code[from..].find(anchor) {
            let at = from + pos;
            let boundary = at == 0 || {
                let c = bytes[at - 1];
                !(c.is_ascii_alphanumeric() || c == b'_' || c == b':')
            };
            let start = at + anchor.len();
            if boundary {
                expand(&bytes[start..], &base, &mut out);
            }
            from = start;
        }
    }
    out
}

struct Graph {
    /// File (relative to src/) → its module path.
    modules: BTreeMap<String, Vec<String>>,
    /// File → files it imports.
    edges: BTreeMap<String, BTreeSet<String>>,
}

fn build_graph() -> Graph {
    let src = src_dir();
    let mut files = Vec::new();
    rust_files(&src, &mut files);
    let mut modules = BTreeMap::new();
    let mut by_module: BTreeMap<Vec<String>, String> = BTreeMap::new();
    for f in &files {
        let rel = f.strip_prefix(&src).unwrap().to_path_buf();
        let key = rel.to_string_lossy().replace('\\', "/");
        let module = module_of(&rel);
        if key != "main.rs" {
            by_module.insert(module.clone(), key.clone());
        }
        modules.insert(key, module);
    }
    let mut edges = BTreeMap::new();
    for f in &files {
        let rel = f.strip_prefix(&src).unwrap();
        let key = rel.to_string_lossy().replace('\\', "/");
        let text = std::fs::read_to_string(f).expect("source is UTF-8");
        let module = &modules[&key];
        let mut targets = BTreeSet::new();
        for path in references(&shipped_code(&text), module) {
            // Longest prefix naming a file; the crate root itself is not an edge.
            let hit = (1..=path.len())
                .rev()
                .find_map(|n| by_module.get(&path[..n]).cloned());
            if let Some(target) = hit {
                if target != key {
                    targets.insert(target);
                }
            }
        }
        edges.insert(key, targets);
    }
    Graph { modules, edges }
}

fn layer_of(file: &str) -> Option<&'static str> {
    if ROOT_FILES.contains(&file) {
        return Some("root");
    }
    let top = file.split('/').next()?;
    LAYERS
        .iter()
        .map(|(name, _)| *name)
        .find(|name| *name == top && file.contains('/'))
}

#[test]
fn every_file_sits_in_a_layer() {
    let graph = build_graph();
    let strays: Vec<&String> = graph
        .modules
        .keys()
        .filter(|f| layer_of(f).is_none())
        .collect();
    assert!(
        strays.is_empty(),
        "files outside every layer folder: {strays:?}"
    );
}

#[test]
fn imports_go_only_downwards() {
    let graph = build_graph();
    let allowed: BTreeMap<&str, &[&str]> = LAYERS.iter().copied().collect();
    let mut wrong = Vec::new();
    for (file, targets) in &graph.edges {
        let Some(from) = layer_of(file) else { continue };
        if from == "root" {
            continue;
        }
        for target in targets {
            let to = layer_of(target).unwrap_or("?");
            if to != from && !allowed[from].contains(&to) {
                wrong.push(format!("{file} ({from}) imports {target} ({to})"));
            }
        }
    }
    assert!(
        wrong.is_empty(),
        "imports against the layering:\n{}",
        wrong.join("\n")
    );
}

/// Tarjan's strongly connected components; every component of more than
/// one file is an import cycle.
fn cycles(edges: &BTreeMap<String, BTreeSet<String>>) -> Vec<Vec<String>> {
    struct State<'a> {
        edges: &'a BTreeMap<String, BTreeSet<String>>,
        index: BTreeMap<&'a str, usize>,
        low: BTreeMap<&'a str, usize>,
        stack: Vec<&'a str>,
        on_stack: BTreeSet<&'a str>,
        next: usize,
        found: Vec<Vec<String>>,
    }
    fn visit<'a>(s: &mut State<'a>, v: &'a str) {
        s.index.insert(v, s.next);
        s.low.insert(v, s.next);
        s.next += 1;
        s.stack.push(v);
        s.on_stack.insert(v);
        let edges = s.edges;
        for w in edges.get(v).into_iter().flatten() {
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
            let mut component = Vec::new();
            loop {
                let w = s.stack.pop().unwrap();
                s.on_stack.remove(w);
                component.push(w.to_string());
                if w == v {
                    break;
                }
            }
            if component.len() > 1 {
                component.sort();
                s.found.push(component);
            }
        }
    }
    let mut s = State {
        edges,
        index: BTreeMap::new(),
        low: BTreeMap::new(),
        stack: Vec::new(),
        on_stack: BTreeSet::new(),
        next: 0,
        found: Vec::new(),
    };
    for v in edges.keys() {
        if !s.index.contains_key(v.as_str()) {
            visit(&mut s, v);
        }
    }
    s.found
}

#[test]
fn no_import_cycle() {
    let graph = build_graph();
    let found = cycles(&graph.edges);
    let text: Vec<String> = found.iter().map(|c| c.join(" ↔ ")).collect();
    assert!(
        found.is_empty(),
        "import cycles between files:\n{}",
        text.join("\n")
    );
}

#[test]
fn the_cycle_finder_finds_a_planted_cycle() {
    // The checks above pass vacuously if the parser reads no import at
    // all; a planted graph and a real edge keep them honest.
    let mut edges = BTreeMap::new();
    edges.insert("a".to_string(), BTreeSet::from(["b".to_string()]));
    edges.insert("b".to_string(), BTreeSet::from(["c".to_string()]));
    edges.insert("c".to_string(), BTreeSet::from(["a".to_string()]));
    edges.insert("d".to_string(), BTreeSet::from(["a".to_string()]));
    assert_eq!(
        cycles(&edges),
        vec![vec!["a".to_string(), "b".to_string(), "c".to_string()]]
    );

    let mut paths = Vec::new();
    let code = "use crate::{fitting::{pipeline::Measurement, quality}, base::units::Hz};";
    for p in references(code, &[]) {
        paths.push(p.join("::"));
    }
    assert_eq!(
        paths,
        [
            "fitting::pipeline::Measurement",
            "fitting::quality",
            "base::units::Hz"
        ]
    );
    let graph = build_graph();
    let total: usize = graph.edges.values().map(BTreeSet::len).sum();
    assert!(
        total > 50,
        "only {total} imports read from src/: the parser is broken"
    );
}

#[test]
#[ignore = "prints the import graph; run with --ignored --nocapture"]
fn print_graph() {
    let graph = build_graph();
    for (file, targets) in &graph.edges {
        println!(
            "{file}: {}",
            targets.iter().cloned().collect::<Vec<_>>().join(" ")
        );
    }
    for c in cycles(&graph.edges) {
        println!("CYCLE: {}", c.join(" "));
    }
}

/// Most lines of shipped code (tests not counted) in one file.
const MAX_FILE_LINES: usize = 700;
/// Most lines in one function, signature and body.
const MAX_FUNCTION_LINES: usize = 120;

/// Functions longer than [`MAX_FUNCTION_LINES`] in `code`: (first line
/// number, name, length). A function starts at a line `fn NAME` (with any
/// visibility) and ends at the first line holding only its indentation
/// and `}`; a function that has a comment line starting `// Size:` or
/// `/// Size:` just above it (its reason) is not listed.
fn long_functions(code: &str) -> Vec<(usize, String, usize)> {
    let lines: Vec<&str> = code.lines().collect();
    let mut out = Vec::new();
    for (i, line) in lines.iter().enumerate() {
        let trimmed = line.trim_start();
        let indent = &line[..line.len() - trimmed.len()];
        let rest = [
            "pub fn ",
            "pub(crate) fn ",
            "pub(super) fn ",
            "fn ",
            "const fn ",
            "pub const fn ",
        ]
        .iter()
        .find_map(|p| trimmed.strip_prefix(p));
        let Some(rest) = rest else { continue };
        let name: String = rest
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_')
            .collect();
        // A declaration without a body (a trait method) ends in `;`.
        let Some(open) = (i..lines.len()).find(|&j| {
            let l = lines[j].trim_end();
            l.ends_with('{') || l.ends_with(';')
        }) else {
            continue;
        };
        if lines[open].trim_end().ends_with(';') {
            continue;
        }
        let close = format!("{indent}}}");
        let Some(end) = (open + 1..lines.len()).find(|&j| lines[j].trim_end() == close) else {
            continue;
        };
        let len = end - i + 1;
        let reasoned = lines[..i]
            .iter()
            .rev()
            .take_while(|l| l.trim_start().starts_with("//") || l.trim_start().starts_with("#["))
            .any(|l| {
                l.trim_start()
                    .trim_start_matches('/')
                    .trim_start()
                    .starts_with("Size:")
            });
        if len > MAX_FUNCTION_LINES && !reasoned {
            out.push((i + 1, name, len));
        }
    }
    out
}

#[test]
fn files_and_functions_stay_small_or_say_why() {
    let src = src_dir();
    let mut files = Vec::new();
    rust_files(&src, &mut files);
    let mut over = Vec::new();
    for f in &files {
        let rel = f.strip_prefix(&src).unwrap().display().to_string();
        let text = std::fs::read_to_string(f).unwrap();
        let code = before_tests(&text);
        let n = code.lines().count();
        let reasoned = text
            .lines()
            .take_while(|l| l.starts_with("//!") || l.trim().is_empty())
            .any(|l| {
                l.trim_start_matches("//!")
                    .trim_start()
                    .starts_with("Size:")
            });
        if n > MAX_FILE_LINES && !reasoned {
            over.push(format!(
                "{rel}: {n} lines of code (no `//! Size:` reason at its top)"
            ));
        }
        for (line, name, len) in long_functions(code) {
            over.push(format!(
                "{rel}:{line} fn {name}: {len} lines (no `// Size:` reason above it)"
            ));
        }
    }
    assert!(over.is_empty(), "too large:\n{}", over.join("\n"));
}

#[test]
fn the_size_check_sees_a_long_function() {
    let body: String = (0..130).map(|i| format!("    let x{i} = {i};\n")).collect();
    let code = format!("pub fn long() {{\n{body}}}\n\nfn short() {{\n}}\n");
    let found = long_functions(&code);
    assert_eq!(found, vec![(1, "long".to_string(), 132)]);
    let reasoned = format!("// Size: one table, read top to bottom.\n{code}");
    assert!(long_functions(&reasoned).is_empty());
}
