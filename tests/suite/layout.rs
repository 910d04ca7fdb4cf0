//! The shape of `src/` (docs/ARCHITECTURE.md, "Rules the tests and review
//! hold to"): who may import whom, where `anyhow` may live, and that no two
//! files share a name. Read from the source text (code lines only, not
//! comments), so a change that breaks a rule fails here, not in review.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::util::root;

/// Every `.rs` file under `src/`, with its path relative to `src/`.
fn sources() -> Vec<(String, PathBuf)> {
    fn walk(dir: &Path, base: &Path, out: &mut Vec<(String, PathBuf)>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(&p, base, out);
            } else if p.extension().is_some_and(|x| x == "rs") {
                out.push((p.strip_prefix(base).unwrap().to_string_lossy().into_owned(), p));
            }
        }
    }
    let base = root().join("src");
    let mut out = Vec::new();
    walk(&base, &base, &mut out);
    out.sort();
    assert!(out.len() > 50, "the source tree: {} files", out.len());
    out
}

/// The code lines of a file (comment lines dropped).
fn code(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .filter(|l| !l.trim_start().starts_with("//"))
        .map(str::to_string)
        .collect()
}

/// Files outside `allowed` (path prefixes) whose code names `what`.
fn offenders(what: &str, allowed: &[&str]) -> Vec<String> {
    sources()
        .into_iter()
        .filter(|(rel, _)| !allowed.iter().any(|a| rel.starts_with(a)))
        .filter(|(_, p)| code(p).iter().any(|l| l.contains(what)))
        .map(|(rel, _)| rel)
        .collect()
}

const EDGE: &[&str] = &["cmd/", "cli.rs", "main.rs"];

#[test]
fn library_rooms_import_neither_the_command_edge_nor_the_screens() {
    assert_eq!(offenders("crate::cmd", EDGE), Vec::<String>::new(), "crate::cmd outside the command edge");
    assert_eq!(offenders("crate::cli", EDGE), Vec::<String>::new(), "crate::cli outside the command edge");
    assert_eq!(offenders("crate::ui", &["ui/", "cmd/"]), Vec::<String>::new(), "crate::ui outside ui/ and cmd/");
    assert_eq!(offenders("anyhow", EDGE), Vec::<String>::new(), "anyhow outside the command edge");
    // Screens only draw: the physics is the engine's.
    let screens_on_physics: Vec<String> =
        offenders("engine::physics", &[]).into_iter().filter(|f| f.starts_with("ui/")).collect();
    assert_eq!(screens_on_physics, Vec::<String>::new(), "a screen computes physics");
    let sources_on_stream: Vec<String> =
        offenders("crate::stream", &[]).into_iter().filter(|f| f.starts_with("sources/")).collect();
    assert_eq!(sources_on_stream, Vec::<String>::new(), "a source imports the stream");
}

#[test]
fn no_two_files_under_src_share_a_name() {
    let mut by_name: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for (rel, p) in sources() {
        let name = p.file_name().unwrap().to_string_lossy().into_owned();
        if name != "mod.rs" {
            by_name.entry(name).or_default().push(rel);
        }
    }
    let twice: Vec<_> = by_name.into_iter().filter(|(_, v)| v.len() > 1).collect();
    assert!(twice.is_empty(), "files that share a name: {twice:?}");
}
