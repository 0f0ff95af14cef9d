//! Tidiness checks of the source tree: every Rust file starts with a `//!` comment that says
//! what it is for (the contributor guide's rule), so that a reader of any file knows its job
//! before its code; and no two source files of a crate import each other, directly or in a
//! loop, so that every file can be read (and moved) after the files it builds on.

use mobilis_tests::workspace_root;
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

fn rust_files(directory: &Path, found: &mut Vec<PathBuf>) {
    let Ok(entries) = std::fs::read_dir(directory) else {
        return;
    };
    for entry in entries.flatten() {
        let path = entry.path();
        let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
        if path.is_dir() {
            if name != "target" && !name.starts_with('.') {
                rust_files(&path, found);
            }
        } else if name.ends_with(".rs") {
            found.push(path);
        }
    }
}

/// The folders of the workspace that hold Rust sources.
const SOURCE_FOLDERS: [&str; 9] = [
    "core",
    "protocol",
    "rpc",
    "plot",
    "plugins",
    "clients",
    "tests",
    "demo-data",
    "templates",
];

#[test]
fn every_rust_file_starts_with_a_module_doc_comment() {
    let root = workspace_root();
    let mut files = Vec::new();
    for top in SOURCE_FOLDERS {
        rust_files(&root.join(top), &mut files);
    }
    assert!(files.len() > 50, "the walk found only {} files", files.len());
    let missing: Vec<String> = files
        .iter()
        .filter(|file| {
            let text = std::fs::read_to_string(file).unwrap_or_default();
            !text
                .lines()
                .find(|line| !line.trim().is_empty())
                .is_some_and(|line| line.starts_with("//!"))
        })
        .map(|file| file.strip_prefix(&root).unwrap_or(file).display().to_string())
        .collect();
    assert!(
        missing.is_empty(),
        "files without a leading //! doc comment: {missing:?}"
    );
}

// ---------------------------------------------------------------------------------------
// File-level import graph.
//
// The rule: file A depends on file B when A names an item of a module defined in B, through
// `use crate::...`, `use super::...`, `use self::...`, a `crate::`/`super::`/`self::` path in
// code, or a path starting with the name of one of its own child modules (`error::Kind`). A
// path is followed through the module tree as far as its segments are modules; the file of
// the last module reached is the one named. A parent declaring `mod child;` is not an edge by
// itself, but a parent re-exporting or using a child's items is, as is a child's
// `use super::*`. Paths inside inline modules (`mod tests { ... }`) count for their file.
// The scan is textual (comments and literals blanked first), which is enough for the code
// this workspace writes and keeps the check free of a parser dependency.

