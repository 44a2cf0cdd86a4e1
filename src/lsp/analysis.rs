//! One open document analysed: the compiler's own load (the diagnostics
//! `check` reports, and the model when there are no errors) and, for the
//! editor features, the syntax tree of the document and of every file it
//! `use`s, with an index of where each name is declared and referred to.
//!
//! Why two passes over the text: lowering stops at a syntax error and
//! keeps no positions of references, while hover, go-to and rename must
//! work on half-typed text. The index is built from a tolerant parse: a
//! line the grammar refuses is blanked (same byte length, so every span
//! still points into the editor's text) and the rest parsed again.
//!
//! Invariants: diagnostics come only from [`crate::model::load_with`], the
//! function `check` uses, so they are the same; spans of the index carry
//! the position of their file in [`Analysis::files`] as their `FileId`.

use super::document::LineIndex;
use crate::diagnostics::{Diagnostic, FileId, Span};
use crate::model::Loaded;
use crate::model::source::{
    Disk, FileIdentity, ReadError, SourceText, Sources, from_text, normalize,
};
use crate::model::units::{ConcUnit, TimeUnit, Units};
use crate::syntax::{self, AstExpr, ParamValue, RateAst, StatementKind, UnitKey};
use std::collections::{HashMap, HashSet};
use std::path::{Path, PathBuf};

/// How many times a refused line is blanked before the tolerant parse
/// gives up (a file of nothing but broken lines has no index).
const MAX_BLANKED_LINES: usize = 64;

/// The disk, with the text of every open buffer in place of its file: an
/// unsaved edit of a `use`d file is what its includers see.
pub struct OpenBuffers<'b> {
    pub buffers: &'b HashMap<PathBuf, String>,
}

impl OpenBuffers<'_> {
    fn buffer(&self, path: &Path) -> Option<&String> {
        if let Some(text) = self.buffers.get(path) {
            return Some(text);
        }
        let identity = Disk.identity(path);
        self.buffers
            .iter()
            .find(|(p, _)| Disk.identity(p) == identity)
            .map(|(_, t)| t)
    }
}

impl Sources for OpenBuffers<'_> {
    fn resolve(&self, including: &Path, relative: &str) -> Result<PathBuf, Diagnostic> {
        Disk.resolve(including, relative)
    }

    fn identity(&self, path: &Path) -> FileIdentity {
        Disk.identity(path)
    }

    fn read(&self, path: &Path) -> Result<SourceText, ReadError> {
        match self.buffer(path) {
            Some(text) => Ok(from_text(text, path)),
            None => Disk.read(path),
        }
    }
}

/// What a declared name is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    Mechanism,
    Species,
    Fixed,
    Param,
    Step,
    Total,
    Observable,
}

impl Kind {
    pub fn word(self) -> &'static str {
        match self {
            Kind::Mechanism => "mechanism",
            Kind::Species => "species",
            Kind::Fixed => "fixed species",
            Kind::Param => "param",
            Kind::Step => "step",
            Kind::Total => "total",
            Kind::Observable => "observable",
        }
    }
}

/// A declaration: the name's span and the statement it heads.
#[derive(Debug, Clone)]
pub struct Declaration {
    pub name: String,
    pub kind: Kind,
    pub span: Span,
    pub statement: usize,
}

/// A use of a name (not its declaration).
#[derive(Debug, Clone)]
pub struct Reference {
    pub name: String,
    pub span: Span,
}

/// One file of the document's model, parsed tolerantly.
pub struct ParsedFile {
    pub path: PathBuf,
    pub text: String,
    pub lines: LineIndex,
    pub tree: syntax::File,
    pub declarations: Vec<Declaration>,
    pub references: Vec<Reference>,
}

impl ParsedFile {
    pub fn statements(&self) -> Vec<&syntax::Statement> {
        self.tree.statements().collect()
    }
}

/// A document analysed: the compiler's load of it and, parsed when a
/// request first needs them, the files of its model (the document first).
/// Diagnostics need only the load, so publishing them after a change
/// never waits for the editor features' parse.
pub struct Analysis {
    pub loaded: Loaded,
    path: PathBuf,
    /// The open buffers when the load ran, so the later parse reads the
    /// same texts.
    buffers: HashMap<PathBuf, String>,
    parsed: std::cell::OnceCell<(Vec<ParsedFile>, Units)>,
}

impl Analysis {
    /// Loads the document at `path` with the open buffers over the disk.
    pub fn new(path: &Path, buffers: &HashMap<PathBuf, String>) -> Analysis {
        let loaded = crate::model::load_with(&OpenBuffers { buffers }, path);
        Analysis {
            loaded,
            path: path.to_path_buf(),
            buffers: buffers.clone(),
            parsed: std::cell::OnceCell::new(),
        }
    }

