//! The library's imports point one way. Read from the source itself (every `crate::…` and
//! `super::…` path and every use of a child module, test modules excluded):
//! - a top-level module names only modules below it in `ORDER`;
//! - inside a module, the files (submodules) form no circle: a child names its siblings by
//!   their own paths, never items of its parent (which would point back up), and siblings do
//!   not name each other both ways.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// Lowest first. `cli` is the binary's consumer of the library.
const ORDER: &[&str] = &[
    "units",
    "notice",
    "pulse",
    "netlist",
    "network",
    "tolerance",
    "response",
    "estimate",
    "fisher",
    "plan",
    "bench",
    "fitplan",
    "measure",
    "scenario",
    "pipeline",
    "report",
    "cli",
];

/// Module path of a source file: src/bench/timing.rs → ["bench", "timing"], src/plan.rs →
/// ["plan"], src/bench/mod.rs → ["bench"].
fn module_of(src: &Path, file: &Path) -> Vec<String> {
    let rel = file.strip_prefix(src).unwrap();
    let mut parts: Vec<String> = rel
        .iter()
        .map(|c| c.to_string_lossy().into_owned())
        .collect();
    let last = parts.pop().unwrap();
    let stem = last.trim_end_matches(".rs").to_string();
    if stem != "mod" && stem != "lib" && stem != "main" {
        parts.push(stem);
    }
    parts
}

fn files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// The file's text without its test module (by convention `#[cfg(test)]` starts the tail)
/// and without comments.
fn code_of(text: &str) -> String {
    let mut body = text.to_string();
    // A `#[cfg(test)] mod tests;` declaration is dropped alone; an inline test module ends the file.
    while let Some(i) = body.find("#[cfg(test)]") {
        let after_attr = &body[i + "#[cfg(test)]".len()..];
        let next = after_attr.trim_start();
        match next.find('\n') {
            Some(n) if next[..n].trim_end().ends_with(';') => {
                let skip = after_attr.len() - next.len() + n;
                body.replace_range(i..i + "#[cfg(test)]".len() + skip, "");
            }
            _ => {
                body.truncate(i);
                break;
            }
        }
    }
    body.lines()
        .map(|l| match l.find("//") {
            Some(i) => &l[..i],
            None => l,
        })
        .collect::<Vec<_>>()
        .join("\n")
}

fn ident(s: &str) -> String {
    s.chars()
        .take_while(|c| c.is_alphanumeric() || *c == '_')
        .collect()
}

/// Segments of one path starting at `s` (`a::b::C` → [a, b, C]); a braced group `a::{b, c::d}`
/// yields one path per item.
fn paths_at(s: &str) -> Vec<Vec<String>> {
    let mut segs = Vec::new();
    let mut rest = s;
    loop {
        if let Some(inner) = rest.strip_prefix('{') {
            let mut depth = 0;
            let mut end = inner.len();
            for (i, c) in inner.char_indices() {
                match c {
                    '{' => depth += 1,
                    '}' if depth == 0 => {
                        end = i;
                        break;
                    }
                    '}' => depth -= 1,
                    _ => {}
                }
            }
            let mut out = Vec::new();
            let group = &inner[..end];
            let mut start = 0;
            let mut depth = 0;
            for (i, c) in group
                .char_indices()
                .chain(std::iter::once((group.len(), ',')))
            {
                match c {
                    '{' => depth += 1,
                    '}' => depth -= 1,
                    ',' if depth == 0 => {
                        for tail in paths_at(group[start..i.min(group.len())].trim()) {
                            if tail.first().is_some_and(|t| t != "self") {
                                let mut p = segs.clone();
                                p.extend(tail);
                                out.push(p);
                            }
                        }
                        start = i + 1;
                    }
                    _ => {}
                }
            }
            return out;
        }
        let name = ident(rest);
        if name.is_empty() {
            break;
        }
        rest = &rest[name.len()..];
        segs.push(name);
        match rest.strip_prefix("::") {
            Some(r) => rest = r,
            None => break,
        }
    }
    if segs.is_empty() {
        Vec::new()
    } else {
        vec![segs]
    }
}

/// Every path following `prefix::` in the code (not as part of a longer identifier).
fn after(code: &str, prefix: &str) -> Vec<Vec<String>> {
    let pat = format!("{prefix}::");
    let mut out = Vec::new();
    let mut rest = code;
    while let Some(i) = rest.find(&pat) {
        let before = rest[..i].chars().last();
        rest = &rest[i + pat.len()..];
        if before.is_some_and(|c| c.is_alphanumeric() || c == '_' || c == ':') {
            continue;
        }
        out.extend(paths_at(rest));
    }
    out
}

/// Child modules a file declares (`mod x;` / `pub mod x;`).
fn children(code: &str) -> Vec<String> {
    code.lines()
        .filter_map(|l| {
            let l = l.trim();
            let l = l
                .strip_prefix("pub(crate) ")
                .or_else(|| l.strip_prefix("pub "))
                .unwrap_or(l);
            let name = l.strip_prefix("mod ")?.strip_suffix(';')?;
            Some(name.trim().to_string())
        })
        .collect()
}