/// `text` with comments and the contents of string and character literals replaced by
/// spaces, newlines kept, so that byte offsets still match the original.
fn blank_comments_and_literals(text: &str) -> Vec<u8> {
    let bytes = text.as_bytes();
    let mut out = bytes.to_vec();
    let blank = |out: &mut Vec<u8>, from: usize, to: usize| {
        for b in &mut out[from..to.min(bytes.len())] {
            if *b != b'\n' {
                *b = b' ';
            }
        }
    };
    let is_ident = |b: u8| b.is_ascii_alphanumeric() || b == b'_';
    let mut i = 0;
    while i < bytes.len() {
        let rest = &bytes[i..];
        if rest.starts_with(b"//") {
            let end = rest.iter().position(|&b| b == b'\n').map_or(bytes.len(), |n| i + n);
            blank(&mut out, i, end);
            i = end;
        } else if rest.starts_with(b"/*") {
            let (mut depth, mut j) = (1, i + 2);
            while j < bytes.len() && depth > 0 {
                if bytes[j..].starts_with(b"/*") {
                    depth += 1;
                    j += 2;
                } else if bytes[j..].starts_with(b"*/") {
                    depth -= 1;
                    j += 2;
                } else {
                    j += 1;
                }
            }
            blank(&mut out, i, j);
            i = j;
        } else if (bytes[i] == b'r' || rest.starts_with(b"br")) && (i == 0 || !is_ident(bytes[i - 1])) && {
            let start = if bytes[i] == b'b' { i + 2 } else { i + 1 };
            let hashes = bytes[start..].iter().take_while(|&&b| b == b'#').count();
            bytes.get(start + hashes) == Some(&b'"')
        } {
            let start = if bytes[i] == b'b' { i + 2 } else { i + 1 };
            let hashes = bytes[start..].iter().take_while(|&&b| b == b'#').count();
            let mut close = vec![b'"'];
            close.extend(std::iter::repeat_n(b'#', hashes));
            let body = start + hashes + 1;
            let end = bytes[body..]
                .windows(close.len())
                .position(|w| w == close.as_slice())
                .map_or(bytes.len(), |n| body + n);
            blank(&mut out, body, end);
            i = end + close.len();
        } else if bytes[i] == b'"' {
            let mut j = i + 1;
            while j < bytes.len() && bytes[j] != b'"' {
                j += if bytes[j] == b'\\' { 2 } else { 1 };
            }
            blank(&mut out, i + 1, j);
            i = j + 1;
        } else if bytes[i] == b'\'' {
            // A character literal ('x', '\n', '\u{7f}') or a lifetime ('a): only the former
            // closes with a quote within a few bytes.
            let end = if bytes.get(i + 1) == Some(&b'\\') {
                bytes[i + 2..].iter().position(|&b| b == b'\'').map(|n| i + 2 + n)
            } else {
                let width = text[i + 1..].chars().next().map_or(1, char::len_utf8);
                (bytes.get(i + 1 + width) == Some(&b'\'')).then_some(i + 1 + width)
            };
            match end {
                Some(end) => {
                    blank(&mut out, i + 1, end);
                    i = end + 1;
                }
                None => i += 1,
            }
        } else {
            i += 1;
        }
    }
    out
}

/// The tokens that matter for module paths: identifiers (with `$crate`), `::`, and single
/// punctuation bytes; each with its byte offset.
fn tokens(code: &[u8]) -> Vec<(usize, String)> {
    let mut found = Vec::new();
    let mut i = 0;
    while i < code.len() {
        let b = code[i];
        if b.is_ascii_alphabetic() || b == b'_' || (b == b'$' && code[i + 1..].starts_with(b"crate")) {
            let start = i;
            i += 1;
            while i < code.len() && (code[i].is_ascii_alphanumeric() || code[i] == b'_') {
                i += 1;
            }
            let word = String::from_utf8_lossy(&code[start..i]).into_owned();
            found.push((start, if word == "$crate" { "crate".to_owned() } else { word }));
        } else if code[i..].starts_with(b"::") {
            found.push((i, "::".to_owned()));
            i += 2;
        } else if b.is_ascii_whitespace() || b >= 0x80 || b.is_ascii_digit() {
            i += 1;
        } else {
            found.push((i, (b as char).to_string()));
            i += 1;
        }
    }
    found
}

/// One module of a crate: the file it is written in, its parent, its child modules by name.
struct Module {
    file: usize,
    parent: Option<usize>,
    children: BTreeMap<String, usize>,
}

/// The modules and files of one crate, and the paths each module names.
#[derive(Default)]
struct CrateScan {
    files: Vec<PathBuf>,
    modules: Vec<Module>,
    /// (module, path segments) of every path written in that module.
    paths: Vec<(usize, Vec<String>)>,
}

impl CrateScan {
    fn file_index(&mut self, path: &Path) -> usize {
        match self.files.iter().position(|f| f == path) {
            Some(index) => index,
            None => {
                self.files.push(path.to_owned());
                self.files.len() - 1
            }
        }
    }

    fn new_module(&mut self, file: usize, parent: Option<usize>, name: Option<&str>) -> usize {
        self.modules.push(Module {
            file,
            parent,
            children: BTreeMap::new(),
        });
        let id = self.modules.len() - 1;
        if let (Some(parent), Some(name)) = (parent, name) {
            self.modules[parent].children.insert(name.to_owned(), id);
        }
        id
    }

