//! The library's top-level modules keep the layer order documented in
//! docs/architecture.md: every `crate::MODULE` path in a module's source
//! names a module of a lower layer, so no cycle between modules can come
//! back unnoticed; and no library module outside `output/` and `case/`
//! mentions `std::fs`.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The layers of docs/architecture.md, lowest first.
fn documented_layers() -> Vec<Vec<String>> {
    let path = root().join("docs/architecture.md");
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("reading {}: {e}", path.display()));
    let section = text
        .split("\n## ")
        .find(|s| s.starts_with("Layers"))
        .expect("docs/architecture.md has a `## Layers` section");
    let mut layers = Vec::new();
    for line in section.lines() {
        let Some((number, rest)) = line.split_once(". ") else {
            continue;
        };
        if number.is_empty() || !number.chars().all(|c| c.is_ascii_digit()) {
            continue;
        }
        assert_eq!(
            number.parse::<usize>().unwrap(),
            layers.len() + 1,
            "layers are numbered 1, 2, … in order: {line}"
        );
        let head = rest.split(':').next().unwrap_or("");
        let modules: Vec<String> = head
            .split('`')
            .skip(1)
            .step_by(2)
            .map(str::to_string)
            .collect();
        assert!(!modules.is_empty(), "no module named in layer line: {line}");
        layers.push(modules);
    }
    assert!(
        layers.len() >= 2,
        "too few layers read from {}",
        path.display()
    );
    layers
}

/// The top-level modules declared in src/lib.rs.
fn library_modules() -> BTreeSet<String> {
    let text = std::fs::read_to_string(root().join("src/lib.rs")).unwrap();
    text.lines()
        .filter_map(|l| l.trim().strip_prefix("pub mod "))
        .map(|l| l.trim_end_matches(';').trim().to_string())
        .collect()
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

/// Library source files by top-level module (lib.rs, main.rs and the
/// binary's cli/ are not library modules).
fn sources_by_module() -> BTreeMap<String, Vec<PathBuf>> {
    let src = root().join("src");
    let mut files = Vec::new();
    rust_files(&src, &mut files);
    let mut by = BTreeMap::<String, Vec<PathBuf>>::new();
    for f in files {
        let rel = f.strip_prefix(&src).unwrap();
        let first = rel.components().next().unwrap().as_os_str();
        let module = first.to_string_lossy().trim_end_matches(".rs").to_string();
        if matches!(module.as_str(), "lib" | "main" | "cli") {
            continue;
        }
        by.entry(module).or_default().push(f);
    }
    by
}

/// Source text without `//` comments (doc links may point anywhere).
fn code_of(text: &str) -> String {
    text.lines()
        .map(|l| l.split_once("//").map_or(l, |(code, _)| code))
        .collect::<Vec<_>>()
        .join("\n")
}

/// The first identifier of `s`.
fn ident(s: &str) -> String {
    s.trim_start()
        .chars()
        .take_while(|c| c.is_alphanumeric() || *c == '_')
        .collect()
}

/// Every top-level name a `crate::` path in `code` starts with, including
/// each item of `crate::{a, b::c}`.
fn crate_paths(code: &str) -> BTreeSet<String> {
    let mut names = BTreeSet::new();
    for (at, _) in code.match_indices("crate::") {
        let rest = &code[at + "crate::".len()..];
        if let Some(group) = rest.strip_prefix('{') {
            let mut depth = 0usize;
            let mut item = String::new();
            for c in group.chars() {
                match c {
                    '{' => {
                        depth += 1;
                        item.push(c);
                    }
                    '}' if depth == 0 => break,
                    '}' => {
                        depth -= 1;
                        item.push(c);
                    }
                    ',' if depth == 0 => {
                        names.insert(ident(&item));
                        item.clear();
                    }
                    c => item.push(c),
                }
            }
            names.insert(ident(&item));
        } else {
            names.insert(ident(rest));
        }
    }
    names.retain(|n| !n.is_empty());
    names
}

#[test]
fn modules_use_only_lower_layers() {
    let layers = documented_layers();
    let modules = library_modules();
    let mut layer_of = BTreeMap::new();
    for (i, layer) in layers.iter().enumerate() {
        for m in layer {
            assert!(
                layer_of.insert(m.clone(), i + 1).is_none(),
                "docs/architecture.md places `{m}` in two layers"
            );
        }
    }
    let documented: BTreeSet<String> = layer_of.keys().cloned().collect();
    assert_eq!(
        documented, modules,
        "the layers of docs/architecture.md must name exactly the top-level modules of src/lib.rs"
    );
    let mut wrong = Vec::new();
    for (module, files) in sources_by_module() {
        let own = *layer_of
            .get(&module)
            .unwrap_or_else(|| panic!("src/{module} is not a module declared in src/lib.rs"));
        for f in files {
            let code = code_of(&std::fs::read_to_string(&f).unwrap());
            for used in crate_paths(&code) {
                let Some(&theirs) = layer_of.get(&used) else {
                    continue; // a crate-root item such as C64
                };
                if used != module && theirs >= own {
                    wrong.push(format!(
                        "{} (layer {own}, `{module}`) uses `crate::{used}` (layer {theirs})",
                        f.strip_prefix(root()).unwrap().display()
                    ));
                }
            }
        }
    }
    assert!(
        wrong.is_empty(),
        "uses against the layer order of docs/architecture.md (a module may use only lower layers):\n{}",
        wrong.join("\n")
    );
}

#[test]
fn only_output_and_case_touch_files() {
    let mut wrong = Vec::new();
    for (module, files) in sources_by_module() {
        if module == "output" || module == "case" {
            continue;
        }
        for f in files {
            let text = std::fs::read_to_string(&f).unwrap();
            if text.contains("std::fs") {
                wrong.push(f.strip_prefix(root()).unwrap().display().to_string());
            }
        }
    }
    assert!(
        wrong.is_empty(),
        "file I/O outside output/ and case/ (move it to output/ or behind a trait output implements): {wrong:?}"
    );
}

#[test]
fn path_reader_sees_groups_and_plain_paths() {
    let code = "use crate::a::X;\nuse crate::{b::{Y, Z}, c, d::W};\nlet v = crate::e::f();";
    let found = crate_paths(code);
    let expected: BTreeSet<String> = ["a", "b", "c", "d", "e"].map(String::from).into();
    assert_eq!(found, expected);
    assert!(crate_paths(&code_of("// see crate::z")).is_empty());
}