    /// The editor features' view of a file that is not open, without the
    /// load (its diagnostics are not shown): for references and rename.
    pub fn parsed_only(path: &Path, buffers: &HashMap<PathBuf, String>) -> Analysis {
        Analysis {
            loaded: Loaded {
                sources: crate::diagnostics::SourceMap::new(),
                model: None,
                diagnostics: Vec::new(),
            },
            path: path.to_path_buf(),
            buffers: buffers.clone(),
            parsed: std::cell::OnceCell::new(),
        }
    }

    fn parsed(&self) -> &(Vec<ParsedFile>, Units) {
        self.parsed.get_or_init(|| {
            let files = parse_closure(
                &OpenBuffers {
                    buffers: &self.buffers,
                },
                &self.path,
            );
            let units = files.first().map(|f| units_of(&f.tree)).unwrap_or_default();
            (files, units)
        })
    }

    /// The document's file and every file it `use`s, parsed tolerantly.
    pub fn files(&self) -> &[ParsedFile] {
        &self.parsed().0
    }

    /// The model's units, as the document's `units` line gives them.
    pub fn units(&self) -> Units {
        self.parsed().1
    }

    /// Whether the model reads the file at `path` (as the load read it, or
    /// as a `use` line of the parsed files names it).
    pub fn reads(&self, path: &Path) -> bool {
        self.loaded
            .sources
            .files()
            .iter()
            .any(|f| f.path == path || normalize(&f.path).is_some_and(|p| p == path))
            || self
                .parsed
                .get()
                .is_some_and(|(files, _)| files.iter().any(|f| f.path == path))
    }

    pub fn main(&self) -> Option<&ParsedFile> {
        self.files().first()
    }

    /// The declaration of `name` anywhere in the model.
    pub fn declaration(&self, name: &str) -> Option<&Declaration> {
        self.files()
            .iter()
            .flat_map(|f| &f.declarations)
            .find(|d| d.name == name && d.kind != Kind::Mechanism)
    }

    /// The name under a byte offset of file `file`: a declaration or a
    /// reference.
    pub fn name_at(&self, file: usize, offset: usize) -> Option<(&str, Span)> {
        let f = self.files().get(file)?;
        let inside = |s: &Span| s.start <= offset && offset <= s.end;
        f.declarations
            .iter()
            .filter(|d| d.kind != Kind::Mechanism)
            .map(|d| (d.name.as_str(), d.span))
            .chain(f.references.iter().map(|r| (r.name.as_str(), r.span)))
            .find(|(_, s)| inside(s))
    }

    /// Every span where `name` stands (declaration first when known).
    pub fn occurrences(&self, name: &str) -> Vec<Span> {
        let mut out: Vec<Span> = Vec::new();
        if let Some(d) = self.declaration(name) {
            out.push(d.span);
        }
        for f in self.files() {
            out.extend(
                f.references
                    .iter()
                    .filter(|r| r.name == name)
                    .map(|r| r.span),
            );
        }
        out
    }
}

/// The model's units as the main file's `units` line gives them.
fn units_of(tree: &syntax::File) -> Units {
    let mut units = Units::default();
    for statement in tree.statements() {
        if let StatementKind::Units(parts) = &statement.kind {
            for (key, word, _) in parts {
                match key {
                    UnitKey::Concentration => {
                        if let Some(u) = ConcUnit::parse(word) {
                            units.concentration = u;
                        }
                    }
                    UnitKey::Time => {
                        if let Some(u) = TimeUnit::parse(word) {
                            units.time = u;
                        }
                    }
                }
            }
        }
    }
    units
}

/// The document and, following `use`, every file it includes, each once.
fn parse_closure(sources: &dyn Sources, main: &Path) -> Vec<ParsedFile> {
    let mut files: Vec<ParsedFile> = Vec::new();
    let mut seen: HashSet<FileIdentity> = HashSet::new();
    let mut pending: Vec<PathBuf> = vec![main.to_path_buf()];
    while let Some(path) = pending.pop() {
        if !seen.insert(sources.identity(&path)) {
            continue;
        }
        let Ok(read) = sources.read(&path) else {
            continue;
        };
        let id = FileId(files.len() as u32);
        let file = parse_tolerantly(path.clone(), read.text, id);
        for statement in file.tree.statements() {
            if let StatementKind::Use { path: relative, .. } = &statement.kind
                && let Ok(next) = sources.resolve(&path, relative)
            {
                // Named as the editor names it (`a/../b.mech` is `b.mech`).
                pending.push(normalize(&next).unwrap_or(next));
            }
        }
        files.push(file);
    }
    files
}

/// Parses `text`, blanking each line the grammar refuses until the rest
/// parses, and indexes the names.
pub fn parse_tolerantly(path: PathBuf, text: String, id: FileId) -> ParsedFile {
    let mut working = text.clone();
    let mut tree = syntax::File::default();
    for _ in 0..=MAX_BLANKED_LINES {
        match syntax::parse(&working, id) {
            Ok(t) => {
                tree = t;
                break;
            }
            Err(diagnostics) => {
                let mut blanked = false;
                for d in &diagnostics {
                    if let Some(span) = d.primary_span() {
                        blanked |= blank_line_at(&mut working, span.start);
                    }
                }
                if !blanked {
                    break;
                }
            }
        }
    }
    let mut file = ParsedFile {
        path,
        lines: LineIndex::new(&text),
        text,
        tree,
        declarations: Vec::new(),
        references: Vec::new(),
    };
    index(&mut file);
    file
}