    /// Reads `path` as the file of `module`; `owns_directory` is true for crate roots and
    /// `mod.rs` files, whose child modules sit beside them rather than in a folder named after
    /// them.
    fn read_file(&mut self, path: &Path, module: usize, owns_directory: bool) {
        let Ok(text) = std::fs::read_to_string(path) else {
            return;
        };
        let code = blank_comments_and_literals(&text);
        let tokens = tokens(&code);
        let base = if owns_directory {
            path.parent().unwrap().to_owned()
        } else {
            path.with_extension("")
        };
        // (module, brace depth at which its inline block closes)
        let mut stack: Vec<(usize, usize)> = vec![(module, 0)];
        let mut depth = 0usize;
        let mut i = 0;
        while i < tokens.len() {
            let current = stack.last().unwrap().0;
            let word = tokens[i].1.as_str();
            match word {
                "{" => depth += 1,
                "}" => {
                    depth = depth.saturating_sub(1);
                    if stack.len() > 1 && stack.last().unwrap().1 == depth {
                        stack.pop();
                    }
                }
                "mod" if tokens.get(i + 1).is_some_and(|t| is_identifier(&t.1)) => {
                    let name = tokens[i + 1].1.clone();
                    match tokens.get(i + 2).map(|t| t.1.as_str()) {
                        Some(";") => {
                            let declared_at = tokens[i].0;
                            let file = path_attribute(&text, declared_at)
                                .map(|p| path.parent().unwrap().join(p))
                                .or_else(|| {
                                    let flat = base.join(format!("{name}.rs"));
                                    let nested = base.join(&name).join("mod.rs");
                                    [flat, nested].into_iter().find(|p| p.is_file())
                                });
                            if let Some(file) = file {
                                let index = self.file_index(&file);
                                let child = self.new_module(index, Some(current), Some(&name));
                                let owns = file.file_name().is_some_and(|n| n == "mod.rs");
                                self.read_file(&file, child, owns);
                            }
                            i += 3;
                            continue;
                        }
                        Some("{") => {
                            let file = self.modules[current].file;
                            let child = self.new_module(file, Some(current), Some(&name));
                            stack.push((child, depth));
                            depth += 1;
                            i += 3;
                            continue;
                        }
                        _ => {}
                    }
                }
                "use" => {
                    let mut j = i + 1;
                    let mut paths = Vec::new();
                    use_tree(&tokens, &mut j, Vec::new(), &mut paths);
                    for path in paths {
                        self.paths.push((current, path));
                    }
                    while j < tokens.len() && tokens[j].1 != ";" {
                        j += 1;
                    }
                    i = j + 1;
                    continue;
                }
                _ if is_identifier(word)
                    && tokens.get(i + 1).is_some_and(|t| t.1 == "::")
                    && (i == 0 || tokens[i - 1].1 != "::") =>
                {
                    let mut segments = vec![word.to_owned()];
                    let mut j = i + 1;
                    while tokens.get(j).is_some_and(|t| t.1 == "::")
                        && tokens.get(j + 1).is_some_and(|t| is_identifier(&t.1))
                    {
                        segments.push(tokens[j + 1].1.clone());
                        j += 2;
                    }
                    self.paths.push((current, segments));
                    i = j;
                    continue;
                }
                _ => {}
            }
            i += 1;
        }
    }

    /// The module a path names, as far as its segments are modules; None for paths that leave
    /// the crate (`std::`, other crates) or start at a name that is not a module.
    fn resolve(&self, from: usize, segments: &[String]) -> Option<usize> {
        let mut current = from;
        let mut rest = segments;
        match rest.first()?.as_str() {
            "crate" => {
                current = 0;
                rest = &rest[1..];
            }
            "self" => rest = &rest[1..],
            "super" => {
                while rest.first().is_some_and(|s| s == "super") {
                    current = self.modules[current].parent?;
                    rest = &rest[1..];
                }
            }
            first if self.modules[current].children.contains_key(first) => {}
            _ => return None,
        }
        for segment in rest {
            match self.modules[current].children.get(segment) {
                Some(&child) => current = child,
                None => break,
            }
        }
        Some(current)
    }

