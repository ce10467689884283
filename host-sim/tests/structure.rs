//! The code's own shape, checked from its source (common practice, no source):
//!
//! - no function longer than [`MAX_FN_LINES`] lines in the core, the host or the firmware,
//!   outside the byte-level decoder state machines listed in [`STATE_MACHINES`] and outside
//!   test code;
//! - no import cycle between the host's modules (files) nor between its folders, and nothing
//!   in the library imports `cli/`.
//!
//! `cargo test -p sweepgate-host --test structure -- --nocapture` prints the longest
//! functions and the folder graph.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use syn::spanned::Spanned;
use syn::visit::Visit;

/// Longest function allowed, in lines (signature to closing brace).
const MAX_FN_LINES: usize = 80;

/// Byte-level decoder state machines, exempt from the length limit: (file, function).
const STATE_MACHINES: &[(&str, &str)] = &[
    ("src/wire/block.rs", "feed"),
    ("src/wire/block.rs", "step"),
    ("src/wire/ascii.rs", "feed"),
    ("src/wire/ascii.rs", "step"),
    ("src/wire/preview.rs", "feed"),
    ("src/wire/preview.rs", "push"),
];

fn repo_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("host-sim has a parent")
        .to_path_buf()
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    let mut entries: Vec<_> = entries.flatten().map(|e| e.path()).collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            if p.file_name().is_some_and(|n| n == "target") {
                continue;
            }
            rust_files(&p, out);
        } else if p.extension().is_some_and(|e| e == "rs") {
            out.push(p);
        }
    }
}