/// Replaces the line holding `offset` by spaces; false if it was blank.
fn blank_line_at(text: &mut String, offset: usize) -> bool {
    let offset = super::document::floor_boundary(text, offset);
    let bytes = text.as_bytes();
    let mut start = offset.min(bytes.len());
    while start > 0 && !matches!(bytes[start - 1], b'\n' | b'\r') {
        start -= 1;
    }
    let mut end = offset.min(bytes.len());
    while end < bytes.len() && !matches!(bytes[end], b'\n' | b'\r') {
        end += 1;
    }
    if text[start..end].trim().is_empty() {
        // A refusal at a line's end is about what that line left open.
        if start > 0 {
            return blank_line_at(text, start - 1);
        }
        return false;
    }
    let spaces = " ".repeat(end - start);
    text.replace_range(start..end, &spaces);
    true
}

fn index(file: &mut ParsedFile) {
    let mut declarations = Vec::new();
    let mut references = Vec::new();
    let mut refer = |ident: &syntax::Ident| {
        references.push(Reference {
            name: ident.name.clone(),
            span: ident.span,
        })
    };
    for (n, statement) in file.tree.statements().enumerate() {
        let mut declare = |ident: &syntax::Ident, kind: Kind| {
            declarations.push(Declaration {
                name: ident.name.clone(),
                kind,
                span: ident.span,
                statement: n,
            })
        };
        match &statement.kind {
            StatementKind::Mechanism { name, .. } => declare(name, Kind::Mechanism),
            StatementKind::Units(_) | StatementKind::Use { .. } => {}
            StatementKind::Species(list) => {
                for s in list {
                    declare(&s.name, Kind::Species);
                }
            }
            StatementKind::Fixed(s) => declare(&s.name, Kind::Fixed),
            StatementKind::Param { name, value, .. } => {
                declare(name, Kind::Param);
                match value {
                    ParamValue::Quantity(_) | ParamValue::AtTemperature { .. } => {}
                    ParamValue::Expr(e) => names_in(e, &mut refer),
                }
            }
            StatementKind::Step {
                name,
                lhs,
                rhs,
                rate,
                ..
            } => {
                declare(name, Kind::Step);
                for term in lhs.terms.iter().chain(&rhs.terms) {
                    refer(&term.name);
                }
                match rate {
                    RateAst::MassAction(constants) => {
                        for c in constants {
                            names_in(c, &mut refer);
                        }
                    }
                    RateAst::Law(e) => names_in(e, &mut refer),
                }
            }
            StatementKind::Total { name, terms, .. } => {
                declare(name, Kind::Total);
                for term in terms {
                    refer(&term.name);
                }
            }
            StatementKind::Observe { name, expr } => {
                declare(name, Kind::Observable);
                names_in(expr, &mut refer);
            }
            StatementKind::AssumeSteady(list) | StatementKind::AssumeEquilibrium(list) => {
                for ident in list {
                    refer(ident);
                }
            }
            StatementKind::Event { action, timing } => {
                match action {
                    syntax::ActionAst::Change { target, .. }
                    | syntax::ActionAst::Set { target, .. } => refer(target),
                    syntax::ActionAst::Stock { contents, .. } => {
                        for (_, name) in contents {
                            refer(name);
                        }
                    }
                    syntax::ActionAst::Withdraw { .. } => {}
                }
                if let syntax::TimingAst::When { lhs, rhs, .. } = timing {
                    for side in [lhs, rhs] {
                        if let syntax::ConditionSide::Expr(e) = side {
                            names_in(e, &mut refer);
                        }
                    }
                }
            }
            StatementKind::Volume(_) | StatementKind::Temperature(_) => {}
        }
    }
    file.declarations = declarations;
    file.references = references;
}

/// Every name an expression refers to (function names are not names).
pub fn names_in(e: &AstExpr, refer: &mut impl FnMut(&syntax::Ident)) {
    match e {
        AstExpr::Number(..) => {}
        AstExpr::Name(ident) => {
            // `t` and `pi` are the language's own.
            if !matches!(ident.name.as_str(), "t" | "pi") {
                refer(ident)
            }
        }
        AstExpr::Neg(inner, _) | AstExpr::Paren(inner, _) => names_in(inner, refer),
        AstExpr::Binary(_, a, b, _) => {
            names_in(a, refer);
            names_in(b, refer);
        }
        AstExpr::Call(_, args, _) => {
            for a in args {
                names_in(a, refer);
            }
        }
    }
}
