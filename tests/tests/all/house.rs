//! The house: every crate's modules import one way (no module imports one that imports it
//! back), and host-trainer's top-level modules follow the data flow, log → dataset →
//! training → release → report. Acyclic module dependencies are common practice for
//! layered code; the rule here is the project's own (DEVELOPERS.md, "Architecture").
//!
//! The module tree is read as the compiler reads it, from the `mod` declarations, and an
//! import is any `crate::…` or `super::…` path outside comments and outside inline
//! `#[cfg(test)] mod tests` blocks (whose `super` is the file itself).

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// One module file: its path in the crate (empty for the crate root) and its code.
struct Module {
    path: Vec<String>,
    file: PathBuf,
    code: String,
}

/// The code of a file without comments and without its inline test module.
fn code_of(text: &str) -> String {
    let cut = text.find("#[cfg(test)]\nmod tests {").unwrap_or(text.len());
    text[..cut]
        .lines()
        .map(|l| match l.find("//") {
            Some(k) => &l[..k],
            None => l,
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// `mod name;` declarations (any visibility, any attributes) in a file's code.
fn declared(code: &str) -> Vec<String> {
    code.lines()
        .filter_map(|l| {
            let l = l.trim();
            let l = l.strip_prefix("pub(crate) ").unwrap_or(l);
            let l = l.strip_prefix("pub(super) ").unwrap_or(l);
            let l = l.strip_prefix("pub ").unwrap_or(l);
            let name = l.strip_prefix("mod ")?.strip_suffix(';')?;
            Some(name.trim().to_string())
        })
        .collect()
}

/// Every module file of the crate rooted at `root` (lib.rs or main.rs).
fn modules(root: &Path) -> Vec<Module> {
    let mut out = Vec::new();
    let mut todo = vec![(Vec::<String>::new(), root.to_path_buf())];
    while let Some((path, file)) = todo.pop() {
        let text =
            std::fs::read_to_string(&file).unwrap_or_else(|e| panic!("{}: {e}", file.display()));
        let code = code_of(&text);
        let stem = file.file_stem().and_then(|s| s.to_str()).unwrap_or("");
        let dir = if path.is_empty() || stem == "mod" {
            file.parent().unwrap().to_path_buf()
        } else {
            file.parent().unwrap().join(stem)
        };
        for name in declared(&code) {
            let flat = dir.join(format!("{name}.rs"));
            let nested = dir.join(&name).join("mod.rs");
            let child = if flat.exists() { flat } else { nested };
            assert!(child.exists(), "{}: mod {name} has no file", file.display());
            let mut p = path.clone();
            p.push(name);
            todo.push((p, child));
        }
        out.push(Module { path, file, code });
    }
    out.sort_by(|a, b| a.path.cmp(&b.path));
    out
}

fn ident(s: &str) -> (&str, &str) {
    let n = s
        .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
        .unwrap_or(s.len());
    s.split_at(n)
}

/// The paths named after a `crate::` or `super::` prefix at the start of `s`: one path, or
/// one per item of a `{…}` group (nested groups included). Each is a list of segments.
fn paths_at(s: &str, prefix: Vec<String>, out: &mut Vec<Vec<String>>) {
    let mut segs = prefix;
    let mut rest = s;
    loop {
        let (id, after) = ident(rest);
        if id.is_empty() {
            if let Some(group) = rest.strip_prefix('{') {
                // Split the group at top-level commas.
                let mut depth = 0;
                let mut start = 0;
                for (k, c) in group.char_indices() {
                    match c {
                        '{' => depth += 1,
                        '}' if depth == 0 => {
                            paths_at(group[start..k].trim(), segs.clone(), out);
                            return;
                        }
                        '}' => depth -= 1,
                        ',' if depth == 0 => {
                            paths_at(group[start..k].trim(), segs.clone(), out);
                            start = k + 1;
                        }
                        _ => {}
                    }
                }
            }
            break;
        }
        if id != "self" {
            segs.push(id.to_string());
        }
        match after.strip_prefix("::") {
            Some(r) => rest = r.trim_start(),
            None => break,
        }
    }
    out.push(segs);
}

/// The modules `m` imports, as indices into `all`.
fn imports(m: &Module, all: &[Module]) -> BTreeSet<usize> {
    let known: BTreeMap<&[String], usize> = all
        .iter()
        .enumerate()
        .map(|(i, x)| (x.path.as_slice(), i))
        .collect();
    let mut found = Vec::new();
    let code = &m.code;
    for (k, _) in code.match_indices("crate::") {
        if code[..k].ends_with(|c: char| c.is_ascii_alphanumeric() || c == '_' || c == ':') {
            continue;
        }
        paths_at(&code[k + 7..], Vec::new(), &mut found);
    }
    for (k, _) in code.match_indices("super::") {
        if code[..k].ends_with(|c: char| c.is_ascii_alphanumeric() || c == '_' || c == ':') {
            continue;
        }
        let mut base = m.path.clone();
        base.pop();
        let mut rest = &code[k + 7..];
        while let Some(r) = rest.strip_prefix("super::") {
            base.pop();
            rest = r;
        }
        paths_at(rest, base, &mut found);
    }
    found
        .iter()
        .filter_map(|segs| {
            // The deepest module the path walks through.
            let mut n = 0;
            while n < segs.len() && known.contains_key(&segs[..n + 1]) {
                n += 1;
            }
            (n > 0).then(|| known[&segs[..n]])
        })
        .filter(|&t| all[t].path != m.path)
        .collect()
}

/// A cycle in `edges`, as the modules on it, if there is one.
fn cycle(edges: &[BTreeSet<usize>]) -> Option<Vec<usize>> {
    // 0 unvisited, 1 on the stack, 2 done.
    fn visit(
        v: usize,
        edges: &[BTreeSet<usize>],
        state: &mut [u8],
        stack: &mut Vec<usize>,
    ) -> Option<Vec<usize>> {
        state[v] = 1;
        stack.push(v);
        for &w in &edges[v] {
            if state[w] == 1 {
                let at = stack.iter().position(|&x| x == w).unwrap();
                return Some(stack[at..].to_vec());
            }
            if state[w] == 0
                && let Some(c) = visit(w, edges, state, stack)
            {
                return Some(c);
            }
        }
        stack.pop();
        state[v] = 2;
        None
    }
    let mut state = vec![0u8; edges.len()];
    (0..edges.len()).find_map(|v| {
        if state[v] == 0 {
            visit(v, edges, &mut state, &mut Vec::new())
        } else {
            None
        }
    })
}

fn name(m: &Module) -> String {
    if m.path.is_empty() {
        "crate".into()
    } else {
        m.path.join("::")
    }
}

/// The crate roots checked, relative to the workspace root.
const ROOTS: &[&str] = &[
    "shared-model/src/lib.rs",
    "firmware/src/lib.rs",
    "host-trainer/src/lib.rs",
];

#[test]
fn no_module_imports_one_that_imports_it_back() {
    for root in ROOTS {
        let all = modules(&crate::root().join(root));
        assert!(all.len() > 1, "{root}: no modules found");
        // The crate root is the facade that declares everything; an edge to it is a
        // re-export's use, not a layer.
        let edges: Vec<BTreeSet<usize>> = all
            .iter()
            .map(|m| {
                imports(m, &all)
                    .into_iter()
                    .filter(|&t| !all[t].path.is_empty())
                    .collect()
            })
            .collect();
        if let Some(c) = cycle(&edges) {
            let names: Vec<String> = c.iter().map(|&i| name(&all[i])).collect();
            panic!(
                "{root}: import circle {} -> {}",
                names.join(" -> "),
                names[0]
            );
        }
        // The same at the level of top-level modules (folders): a folder may not import a
        // folder that imports it back through any of their files.
        let tops: Vec<String> = all.iter().filter(|m| m.path.len() == 1).map(name).collect();
        let top_of = |m: &Module| {
            m.path
                .first()
                .and_then(|t| tops.iter().position(|x| x == t))
        };
        let mut top_edges = vec![BTreeSet::new(); tops.len()];
        for (m, es) in all.iter().zip(&edges) {
            for &t in es {
                if let (Some(a), Some(b)) = (top_of(m), top_of(&all[t]))
                    && a != b
                {
                    top_edges[a].insert(b);
                }
            }
        }
        if let Some(c) = cycle(&top_edges) {
            let names: Vec<&str> = c.iter().map(|&i| tops[i].as_str()).collect();
            panic!(
                "{root}: folder circle {} -> {}",
                names.join(" -> "),
                names[0]
            );
        }
    }
}

#[test]
fn host_trainer_folders_follow_the_data_flow() {
    // Lower layers may be imported by higher ones, never the other way round.
    let layers: &[&[&str]] = &[
        &["confidence", "digest", "error", "progress"],
        &["input", "output", "project"],
        &["ingest"],
        &["train"],
        &["release"],
        &["field"],
        &["report"],
        &["synth", "workflow"],
        &["demo"],
        // The command layer: flags, printing; main.rs and the Python package call it.
        &["cli"],
    ];
    let layer = |top: &str| layers.iter().position(|l| l.contains(&top));
    let all = modules(&crate::root().join("host-trainer/src/lib.rs"));
    for m in &all {
        let Some(from) = m.path.first() else { continue };
        let lf = layer(from).unwrap_or_else(|| panic!("{}: top-level module '{from}' has no place in the flow (add it to this test and DEVELOPERS.md)", m.file.display()));
        for t in imports(m, &all) {
            let Some(to) = all[t].path.first() else {
                continue;
            };
            let lt = layer(to).unwrap();
            assert!(
                lt <= lf,
                "{} imports {}: '{from}' sits below '{to}' in the data flow",
                name(m),
                name(&all[t])
            );
        }
    }
    // The steps have their folders.
    for dir in ["ingest", "train", "release", "field", "report", "workflow"] {
        assert!(
            all.iter().any(|m| m.path == [dir.to_string()]),
            "no module {dir}"
        );
    }
}

#[test]
fn the_checker_finds_a_planted_circle() {
    // The checker itself, on a crate written for the purpose: a -> b -> a through super.
    let dir = tempfile::tempdir().unwrap();
    let src = dir.path();
    std::fs::write(src.join("lib.rs"), "mod a;\nmod b;\n").unwrap();
    std::fs::write(
        src.join("a.rs"),
        "use crate::b::{self, Thing};\n// crate::c::Gone is a comment\n",
    )
    .unwrap();
    std::fs::write(
        src.join("b.rs"),
        "pub struct Thing;\nfn f() { super::a::g(); }\n",
    )
    .unwrap();
    let all = modules(&src.join("lib.rs"));
    let edges: Vec<BTreeSet<usize>> = all.iter().map(|m| imports(m, &all)).collect();
    let c = cycle(&edges).expect("the planted circle");
    let mut names: Vec<String> = c.iter().map(|&i| name(&all[i])).collect();
    names.sort();
    assert_eq!(names, ["a", "b"]);
    // Without b's call back there is none.
    std::fs::write(src.join("b.rs"), "pub struct Thing;\n").unwrap();
    let all = modules(&src.join("lib.rs"));
    let edges: Vec<BTreeSet<usize>> = all.iter().map(|m| imports(m, &all)).collect();
    assert!(cycle(&edges).is_none());
}