    /// Every file-to-file edge (no self edges).
    fn edges(&self) -> BTreeSet<(usize, usize)> {
        self.paths
            .iter()
            .filter_map(|(module, segments)| {
                let target = self.resolve(*module, segments)?;
                let (a, b) = (self.modules[*module].file, self.modules[target].file);
                (a != b).then_some((a, b))
            })
            .collect()
    }
}

fn is_identifier(word: &str) -> bool {
    word.bytes()
        .next()
        .is_some_and(|b| b.is_ascii_alphabetic() || b == b'_')
}

/// The `#[path = "..."]` attribute written just before the `mod` at `offset`, if any.
fn path_attribute(text: &str, offset: usize) -> Option<String> {
    let before = text[..offset].trim_end();
    let before = before.strip_suffix("pub").unwrap_or(before).trim_end();
    let line = before.lines().last()?.trim();
    let inner = line.strip_prefix("#[path")?.trim_start().strip_prefix('=')?.trim();
    let quoted = inner.strip_suffix(']')?.trim();
    Some(quoted.trim_matches('"').to_owned())
}

/// Expands the use tree starting at `tokens[*at]` into whole paths (`a::{b, c::*}` gives
/// `a::b` and `a::c::*`), leaving `*at` after it.
fn use_tree(tokens: &[(usize, String)], at: &mut usize, prefix: Vec<String>, paths: &mut Vec<Vec<String>>) {
    let mut path = prefix;
    while let Some((_, token)) = tokens.get(*at) {
        match token.as_str() {
            "::" => *at += 1,
            "{" => {
                *at += 1;
                loop {
                    use_tree(tokens, at, path.clone(), paths);
                    match tokens.get(*at).map(|t| t.1.as_str()) {
                        Some(",") => *at += 1,
                        Some("}") => {
                            *at += 1;
                            break;
                        }
                        _ => return,
                    }
                    if tokens.get(*at).is_some_and(|t| t.1 == "}") {
                        *at += 1;
                        break;
                    }
                }
                return;
            }
            "*" => {
                *at += 1;
                path.push("*".to_owned());
                paths.push(path);
                return;
            }
            "as" => *at += 2,
            word if is_identifier(word) => {
                path.push(word.to_owned());
                *at += 1;
            }
            _ => break,
        }
    }
    if !path.is_empty() {
        paths.push(path);
    }
}

/// The root files of every crate in the workspace: libraries, binaries, integration tests,
/// benches and build scripts, each read as its own crate.
fn crate_roots(root: &Path) -> Vec<PathBuf> {
    let mut manifests = Vec::new();
    let mut pending = vec![root.to_owned()];
    while let Some(dir) = pending.pop() {
        let Ok(entries) = std::fs::read_dir(&dir) else { continue };
        for entry in entries.flatten() {
            let path = entry.path();
            let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
            if path.is_dir() {
                if name != "target" && name != "node_modules" && !name.starts_with('.') {
                    pending.push(path);
                }
            } else if name == "Cargo.toml" && dir != root {
                manifests.push(dir.clone());
            }
        }
    }
    let mut roots = Vec::new();
    for package in manifests {
        for file in ["src/lib.rs", "src/main.rs", "build.rs"] {
            if package.join(file).is_file() {
                roots.push(package.join(file));
            }
        }
        for folder in ["src/bin", "tests", "benches"] {
            let Ok(entries) = std::fs::read_dir(package.join(folder)) else {
                continue;
            };
            for entry in entries.flatten() {
                let path = entry.path();
                if path.extension().is_some_and(|e| e == "rs") {
                    roots.push(path);
                } else if path.join("main.rs").is_file() {
                    // A target of several files: `tests/suite/main.rs` and its modules.
                    roots.push(path.join("main.rs"));
                }
            }
        }
    }
    roots.sort();
    roots
}