fn parse(path: &Path) -> syn::File {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    syn::parse_file(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn is_test_attr(attrs: &[syn::Attribute]) -> bool {
    attrs.iter().any(|a| {
        let p = a.path();
        if p.is_ident("test") {
            return true;
        }
        if p.is_ident("cfg") {
            let mut test = false;
            let _ = a.parse_nested_meta(|m| {
                test |= m.path.is_ident("test");
                Ok(())
            });
            return test;
        }
        false
    })
}

/// Every function with a body, outside test code: (name, first line, line count).
#[derive(Default)]
struct Functions {
    found: Vec<(String, usize, usize)>,
}

impl Functions {
    fn add(&mut self, name: String, span: proc_macro2::Span) {
        let (a, b) = (span.start().line, span.end().line);
        self.found.push((name, a, b + 1 - a));
    }
}

impl<'ast> Visit<'ast> for Functions {
    fn visit_item_mod(&mut self, m: &'ast syn::ItemMod) {
        if !is_test_attr(&m.attrs) {
            syn::visit::visit_item_mod(self, m);
        }
    }
    fn visit_item_fn(&mut self, f: &'ast syn::ItemFn) {
        if !is_test_attr(&f.attrs) {
            self.add(f.sig.ident.to_string(), f.span());
            syn::visit::visit_item_fn(self, f);
        }
    }
    fn visit_impl_item_fn(&mut self, f: &'ast syn::ImplItemFn) {
        if !is_test_attr(&f.attrs) {
            self.add(f.sig.ident.to_string(), f.span());
            syn::visit::visit_impl_item_fn(self, f);
        }
    }
    fn visit_trait_item_fn(&mut self, f: &'ast syn::TraitItemFn) {
        if f.default.is_some() {
            self.add(f.sig.ident.to_string(), f.span());
        }
        syn::visit::visit_trait_item_fn(self, f);
    }
}

#[test]
fn no_function_over_the_limit() {
    let root = repo_root();
    let mut files = Vec::new();
    for dir in [
        "src",
        "host-sim/src",
        "host-sim/examples",
        "examples/firmware-m4/src",
    ] {
        rust_files(&root.join(dir), &mut files);
    }
    let mut all = Vec::new();
    for f in &files {
        let rel = f
            .strip_prefix(&root)
            .unwrap()
            .to_string_lossy()
            .replace('\\', "/");
        let mut v = Functions::default();
        v.visit_file(&parse(f));
        for (name, line, len) in v.found {
            all.push((len, rel.clone(), line, name));
        }
    }
    assert!(
        all.len() > 100,
        "found only {} functions: the walk is broken",
        all.len()
    );
    all.sort_by(|a, b| b.cmp(a));
    println!("longest functions (lines, file:line, name):");
    for (len, file, line, name) in all.iter().take(20) {
        println!("{len:>5}  {file}:{line}  {name}");
    }
    let over: Vec<_> = all
        .iter()
        .filter(|(len, file, _, name)| {
            *len > MAX_FN_LINES && !STATE_MACHINES.iter().any(|(f, n)| f == file && n == name)
        })
        .collect();
    let mut text = String::new();
    for (len, file, line, name) in &over {
        text.push_str(&format!("\n  {len} lines: {file}:{line} {name}"));
    }
    assert!(
        over.is_empty(),
        "{} functions over {MAX_FN_LINES} lines:{text}",
        over.len()
    );
}

/// The host's modules: module path (e.g. `pipeline::replay`) → file.
fn host_modules(src: &Path) -> BTreeMap<String, PathBuf> {
    let mut files = Vec::new();
    rust_files(src, &mut files);
    let mut map = BTreeMap::new();
    for f in files {
        let rel = f.strip_prefix(src).unwrap().with_extension("");
        let mut parts: Vec<String> = rel
            .components()
            .map(|c| c.as_os_str().to_string_lossy().into_owned())
            .collect();
        if parts.last().is_some_and(|p| p == "mod") {
            parts.pop();
        }
        let name = parts.join("::");
        if name == "lib" || name == "main" {
            continue;
        }
        map.insert(name, f);
    }
    map
}

/// Every `crate::…` path a file names, in `use` trees and in the code.
#[derive(Default)]
struct CratePaths {
    paths: BTreeSet<Vec<String>>,
}

impl CratePaths {
    fn tree(&mut self, prefix: &mut Vec<String>, t: &syn::UseTree) {
        match t {
            syn::UseTree::Path(p) => {
                prefix.push(p.ident.to_string());
                self.tree(prefix, &p.tree);
                prefix.pop();
            }
            syn::UseTree::Name(n) => {
                let mut v = prefix.clone();
                v.push(n.ident.to_string());
                self.paths.insert(v);
            }
            syn::UseTree::Rename(n) => {
                let mut v = prefix.clone();
                v.push(n.ident.to_string());
                self.paths.insert(v);
            }
            syn::UseTree::Glob(_) => {
                self.paths.insert(prefix.clone());
            }
            syn::UseTree::Group(g) => {
                for t in &g.items {
                    self.tree(prefix, t);
                }
            }
        }
    }
}

impl<'ast> Visit<'ast> for CratePaths {
    fn visit_item_mod(&mut self, m: &'ast syn::ItemMod) {
        if !is_test_attr(&m.attrs) {
            syn::visit::visit_item_mod(self, m);
        }
    }
    fn visit_item_use(&mut self, u: &'ast syn::ItemUse) {
        let mut prefix = Vec::new();
        self.tree(&mut prefix, &u.tree);
    }
    fn visit_path(&mut self, p: &'ast syn::Path) {
        let segs: Vec<String> = p.segments.iter().map(|s| s.ident.to_string()).collect();
        self.paths.insert(segs);
        syn::visit::visit_path(self, p);
    }
}

/// Module-to-module edges of the host library (`self` and `super` resolved).
fn host_edges(src: &Path) -> BTreeMap<String, BTreeSet<String>> {
    let modules = host_modules(src);
    let mut edges: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for (name, file) in &modules {
        let mut v = CratePaths::default();
        v.visit_file(&parse(file));
        let here: Vec<String> = name.split("::").map(String::from).collect();
        let is_mod_rs = file.file_name().is_some_and(|n| n == "mod.rs");
        for p in v.paths {
            let mut abs: Vec<String> = match p.first().map(String::as_str) {
                Some("crate") => p[1..].to_vec(),
                Some("super") => {
                    let mut base = here.clone();
                    let mut rest = &p[..];
                    while rest.first().is_some_and(|s| s == "super") {
                        if !is_mod_rs || rest.len() < p.len() {
                            base.pop();
                        }
                        rest = &rest[1..];
                    }
                    if is_mod_rs {
                        base.pop();
                    }
                    base.extend(rest.iter().cloned());
                    base
                }
                _ => continue,
            };
            // The longest prefix that is a module.
            while !abs.is_empty() && !modules.contains_key(&abs.join("::")) {
                abs.pop();
            }
            let target = abs.join("::");
            if !target.is_empty() && &target != name && !name.starts_with(&format!("{target}::")) {
                edges.entry(name.clone()).or_default().insert(target);
            }
        }
    }
    edges
}

fn find_cycle(edges: &BTreeMap<String, BTreeSet<String>>) -> Option<Vec<String>> {
    // Depth-first search with colours.
    fn dfs(
        n: &str,
        edges: &BTreeMap<String, BTreeSet<String>>,
        state: &mut BTreeMap<String, u8>,
        stack: &mut Vec<String>,
    ) -> Option<Vec<String>> {
        state.insert(n.to_string(), 1);
        stack.push(n.to_string());
        for m in edges.get(n).into_iter().flatten() {
            match state.get(m.as_str()).copied().unwrap_or(0) {
                1 => {
                    let at = stack.iter().position(|s| s == m).unwrap();
                    let mut c = stack[at..].to_vec();
                    c.push(m.clone());
                    return Some(c);
                }
                0 => {
                    if let Some(c) = dfs(m, edges, state, stack) {
                        return Some(c);
                    }
                }
                _ => {}
            }
        }
        stack.pop();
        state.insert(n.to_string(), 2);
        None
    }
    let mut state = BTreeMap::new();
    for n in edges.keys() {
        if state.get(n.as_str()).copied().unwrap_or(0) == 0 {
            let mut stack = Vec::new();
            if let Some(c) = dfs(n, edges, &mut state, &mut stack) {
                return Some(c);
            }
        }
    }
    None
}

#[test]
fn no_import_cycle_between_host_modules() {
    let src = repo_root().join("host-sim/src");
    let edges = host_edges(&src);
    let n_edges: usize = edges.values().map(BTreeSet::len).sum();
    assert!(
        n_edges > 20,
        "found only {n_edges} imports: the walk is broken"
    );
    if let Some(c) = find_cycle(&edges) {
        panic!("import cycle between host modules: {}", c.join(" -> "));
    }
    // Folders: the first path segment.
    let mut folders: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for (from, tos) in &edges {
        let a = from.split("::").next().unwrap().to_string();
        for to in tos {
            let b = to.split("::").next().unwrap().to_string();
            if a != b {
                folders.entry(a.clone()).or_default().insert(b);
            }
        }
    }
    println!("host folders and what they import:");
    for (a, bs) in &folders {
        println!(
            "  {a} -> {}",
            bs.iter().cloned().collect::<Vec<_>>().join(", ")
        );
    }
    if let Some(c) = find_cycle(&folders) {
        panic!("import cycle between host folders: {}", c.join(" -> "));
    }
    let into_cli: Vec<_> = edges
        .iter()
        .filter(|(from, tos)| !from.starts_with("cli") && tos.iter().any(|t| t.starts_with("cli")))
        .map(|(from, _)| from.clone())
        .collect();
    assert!(
        into_cli.is_empty(),
        "library modules import cli/: {into_cli:?}"
    );
}

#[test]
fn the_cycle_finder_finds_a_cycle() {
    let mut e: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    e.entry("a".into()).or_default().insert("b".into());
    e.entry("b".into()).or_default().insert("c".into());
    assert!(find_cycle(&e).is_none());
    e.entry("c".into()).or_default().insert("a".into());
    assert_eq!(find_cycle(&e).unwrap(), ["a", "b", "c", "a"]);
}