struct Tree {
    /// module path → (code, declared children)
    modules: BTreeMap<Vec<String>, (String, Vec<String>)>,
}

impl Tree {
    fn read() -> Tree {
        let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
        let mut list = Vec::new();
        files(&src, &mut list);
        let mut modules = BTreeMap::new();
        for f in list {
            if f.file_name()
                .is_some_and(|n| n == "main.rs" || n == "tests.rs")
            {
                continue;
            }
            let code = code_of(&std::fs::read_to_string(&f).unwrap());
            let kids = children(&code);
            modules.insert(module_of(&src, &f), (code, kids));
        }
        Tree { modules }
    }

    /// The deepest known module along `path` (a path may end in an item name).
    fn resolve(&self, mut path: Vec<String>) -> Vec<String> {
        while !path.is_empty() && !self.modules.contains_key(&path) {
            path.pop();
        }
        path
    }

    /// Edges from each module to the modules its code names.
    fn edges(&self) -> BTreeMap<Vec<String>, BTreeSet<Vec<String>>> {
        let mut edges = BTreeMap::new();
        for (m, (code, kids)) in &self.modules {
            let mut to = BTreeSet::new();
            for path in after(code, "crate") {
                to.insert(self.resolve(path));
            }
            if !m.is_empty() {
                let parent: Vec<String> = m[..m.len() - 1].to_vec();
                for path in after(code, "super") {
                    let mut p = parent.clone();
                    p.extend(path);
                    to.insert(self.resolve(p));
                }
            }
            for kid in kids {
                let mut p = m.clone();
                p.push(kid.clone());
                let named = !after(code, kid).is_empty();
                if named {
                    to.insert(p);
                }
            }
            to.remove(m);
            to.retain(|p| !p.is_empty());
            edges.insert(m.clone(), to);
        }
        edges
    }
}

fn rank(top: &str) -> Option<usize> {
    ORDER.iter().position(|&m| m == top)
}

#[test]
fn every_top_level_module_is_placed() {
    let tree = Tree::read();
    for m in tree.modules.keys().filter(|m| m.len() == 1) {
        assert!(rank(&m[0]).is_some(), "module {} is not in ORDER", m[0]);
    }
}

#[test]
fn top_level_imports_point_down() {
    let tree = Tree::read();
    let mut bad = Vec::new();
    for (from, tos) in tree.edges() {
        let (Some(f), true) = (from.first(), !from.is_empty()) else {
            continue;
        };
        for to in tos {
            let t = &to[0];
            if t != f && rank(t) >= rank(f) {
                bad.push(format!("{} names {}", from.join("::"), to.join("::")));
            }
        }
    }
    assert!(bad.is_empty(), "upward imports:\n{}", bad.join("\n"));
}

#[test]
fn no_circle_among_files() {
    let tree = Tree::read();
    let edges = tree.edges();
    // Depth-first search for a back edge; report the circle it closes.
    fn visit(
        n: &Vec<String>,
        edges: &BTreeMap<Vec<String>, BTreeSet<Vec<String>>>,
        state: &mut BTreeMap<Vec<String>, u8>,
        stack: &mut Vec<Vec<String>>,
        found: &mut Vec<String>,
    ) {
        state.insert(n.clone(), 1);
        stack.push(n.clone());
        for m in edges.get(n).into_iter().flatten() {
            match state.get(m).copied().unwrap_or(0) {
                0 => visit(m, edges, state, stack, found),
                1 => {
                    let i = stack.iter().position(|s| s == m).unwrap();
                    let circle: Vec<String> = stack[i..]
                        .iter()
                        .chain(std::iter::once(m))
                        .map(|p| p.join("::"))
                        .collect();
                    found.push(circle.join(" → "));
                }
                _ => {}
            }
        }
        stack.pop();
        state.insert(n.clone(), 2);
    }
    let mut state = BTreeMap::new();
    let mut found = Vec::new();
    for n in edges.keys() {
        if state.get(n).copied().unwrap_or(0) == 0 {
            visit(n, &edges, &mut state, &mut Vec::new(), &mut found);
        }
    }
    assert!(found.is_empty(), "import circles:\n{}", found.join("\n"));
}

#[test]
fn the_checker_sees_a_circle_and_an_upward_import() {
    // The checker itself must be able to fail: a planted circle and an upward path.
    let v = |x: &[&str]| x.iter().map(|s| s.to_string()).collect::<Vec<_>>();
    let code = "use crate::report::words;\nuse super::sibling::Thing;\n";
    assert_eq!(after(code, "crate"), vec![v(&["report", "words"])]);
    assert_eq!(after(code, "super"), vec![v(&["sibling", "Thing"])]);
    assert!(rank("report") > rank("plan"));
    assert_eq!(
        after("use super::{a, b::{c, d}};", "super"),
        vec![v(&["a"]), v(&["b", "c"]), v(&["b", "d"])]
    );
}