/// The cycles of the file import graph of the crate rooted at `root_file`, each as its files
/// (strongly connected components of more than one file, Tarjan's algorithm: R. Tarjan,
/// "Depth-first search and linear graph algorithms", SIAM J. Comput. 1 (1972) 146-160).
fn import_cycles(root_file: &Path) -> Vec<Vec<PathBuf>> {
    let mut scan = CrateScan::default();
    let file = scan.file_index(root_file);
    let root = scan.new_module(file, None, None);
    scan.read_file(root_file, root, true);
    let n = scan.files.len();
    let mut next: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (a, b) in scan.edges() {
        next[a].push(b);
    }
    struct Tarjan<'a> {
        next: &'a [Vec<usize>],
        index: Vec<Option<usize>>,
        low: Vec<usize>,
        on_stack: Vec<bool>,
        stack: Vec<usize>,
        counter: usize,
        components: Vec<Vec<usize>>,
    }
    fn visit(t: &mut Tarjan, v: usize) {
        t.index[v] = Some(t.counter);
        t.low[v] = t.counter;
        t.counter += 1;
        t.stack.push(v);
        t.on_stack[v] = true;
        for &w in &t.next[v] {
            match t.index[w] {
                None => {
                    visit(t, w);
                    t.low[v] = t.low[v].min(t.low[w]);
                }
                Some(index) if t.on_stack[w] => t.low[v] = t.low[v].min(index),
                Some(_) => {}
            }
        }
        if Some(t.low[v]) == t.index[v] {
            let mut component = Vec::new();
            while let Some(w) = t.stack.pop() {
                t.on_stack[w] = false;
                component.push(w);
                if w == v {
                    break;
                }
            }
            t.components.push(component);
        }
    }
    let mut t = Tarjan {
        next: &next,
        index: vec![None; n],
        low: vec![0; n],
        on_stack: vec![false; n],
        stack: Vec::new(),
        counter: 0,
        components: Vec::new(),
    };
    for v in 0..n {
        if t.index[v].is_none() {
            visit(&mut t, v);
        }
    }
    t.components
        .into_iter()
        .filter(|c| c.len() > 1)
        .map(|c| {
            let mut files: Vec<PathBuf> = c.into_iter().map(|f| scan.files[f].clone()).collect();
            files.sort();
            files
        })
        .collect()
}

#[test]
fn no_two_source_files_import_each_other() {
    let root = workspace_root();
    let roots = crate_roots(&root);
    assert!(roots.len() > 20, "the walk found only {} crate roots", roots.len());
    let mut cycles = BTreeSet::new();
    for crate_root in &roots {
        for cycle in import_cycles(crate_root) {
            let names: Vec<String> = cycle
                .iter()
                .map(|f| f.strip_prefix(&root).unwrap_or(f).display().to_string())
                .collect();
            cycles.insert(names.join(" <-> "));
        }
    }
    assert!(
        cycles.is_empty(),
        "source files that import each other (directly or in a loop); move the item they share \
         to the file it belongs to, below both:\n{}",
        cycles.into_iter().collect::<Vec<_>>().join("\n")
    );
}

#[test]
fn the_import_graph_scan_sees_paths_use_trees_and_inline_modules() {
    let dir = tempfile::tempdir().unwrap();
    let write = |name: &str, text: &str| {
        let path = dir.path().join(name);
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(path, text).unwrap();
    };
    write("lib.rs", "//! x\nmod a;\nmod b;\nmod c;\nmod d;\n");
    write("a.rs", "//! x\nuse crate::{b::{One, Two as T}, c};\n");
    write("b.rs", "//! x\n// use crate::a::X;\nfn f() -> &'static str { \"crate::a::X\" }\n#[cfg(test)]\nmod tests { use super::*; use crate::d::Y; }\n");
    write("c.rs", "//! x\nmod inner;\npub use inner::Z;\n");
    write("c/inner.rs", "//! x\nfn g() { let _ = super::super::a::value(); }\n");
    write("d.rs", "//! x\npub struct Y;\n");
    let cycles = import_cycles(&dir.path().join("lib.rs"));
    let names: Vec<Vec<String>> = cycles
        .iter()
        .map(|c| {
            c.iter()
                .map(|f| f.strip_prefix(dir.path()).unwrap().display().to_string())
                .collect()
        })
        .collect();
    // a -> c -> c/inner -> a is a loop; b's commented and quoted paths are not edges, and its
    // test module's edge to d is one way.
    assert_eq!(
        names,
        vec![vec!["a.rs".to_owned(), "c/inner.rs".to_owned(), "c.rs".to_owned()]]
    );
}
