//! The house rule of host-tool's source tree (stated in `src/lib.rs`): the
//! folders are stages, and a module uses only its own folder and the
//! stages before it; no two modules use each other, directly or around a
//! loop. Read from the `crate::` paths of every file's code (comments and
//! `#[cfg(test)]` modules left out: a test may check a stage with the tools
//! of a later one).

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// The stages in order; files in the same stage may use each other.
const STAGES: [&[&str]; 8] = [
    &["units", "par"],
    &["tank"],
    &["input"],
    &["model"],
    &["check"],
    &["generate"],
    &["analysis"],
    &["emit", "sim", "report"],
];

fn src() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

/// Every library source file (not the binary's, under `src/bin`) by module path
/// (`check::verify`, `generate`, `units`).
fn modules() -> BTreeMap<String, String> {
    fn walk(dir: &Path, prefix: &str, out: &mut BTreeMap<String, String>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            let name = p.file_stem().unwrap().to_str().unwrap().to_owned();
            if p.is_dir() && name == "bin" {
                // The binary: the last stage, using the library's API.
                continue;
            } else if p.is_dir() {
                walk(&p, &format!("{prefix}{name}::"), out);
            } else if p.extension().is_some_and(|x| x == "rs") {
                let module = match name.as_str() {
                    "mod" => prefix.trim_end_matches("::").to_owned(),
                    // A test module's file, as a `#[cfg(test)]` module.
                    "lib" | "main" | "tests" => continue,
                    _ => format!("{prefix}{name}"),
                };
                out.insert(module, std::fs::read_to_string(&p).unwrap());
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(&src(), "", &mut out);
    out
}

/// The code of a file: comments and `#[cfg(test)]` modules removed.
fn code(text: &str) -> String {
    let mut out = String::new();
    let mut lines = text.lines();
    while let Some(l) = lines.next() {
        let t = l.trim_start();
        if t.starts_with("#[cfg(test)]") {
            // Skip the item that follows, to its closing brace at the
            // same indentation.
            // (`mod tests;` is one line: its file is left out by name.)
            let indent = l.len() - t.len();
            for m in lines.by_ref() {
                let mt = m.trim_start();
                if mt.ends_with(';') && !mt.contains('{') && m.len() - mt.len() == indent {
                    break;
                }
                if m.len() - mt.len() == indent && mt.starts_with('}') {
                    break;
                }
            }
            continue;
        }
        if t.starts_with("//") {
            continue;
        }
        out.push_str(l.split("//").next().unwrap_or(""));
        out.push('\n');
    }
    out
}

/// The modules `text` uses, among `known` (the longest module path that
/// prefixes each `crate::` path).
fn uses(text: &str, known: &BTreeSet<String>) -> BTreeSet<String> {
    uses_from(text, known, "")
}

/// [`uses`] in module `module` (`a::b`): its `super::` paths and the paths
/// through its own child modules count as well.
fn uses_from(text: &str, known: &BTreeSet<String>, module: &str) -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    let code = code(text);
    // `crate::a::b::{c, d}` and `crate::a::b::C`: the path up to the first
    // segment that is not a module.
    let parent = module.rsplit_once("::").map_or("", |(p, _)| p);
    let mut paths = Vec::new();
    let word = |at: usize| -> String {
        code[at..]
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_' || *c == ':')
            .collect()
    };
    for (at, _) in code.match_indices("crate::") {
        paths.push(word(at + "crate::".len()));
    }
    for (at, _) in code.match_indices("super::") {
        let rest = word(at + "super::".len());
        paths.push(if parent.is_empty() {
            rest
        } else {
            format!("{parent}::{rest}")
        });
    }
    // `use child::...` in a folder's mod.rs.
    for line in code.lines() {
        let t = line.trim_start();
        for prefix in ["use ", "pub use "] {
            if let Some(rest) = t.strip_prefix(prefix) {
                let first: String = rest
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .collect();
                let child = format!("{module}::{first}");
                if !module.is_empty() && known.contains(&child) {
                    paths.push(format!("{child}{}", &rest[first.len()..]));
                }
            }
        }
    }
    for path in paths {
        let segs: Vec<&str> = path.split("::").filter(|s| !s.is_empty()).collect();
        for n in (1..=segs.len()).rev() {
            let m = segs[..n].join("::");
            if known.contains(&m) {
                out.insert(m);
                break;
            }
        }
    }
    out
}

fn stage(module: &str) -> usize {
    let top = module.split("::").next().unwrap();
    STAGES
        .iter()
        .position(|s| s.contains(&top))
        .unwrap_or_else(|| {
            panic!("module {module} is in no stage: add its folder to STAGES and to lib.rs's list")
        })
}

#[test]
fn the_folders_import_only_earlier_stages() {
    let mods = modules();
    let known: BTreeSet<String> = mods.keys().cloned().collect();
    let mut wrong = Vec::new();
    for (m, text) in &mods {
        for u in uses_from(text, &known, m) {
            if stage(&u) > stage(m) {
                wrong.push(format!("{m} uses the later stage {u}"));
            }
        }
    }
    println!("{} modules in {} stages", mods.len(), STAGES.len());
    assert!(wrong.is_empty(), "{wrong:#?}");
}

#[test]
fn no_module_uses_itself_around_a_loop() {
    let mods = modules();
    let known: BTreeSet<String> = mods.keys().cloned().collect();
    let graph: BTreeMap<String, BTreeSet<String>> = mods
        .iter()
        .map(|(m, t)| {
            let mut u = uses_from(t, &known, m);
            u.remove(m);
            (m.clone(), u)
        })
        .collect();
    // Depth-first search; a module met again on the current path closes a
    // loop.
    fn visit(
        m: &str,
        graph: &BTreeMap<String, BTreeSet<String>>,
        path: &mut Vec<String>,
        done: &mut BTreeSet<String>,
    ) -> Option<Vec<String>> {
        if let Some(i) = path.iter().position(|p| p == m) {
            let mut cycle = path[i..].to_vec();
            cycle.push(m.to_owned());
            return Some(cycle);
        }
        if done.contains(m) {
            return None;
        }
        path.push(m.to_owned());
        for n in graph.get(m).into_iter().flatten() {
            if let Some(c) = visit(n, graph, path, done) {
                return Some(c);
            }
        }
        path.pop();
        done.insert(m.to_owned());
        None
    }
    let mut done = BTreeSet::new();
    for m in graph.keys() {
        if let Some(cycle) = visit(m, &graph, &mut Vec::new(), &mut done) {
            panic!("modules in a loop: {}", cycle.join(" -> "));
        }
    }
    println!("{} modules, no loop", graph.len());
}

#[test]
fn the_rule_sees_a_later_stage_and_a_loop() {
    // The checker itself: a use of a later stage and a loop are found.
    let known: BTreeSet<String> = ["check::verify", "generate", "model::exact"]
        .iter()
        .map(|s| (*s).to_owned())
        .collect();
    let text = "use crate::generate::Generated;\n// crate::model::exact in a comment\n#[cfg(test)]\nmod tests {\n    use crate::model::exact::ExactModel;\n}\n";
    let u = uses(text, &known);
    assert_eq!(u, BTreeSet::from(["generate".to_owned()]));
    assert!(stage("generate") > stage("check::verify"));
    // Paths through `super::` and a folder's own children count.
    let known: BTreeSet<String> = ["generate", "generate::error", "generate::layouts"]
        .iter()
        .map(|s| (*s).to_owned())
        .collect();
    let u = uses_from(
        "use super::error::GenerateError;\n",
        &known,
        "generate::layouts",
    );
    assert_eq!(u, BTreeSet::from(["generate::error".to_owned()]));
    let u = uses_from("use layouts::{a, b};\n", &known, "generate");
    assert_eq!(u, BTreeSet::from(["generate::layouts".to_owned()]));
}
