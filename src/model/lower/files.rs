//! Reading the main file and, following `use`, every file it includes,
//! through a [`Sources`]; placing their statements in declaration order.
//!
//! Invariants: each file is read and parsed once (a file reached again,
//! by any path with the same [`FileIdentity`], is not read again); a file
//! reached again through the chain that is including it is a cycle error at
//! the `use` line; an included file's statements stand where its `use` is.

use super::*;
use crate::diagnostics::{Code, Diagnostic, FileId, Label, SourceMap, Span};
use crate::model::source::{Disk, FileIdentity, Overlay, Sources};
use crate::syntax::{self, StatementKind};
use std::collections::{HashMap, HashSet};
use std::path::{Path, PathBuf};

/// Reads, parses and lowers the file at `path` of `sources` and the files
/// it `use`s.
pub fn load_with(sources: &dyn Sources, path: &Path) -> Loaded {
    let mut map = SourceMap::new();
    match sources.read(path) {
        Ok(main) => {
            let id = map.add(main.shown, main.text);
            lower_from(sources, map, id, path)
        }
        Err(e) => {
            let d = e.locate(&mut map);
            Loaded {
                sources: map,
                model: None,
                diagnostics: vec![d],
            }
        }
    }
}

pub fn load_path(path: &Path) -> Loaded {
    load_with(&Disk, path)
}

pub fn load_str(text: &str, path: &Path) -> Loaded {
    let overlay = Overlay {
        base: &Disk,
        path: path.to_path_buf(),
        text: text.to_string(),
    };
    load_with(&overlay, path)
}

/// Every file of a model, parsed, and which file each `use` line named.
pub(super) struct Collected {
    /// In the order of their ids.
    pub trees: Vec<(FileId, syntax::File)>,
    /// (including file, start of the `use` statement) → the included file.
    pub includes: HashMap<(FileId, usize), FileId>,
}

/// Follows `use` lines depth first from the main file, already in `map`
/// at `main` and read from `main_path` of `sources`.
pub(super) fn collect_files(
    sources: &dyn Sources,
    map: &mut SourceMap,
    main: FileId,
    main_path: &Path,
    diags: &mut Vec<Diagnostic>,
) -> Collected {
    let mut walk = Walk {
        sources,
        map,
        paths: HashMap::new(),
        seen: HashMap::new(),
        stack: Vec::new(),
        collected: Collected {
            trees: Vec::new(),
            includes: HashMap::new(),
        },
        diags,
    };
    walk.seen.insert(sources.identity(main_path), main);
    walk.paths.insert(main, main_path.to_path_buf());
    walk.file(main);
    walk.collected
}

struct Walk<'a> {
    sources: &'a dyn Sources,
    map: &'a mut SourceMap,
    /// Each file's path in `sources` (what diagnostics show may differ).
    paths: HashMap<FileId, PathBuf>,
    /// Files read so far, by identity.
    seen: HashMap<FileIdentity, FileId>,
    /// The chain of files being included: identity and shown name.
    stack: Vec<(FileIdentity, PathBuf)>,
    collected: Collected,
    diags: &'a mut Vec<Diagnostic>,
}

impl Walk<'_> {
    /// Parses `file` and, depth first, every file it `use`s.
    fn file(&mut self, file: FileId) {
        let Some(src) = self.map.get(file) else {
            return;
        };
        let shown = src.path.clone();
        let path = self.paths[&file].clone();
        let tree = match syntax::parse(&src.text, file) {
            Ok(t) => t,
            Err(errs) => {
                self.diags.extend(errs);
                return;
            }
        };
        self.stack.push((self.sources.identity(&path), shown));
        // (path, span of the path, start of the statement) of each `use`.
        let mut uses: Vec<(String, Span, usize)> = Vec::new();
        for st in tree.statements() {
            if let StatementKind::Use { path, span } = &st.kind {
                uses.push((path.clone(), *span, st.span.start));
            }
        }
        self.collected.trees.push((file, tree));
        for (rel, span, start) in uses {
            if let Some(included) = self.include(&path, &rel, span) {
                self.collected.includes.insert((file, start), included);
            }
        }
        self.stack.pop();
    }

    /// The file a `use "rel"` line (at `span`, in the file at `path`)
    /// names, read and walked if it is new; `None` after an error.
    fn include(&mut self, path: &Path, rel: &str, span: Span) -> Option<FileId> {
        let included_here = |mut d: Diagnostic| {
            // Labelled at the `use` line: a model error (exit 1), unlike
            // an unreadable file named on the command line (exit 2).
            d.labels.push(Label {
                span,
                message: "included here".into(),
            });
            d
        };
        if rel.trim().is_empty() {
            self.diags.push(
                Diagnostic::error(Code::FileRead, "cannot include \"\": the path is empty")
                    .with_label(span, "no file named")
                    .with_help("write the path of a .mech file, relative to this file"),
            );
            return None;
        }
        let target = match self.sources.resolve(path, rel) {
            Ok(t) => t,
            Err(d) => {
                self.diags.push(included_here(d));
                return None;
            }
        };
        let identity = self.sources.identity(&target);
        if let Some(pos) = self.stack.iter().position(|(id, _)| *id == identity) {
            self.diags.push(
                Diagnostic::error(
                    Code::UseCycle,
                    format!("`use \"{rel}\"` makes a cycle: the file includes itself"),
                )
                .with_label(span, "this file is already being included")
                .with_help(format!(
                    "chain: {} → {}",
                    self.stack[pos..]
                        .iter()
                        .map(|(_, shown)| shown.display().to_string())
                        .collect::<Vec<_>>()
                        .join(" → "),
                    self.stack[pos].1.display()
                )),
            );
            return None;
        }
        if let Some(&file) = self.seen.get(&identity) {
            return Some(file); // already included through another path: declarations once
        }
        match self.sources.read(&target) {
            Ok(text) => {
                let id = self.map.add(text.shown, text.text);
                self.seen.insert(identity, id);
                self.paths.insert(id, target);
                self.file(id);
                Some(id)
            }
            Err(e) => {
                let mut d = included_here(e.locate(self.map));
                d.message = format!("cannot include \"{rel}\": {}", d.message);
                self.diags.push(d);
                None
            }
        }
    }
}

/// Appends `file`'s statements to `items`, with each file it `use`s placed
/// at its `use` statement; files already placed are skipped.
pub(super) fn place_statements<'t>(
    file: FileId,
    collected: &'t Collected,
    placed: &mut HashSet<FileId>,
    items: &mut Vec<Item<'t>>,
) {
    if !placed.insert(file) {
        return;
    }
    let Some(tree) = collected
        .trees
        .binary_search_by_key(&file, |(f, _)| *f)
        .ok()
        .map(|at| &collected.trees[at].1)
    else {
        return;
    };
    let units = file_units(Some(tree), &mut Vec::new()).units;
    for st in tree.statements() {
        if let StatementKind::Use { .. } = &st.kind
            && let Some(&used) = collected.includes.get(&(file, st.span.start))
        {
            place_statements(used, collected, placed, items);
        }
        items.push(Item {
            kind: &st.kind,
            span: st.span,
            units,
        });
    }
}
