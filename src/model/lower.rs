//! Lowering: syntax trees of a main file and its `use`d files → one Model.
//!
//! Order of work: read and parse every file (following `use`, refusing
//! cycles), declare every name in one namespace, resolve and convert params
//! (in dependency order), steps, totals, observables, events and
//! assumptions, then lint. Errors are collected, not stopped at, so a user
//! sees every problem of a file at once.

use super::expr::{BinOp, Expr, Func};
use super::ir::*;
use super::load::Loaded;
use super::units::{ConcUnit, Dim, TimeUnit, UnitExpr, Units, parse_unit};
use crate::diagnostics::{Code, Diagnostic, FileId, SourceMap, Span, did_you_mean};
use crate::syntax::{
    self, AstBinOp, AstExpr, Ident, ParamValue, Quantity, RateAst, Side, StatementKind, StepTerm,
    UnitKey,
};
use num_traits::{CheckedAdd, CheckedDiv, CheckedSub, One, Signed, ToPrimitive, Zero};
use std::collections::{HashMap, HashSet};
use std::path::{Path, PathBuf};

pub fn load_path(path: &Path) -> Loaded {
    let mut sources = SourceMap::new();
    match read_source(path) {
        Ok(text) => {
            let id = sources.add(path.to_path_buf(), text);
            lower_from(sources, id)
        }
        Err(d) => {
            let d = locate_bad_bytes(d, path, &mut sources);
            Loaded {
                sources,
                model: None,
                diagnostics: vec![d],
            }
        }
    }
}

pub fn load_str(text: &str, path: &Path) -> Loaded {
    let mut sources = SourceMap::new();
    let text = text.strip_prefix('\u{FEFF}').unwrap_or(text).to_string();
    let id = sources.add(path.to_path_buf(), text);
    lower_from(sources, id)
}

/// Gives a not-UTF-8 error a label at the first bad byte: the file joins
/// the source map with invalid bytes shown as U+FFFD (the valid prefix, and
/// so the offset, is unchanged).
/// A file over the size limit gets a label at its start (only its first
/// line joins the source map).
fn locate_bad_bytes(d: Diagnostic, path: &Path, sources: &mut SourceMap) -> Diagnostic {
    if d.code == Code::InputTooLarge {
        let mut head = Vec::new();
        let Ok(file) = std::fs::File::open(path) else {
            return d;
        };
        if std::io::Read::read_to_end(&mut std::io::Read::take(file, 256), &mut head).is_err() {
            return d;
        }
        let head = String::from_utf8_lossy(&head);
        let first_line = head.lines().next().unwrap_or("").to_string();
        let id = sources.add(path.to_path_buf(), first_line);
        return d.with_label(Span::new(id, 0, 0), "file starts here");
    }
    if d.code != Code::NotUtf8 {
        return d;
    }
    let Ok(bytes) = std::fs::read(path) else {
        return d;
    };
    let Err(e) = std::str::from_utf8(&bytes) else {
        return d;
    };
    let at = e.valid_up_to();
    let id = sources.add(
        path.to_path_buf(),
        String::from_utf8_lossy(&bytes).into_owned(),
    );
    d.with_label(Span::new(id, at, at + '\u{FFFD}'.len_utf8()), "not UTF-8")
}

/// Opens a file for reading. Opening a named pipe waits until something
/// opens it for writing, which may be never: a pipe is opened without
/// waiting and then switched back to blocking reads, so a pipe with a
/// writer is read to its end and one without reads as empty at once.
fn open_without_waiting_for_a_writer(path: &Path) -> std::io::Result<std::fs::File> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::{FileTypeExt, OpenOptionsExt};
        use std::os::unix::io::AsRawFd;
        if std::fs::metadata(path).is_ok_and(|m| m.file_type().is_fifo()) {
            let file = std::fs::OpenOptions::new()
                .read(true)
                .custom_flags(libc::O_NONBLOCK)
                .open(path)?;
            // SAFETY: fcntl on a descriptor this function owns, with flags
            // read from it a moment before.
            let cleared = unsafe {
                let fd = file.as_raw_fd();
                let flags = libc::fcntl(fd, libc::F_GETFL);
                flags >= 0 && libc::fcntl(fd, libc::F_SETFL, flags & !libc::O_NONBLOCK) >= 0
            };
            if !cleared {
                return Err(std::io::Error::last_os_error());
            }
            return Ok(file);
        }
    }
    std::fs::File::open(path)
}

/// Reads a file as UTF-8 text, dropping a byte-order mark.
fn read_source(path: &Path) -> Result<String, Diagnostic> {
    let read_error = |e: std::io::Error| {
        Diagnostic::error(
            Code::FileRead,
            format!("cannot read {}: {e}", path.display()),
        )
        .with_path(path)
        .with_help("check the path and the file's permissions")
    };
    // Read at most one byte past the limit, so an endless source (a device
    // such as /dev/zero) ends in a size error instead of exhausting memory.
    let mut bytes = Vec::new();
    std::io::Read::read_to_end(
        &mut std::io::Read::take(
            open_without_waiting_for_a_writer(path).map_err(read_error)?,
            syntax::parse::MAX_FILE_BYTES as u64 + 1,
        ),
        &mut bytes,
    )
    .map_err(read_error)?;
    if bytes.len() > syntax::parse::MAX_FILE_BYTES {
        return Err(Diagnostic::error(
            Code::InputTooLarge,
            format!(
                "{} is larger than {} bytes, the limit",
                path.display(),
                syntax::parse::MAX_FILE_BYTES
            ),
        )
        .with_help("split the mechanism into several files joined with `use`"));
    }
    match String::from_utf8(bytes) {
        Ok(s) => Ok(s.strip_prefix('\u{FEFF}').map(str::to_string).unwrap_or(s)),
        Err(e) => {
            let at = e.utf8_error().valid_up_to();
            let before = &e.as_bytes()[..at];
            let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
            let col = at
                - before
                    .iter()
                    .rposition(|&b| b == b'\n')
                    .map(|p| p + 1)
                    .unwrap_or(0)
                + 1;
            let utf16 =
                e.as_bytes().starts_with(&[0xFF, 0xFE]) || e.as_bytes().starts_with(&[0xFE, 0xFF]);
            Err(Diagnostic::error(
                Code::NotUtf8,
                format!(
                    "{} is not UTF-8 text: invalid byte at line {line}, column {col} (byte {at})",
                    path.display()
                ),
            )
            .with_help(if utf16 {
                "the file starts with a UTF-16 byte-order mark: save it as UTF-8"
            } else {
                "save the file as UTF-8"
            }))
        }
    }
}

struct FileUnits {
    units: Units,
}

/// A statement with the units of the file it came from.
struct Item<'a> {
    kind: &'a StatementKind,
    span: Span,
    units: Units,
}

fn lower_from(mut sources: SourceMap, main: FileId) -> Loaded {
    let mut diags = Vec::new();
    let mut trees: Vec<(FileId, syntax::File)> = Vec::new();
    let mut stack = Vec::new();
    collect_files(&mut sources, main, &mut stack, &mut trees, &mut diags);
    if diags.iter().any(Diagnostic::is_error) {
        return Loaded {
            sources,
            model: None,
            diagnostics: diags,
        };
    }
    let main_units = file_units(
        trees.iter().find(|(f, _)| *f == main).map(|(_, t)| t),
        &mut diags,
    )
    .units;
    // Statements in declaration order: a used file's statements stand where
    // its `use` is (so its species come there in the CSV columns), each
    // file once.
    let mut items = Vec::new();
    let mut placed: Vec<FileId> = Vec::new();
    place_statements(main, &trees, &sources, &mut placed, &mut items);
    for (file, _) in &trees {
        // Files not reached from the main file's `use` lines (none today),
        // so that no statement is ever dropped.
        place_statements(*file, &trees, &sources, &mut placed, &mut items);
    }
    let mut lowerer = Lowerer::new(main_units, &sources);
    lowerer.lower(&items, main);
    diags.extend(lowerer.diags);
    let model = if diags.iter().any(Diagnostic::is_error) {
        None
    } else {
        Some(lowerer.model)
    };
    Loaded {
        sources,
        model,
        diagnostics: diags,
    }
}

/// Appends `file`'s statements to `items`, with each file it `use`s placed
/// at its `use` statement; files already placed are skipped.
fn place_statements<'t>(
    file: FileId,
    trees: &'t [(FileId, syntax::File)],
    sources: &SourceMap,
    placed: &mut Vec<FileId>,
    items: &mut Vec<Item<'t>>,
) {
    if placed.contains(&file) {
        return;
    }
    placed.push(file);
    let Some((_, tree)) = trees.iter().find(|(f, _)| *f == file) else {
        return;
    };
    let units = file_units(Some(tree), &mut Vec::new()).units;
    let base = sources
        .get(file)
        .and_then(|s| s.path.parent().map(Path::to_path_buf))
        .unwrap_or_default();
    for st in tree.statements() {
        if let StatementKind::Use { path, .. } = &st.kind {
            let target = base.join(path);
            let canonical = target.canonicalize().unwrap_or(target);
            let used = trees.iter().map(|(f, _)| *f).find(|f| {
                sources
                    .get(*f)
                    .map(|s| s.path.canonicalize().unwrap_or_else(|_| s.path.clone()))
                    == Some(canonical.clone())
            });
            if let Some(used) = used {
                place_statements(used, trees, sources, placed, items);
            }
        }
        items.push(Item {
            kind: &st.kind,
            span: st.span,
            units,
        });
    }
}

/// Parses `file` and, depth first, every file it `use`s. `trees` gets each
/// file once; a file reached again through the current chain is a cycle.
fn collect_files(
    sources: &mut SourceMap,
    file: FileId,
    stack: &mut Vec<(PathBuf, PathBuf)>,
    trees: &mut Vec<(FileId, syntax::File)>,
    diags: &mut Vec<Diagnostic>,
) {
    let Some(src) = sources.get(file) else { return };
    let path = src.path.clone();
    let canonical = path.canonicalize().unwrap_or_else(|_| path.clone());
    let tree = match syntax::parse(&src.text, file) {
        Ok(t) => t,
        Err(errs) => {
            diags.extend(errs);
            return;
        }
    };
    stack.push((canonical, path.clone()));
    let uses: Vec<(String, Span)> = tree
        .statements()
        .filter_map(|s| match &s.kind {
            StatementKind::Use { path, span } => Some((path.clone(), *span)),
            _ => None,
        })
        .collect();
    trees.push((file, tree));
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    for (rel, span) in uses {
        if rel.trim().is_empty() {
            diags.push(
                Diagnostic::error(Code::FileRead, "cannot include \"\": the path is empty")
                    .with_label(span, "no file named")
                    .with_help("write the path of a .mech file, relative to this file"),
            );
            continue;
        }
        let target = base.join(&rel);
        let canonical = target.canonicalize().unwrap_or_else(|_| target.clone());
        if let Some(pos) = stack.iter().position(|(c, _)| *c == canonical) {
            diags.push(
                Diagnostic::error(
                    Code::UseCycle,
                    format!("`use \"{rel}\"` makes a cycle: the file includes itself"),
                )
                .with_label(span, "this file is already being included")
                .with_help(format!(
                    "chain: {} → {}",
                    stack[pos..]
                        .iter()
                        .map(|(_, shown)| shown.display().to_string())
                        .collect::<Vec<_>>()
                        .join(" → "),
                    stack[pos].1.display()
                )),
            );
            continue;
        }
        if trees.iter().any(|(f, _)| {
            sources
                .get(*f)
                .map(|s| s.path.canonicalize().unwrap_or_else(|_| s.path.clone()))
                == Some(canonical.clone())
        }) {
            continue; // already included through another path: declarations once
        }
        match read_source(&target) {
            Ok(text) => {
                let id = sources.add(target, text);
                collect_files(sources, id, stack, trees, diags);
            }
            Err(d) => {
                let mut d = locate_bad_bytes(d, &target, sources);
                // Labelled at the `use` line: a model error (exit 1), unlike
                // an unreadable file named on the command line (exit 2).
                d.labels.push(crate::diagnostics::Label {
                    span,
                    message: "included here".into(),
                });
                d.message = format!("cannot include \"{rel}\": {}", d.message);
                diags.push(d);
            }
        }
    }
    stack.pop();
}

fn file_units(tree: Option<&syntax::File>, diags: &mut Vec<Diagnostic>) -> FileUnits {
    let mut units = Units::default();
    let Some(tree) = tree else {
        return FileUnits { units };
    };
    let mut seen = false;
    for st in tree.statements() {
        if let StatementKind::Units(settings) = &st.kind {
            if seen {
                diags.push(
                    Diagnostic::error(Code::DuplicateStatement, "`units` is given more than once")
                        .with_label(st.span, "second `units`")
                        .with_help("give each default unit once, in one `units` line"),
                );
            }
            seen = true;
            let mut given: Vec<&UnitKey> = Vec::new();
            for (key, text, span) in settings {
                if given.contains(&key) {
                    let what = match key {
                        UnitKey::Concentration => "concentration",
                        UnitKey::Time => "time",
                    };
                    diags.push(
                        Diagnostic::error(
                            Code::DuplicateStatement,
                            format!("the {what} unit is given twice in one `units` line"),
                        )
                        .with_label(*span, "given again")
                        .with_help("give each default unit once"),
                    );
                }
                given.push(key);
                match key {
                    UnitKey::Concentration => match ConcUnit::parse(text) {
                        Some(u) => units.concentration = u,
                        None => diags.push(unknown_unit(
                            text,
                            *span,
                            "a concentration unit",
                            &["M", "mM", "uM", "nM", "pM"],
                        )),
                    },
                    UnitKey::Time => match TimeUnit::parse(text) {
                        Some(u) => units.time = u,
                        None => diags.push(unknown_unit(
                            text,
                            *span,
                            "a time unit",
                            &["s", "ms", "min", "h"],
                        )),
                    },
                }
            }
        }
    }
    FileUnits { units }
}

fn unknown_unit(text: &str, span: Span, what: &str, choices: &[&str]) -> Diagnostic {
    let hint = did_you_mean(text, choices.iter().copied())
        .map(|c| format!("did you mean `{c}`? "))
        .unwrap_or_default();
    Diagnostic::error(Code::UnknownUnit, format!("`{text}` is not {what}"))
        .with_label(span, "unknown unit")
        .with_help(format!("{hint}{what} is one of: {}", choices.join(", ")))
}

const RESERVED: [&str; 2] = ["t", "pi"];

/// What a declared name is, with where it was declared.
#[derive(Clone, Copy)]
enum Decl {
    Sym(Sym),
    Step(usize),
}

struct Lowerer<'s> {
    model: Model,
    names: HashMap<String, (Decl, Span)>,
    diags: Vec<Diagnostic>,
    /// Per param: its AST value and file units, for resolution in order.
    param_sources: Vec<(ParamValue, Units)>,
    used: HashSet<Sym>,
    /// Species whose written initial value was refused: their value is a
    /// placeholder 0, so lints about starting at 0 would be follow-ons.
    initial_refused: HashSet<usize>,
    sources: &'s SourceMap,
    /// Name comparisons left for "did you mean" suggestions. Each unknown
    /// name is compared with every declared one, so without a bound a file
    /// with thousands of unknown names took quadratic time (8,000: 49 s).
    suggestion_budget: usize,
}

const SUGGESTION_COMPARISONS: usize = 2_000_000;

impl<'s> Lowerer<'s> {
    fn new(units: Units, sources: &'s SourceMap) -> Self {
        Lowerer {
            model: Model {
                units,
                ..Model::default()
            },
            names: HashMap::new(),
            diags: Vec::new(),
            param_sources: Vec::new(),
            used: HashSet::new(),
            initial_refused: HashSet::new(),
            sources,
            suggestion_budget: SUGGESTION_COMPARISONS,
        }
    }

    fn error(&mut self, d: Diagnostic) {
        self.diags.push(d);
    }

    fn declare(&mut self, ident: &Ident, decl: Decl) -> bool {
        if RESERVED.contains(&ident.name.as_str()) {
            self.error(
                Diagnostic::error(
                    Code::ReservedName,
                    format!("`{}` is a reserved name", ident.name),
                )
                .with_label(ident.span, "reserved")
                .with_help(
                    "`t` is time and `pi` is the constant π in expressions; choose another name",
                ),
            );
            return false;
        }
        // The words that end a step's sides cannot name what a step lists.
        if matches!(ident.name.as_str(), "with" | "law") {
            self.error(
                Diagnostic::error(
                    Code::ReservedName,
                    format!("`{}` cannot be a name", ident.name),
                )
                .with_label(ident.span, "a word of the step statement")
                .with_help("`with` and `law` start a step's rate, so a step could not list this name; choose another"),
            );
            return false;
        }
        if let Some((_, first)) = self.names.get(&ident.name) {
            let first = *first;
            self.error(
                Diagnostic::error(Code::DuplicateName, format!("`{}` is declared more than once", ident.name))
                    .with_label(ident.span, "declared again here")
                    .with_label(first, "first declared here")
                    .with_help("every species, fixed species, param, step, total and observable needs its own name"),
            );
            return false;
        }
        self.names.insert(ident.name.clone(), (decl, ident.span));
        true
    }

    fn lower(&mut self, items: &[Item], main: FileId) {
        self.declare_all(items, main);
        self.resolve_params();
        for item in items {
            match item.kind {
                StatementKind::Step { .. } => self.lower_step(item),
                StatementKind::Observe { .. } => self.lower_observable(item),
                _ => {}
            }
        }
        self.check_observable_cycles();
        for item in items {
            match item.kind {
                StatementKind::Total { .. } => self.lower_total(item),
                StatementKind::Event { .. } | StatementKind::Set { .. } => self.lower_event(item),
                StatementKind::AssumeSteady(_) | StatementKind::AssumeEquilibrium(_) => {
                    self.lower_assumption(item)
                }
                _ => {}
            }
        }
        // With errors, the lints would mostly describe their consequences
        // (an unknown name leaves a step empty, a param unused): they wait
        // until the errors are fixed.
        if !self.diags.iter().any(Diagnostic::is_error) {
            self.apply_total_values();
            self.lint();
        }
    }

    /// First pass: every name, with values that need no other names.
    fn declare_all(&mut self, items: &[Item], main: FileId) {
        let mut mechanism_seen: Option<Span> = None;
        for item in items {
            match item.kind {
                StatementKind::Mechanism { name, description } => {
                    if item.span.file != main {
                        continue; // an included file's name does not rename the model
                    }
                    if let Some(first) = mechanism_seen {
                        self.error(
                            Diagnostic::error(
                                Code::DuplicateStatement,
                                "`mechanism` is given more than once",
                            )
                            .with_label(item.span, "second name")
                            .with_label(first, "first name")
                            .with_help("a file names its mechanism at most once"),
                        );
                    }
                    mechanism_seen = Some(item.span);
                    self.model.name = Some(name.name.clone());
                    self.model.description = description.clone();
                }
                StatementKind::Species(decls) => {
                    for d in decls {
                        let idx = self.model.species.len();
                        if !self.declare(&d.name, Decl::Sym(Sym::Species(idx))) {
                            continue;
                        }
                        let (initial, given) = match &d.value {
                            Some(q) => {
                                let value = self.concentration(q, item.units, "an initial value");
                                if value.is_none() {
                                    self.initial_refused.insert(idx);
                                }
                                (value.unwrap_or(0.0), true)
                            }
                            None => (0.0, false),
                        };
                        if initial < 0.0 {
                            self.negative_value(
                                &d.name,
                                d.value.as_ref().map(|q| q.span).unwrap_or(d.name.span),
                            );
                        }
                        let span = d
                            .value
                            .as_ref()
                            .map(|q| d.name.span.join(q.span))
                            .unwrap_or(d.name.span);
                        let span = if decls.len() == 1 { item.span } else { span };
                        self.model.species.push(Species {
                            name: d.name.name.clone(),
                            initial,
                            initial_given: given,
                            description: d.description.clone(),
                            span,
                        });
                    }
                }
                StatementKind::Fixed(d) => {
                    let idx = self.model.fixed.len();
                    if !self.declare(&d.name, Decl::Sym(Sym::Fixed(idx))) {
                        continue;
                    }
                    let value = d
                        .value
                        .as_ref()
                        .and_then(|q| self.concentration(q, item.units, "a fixed concentration"))
                        .unwrap_or(0.0);
                    if value < 0.0 {
                        self.negative_value(
                            &d.name,
                            d.value.as_ref().map(|q| q.span).unwrap_or(d.name.span),
                        );
                    }
                    self.model.fixed.push(Fixed {
                        name: d.name.name.clone(),
                        value,
                        description: d.description.clone(),
                        span: item.span,
                    });
                }
                StatementKind::Param {
                    name,
                    value,
                    description,
                } => {
                    let idx = self.model.params.len();
                    if !self.declare(name, Decl::Sym(Sym::Param(idx))) {
                        continue;
                    }
                    self.model.params.push(Param {
                        name: name.name.clone(),
                        definition: ParamDef::Value(0.0),
                        value: 0.0,
                        dim: None,
                        description: description.clone(),
                        span: item.span,
                    });
                    self.param_sources.push((value.clone(), item.units));
                }
                StatementKind::Step { name, .. } => {
                    let idx = self.model.steps.len();
                    if self.declare(name, Decl::Step(idx)) {
                        // Placeholder entry keeps indices aligned; filled by lower_step.
                        self.model.steps.push(Step {
                            name: name.name.clone(),
                            reactants: vec![],
                            products: vec![],
                            reversible: false,
                            rate: Rate::Law(Expr::Number(0.0)),
                            description: None,
                            span: item.span,
                            rate_span: item.span,
                        });
                    }
                }
                StatementKind::Total { name, .. } => {
                    let idx = self.model.totals.len();
                    if self.declare(name, Decl::Sym(Sym::Total(idx))) {
                        self.model.totals.push(Total {
                            name: name.name.clone(),
                            terms: vec![],
                            value: 0.0,
                            value_given: false,
                            span: item.span,
                        });
                    }
                }
                StatementKind::Observe { name, .. } => {
                    let idx = self.model.observables.len();
                    if self.declare(name, Decl::Sym(Sym::Observable(idx))) {
                        self.model.observables.push(Observable {
                            name: name.name.clone(),
                            expr: Expr::Number(0.0),
                            span: item.span,
                        });
                    }
                }
                _ => {}
            }
        }
    }

    fn negative_value(&mut self, name: &Ident, span: Span) {
        self.error(
            Diagnostic::error(Code::NegativeInitial, format!("`{}` cannot start at a negative concentration", name.name))
                .with_label(span, "negative value")
                .with_help("concentrations are zero or positive; to take material away during a run use `remove ... at TIME`"),
        );
    }

    /// A number as written, checked finite.
    fn number(&mut self, text: &str, span: Span) -> Option<f64> {
        // A mantissa with a non-zero digit that parses to 0 has underflowed
        // (`1e-400`): silently zero would change the model.
        let mantissa = text.split(['e', 'E']).next().unwrap_or(text);
        let nonzero = mantissa.chars().any(|c| c.is_ascii_digit() && c != '0');
        match text.parse::<f64>() {
            Ok(v) if v == 0.0 && nonzero => {
                self.error(
                    Diagnostic::error(Code::BadNumber, format!("`{text}` is too small to represent: it would be 0"))
                        .with_label(span, "underflows")
                        .with_help("numbers other than 0 must be at least about 5e-324 in size; write 0 if zero is meant"),
                );
                None
            }
            Ok(v) if v.is_finite() => Some(v),
            _ => {
                self.error(
                    Diagnostic::error(Code::BadNumber, format!("`{text}` is not a finite number"))
                        .with_label(span, "out of range")
                        .with_help("numbers must lie within about ±1.8e308"),
                );
                None
            }
        }
    }

    /// A quantity converted to default units, with its unit's dimension (if a unit was written).
    fn quantity(&mut self, q: &Quantity, file_units: Units) -> Option<(f64, Option<Dim>)> {
        let value = self.number(&q.number, q.number_span)?;
        // Numbers without a unit are in the writing file's default units; the
        // conversion to the model's units depends on the dimension, known
        // only from context, so callers convert them (see `in_model_units`).
        match &q.unit {
            None => Some((value, None)),
            Some((text, span)) => match parse_unit(text) {
                Ok(u) => {
                    let v = u.convert(value, self.model.units);
                    if !v.is_finite() {
                        self.error(
                            Diagnostic::error(
                                Code::BadNumber,
                                "value overflows after unit conversion",
                            )
                            .with_label(q.span, "too large"),
                        );
                        return None;
                    }
                    Some((v, Some(u.dim())))
                }
                Err(msg) => {
                    let word = text
                        .trim_start_matches(['1', '/'])
                        .split(['/', '*', '^', '·'])
                        .next()
                        .unwrap_or(text);
                    let all = ["M", "mM", "uM", "nM", "pM", "s", "ms", "min", "h"];
                    let hint = did_you_mean(word, all)
                        .map(|c| format!("did you mean `{c}`? "))
                        .unwrap_or_default();
                    let _ = file_units;
                    self.error(Diagnostic::error(Code::UnknownUnit, msg).with_label(*span, "not a unit").with_help(format!(
                        "{hint}units are products of concentration (M, mM, uM, nM, pM) and time (s, ms, min, h) powers, e.g. `/uM/s`"
                    )));
                    None
                }
            },
        }
    }

    /// Converts a unitless number written in `file_units` for a quantity of
    /// dimension `dim` to the model's units.
    fn in_model_units(&self, value: f64, dim: Dim, file_units: Units) -> f64 {
        let u = UnitExpr {
            conc: Some((file_units.concentration, dim.conc)),
            time: Some((file_units.time, dim.time)),
        };
        u.convert(value, self.model.units)
    }

    fn concentration(&mut self, q: &Quantity, file_units: Units, what: &str) -> Option<f64> {
        self.quantity_of(q, file_units, Dim::CONC, what)
    }

    fn time(&mut self, q: &Quantity, file_units: Units) -> Option<f64> {
        self.quantity_of(q, file_units, Dim::TIME, "a time")
    }

    fn quantity_of(
        &mut self,
        q: &Quantity,
        file_units: Units,
        dim: Dim,
        what: &str,
    ) -> Option<f64> {
        let (v, d) = self.quantity(q, file_units)?;
        match d {
            None => Some(self.in_model_units(v, dim, file_units)),
            Some(d) if d == dim => Some(v),
            Some(d) => {
                let units = self.model.units;
                self.error(
                    Diagnostic::error(
                        Code::DimensionMismatch,
                        format!(
                            "{what} needs a unit of dimension {}, but `{}` has dimension {}",
                            dim.display_in(units),
                            q.unit.as_ref().map(|u| u.0.as_str()).unwrap_or(""),
                            d.display_in(units)
                        ),
                    )
                    .with_label(q.span, "wrong dimension")
                    .with_help(format!(
                        "write it in {} (or leave the unit out to use the default)",
                        dim.display_in(units)
                    )),
                );
                None
            }
        }
    }

    fn lookup(&self, name: &str) -> Option<Decl> {
        self.names.get(name).map(|(d, _)| *d)
    }

    fn unknown_name(&mut self, ident: &Ident, what: &str) {
        let hint = if self.suggestion_budget >= self.names.len() {
            self.suggestion_budget -= self.names.len();
            // A name whose length differs by more than the distance limit
            // of `did_you_mean` cannot be suggested: skip it cheaply.
            let len = ident.name.chars().count();
            let limit = (len / 3).max(1);
            did_you_mean(
                &ident.name,
                self.names
                    .keys()
                    .map(String::as_str)
                    .filter(|c| c.chars().count().abs_diff(len) <= limit),
            )
            .map(str::to_string)
        } else {
            None
        };
        let mut d = Diagnostic::error(Code::UnknownName, format!("unknown name `{}`", ident.name))
            .with_label(ident.span, format!("not declared as {what}"));
        d = match hint {
            Some(h) => d.with_help(format!("did you mean `{h}`?")),
            None if ConcUnit::parse(&ident.name).is_some() || TimeUnit::parse(&ident.name).is_some() => {
                d.with_help(format!("units appear only right after a number (e.g. `2 /{}`), never inside expressions", ident.name))
            }
            None => d.with_help(format!("declare it, e.g. `param {} = ...` or `species {}`", ident.name, ident.name)),
        };
        self.error(d);
    }

    /// Resolves an expression. `allowed` filters which kinds may appear.
    fn resolve(
        &mut self,
        e: &AstExpr,
        allowed: &dyn Fn(Sym) -> bool,
        context: &str,
    ) -> Option<Expr> {
        Some(match e {
            AstExpr::Number(text, span) => Expr::Number(self.number(text, *span)?),
            AstExpr::Paren(inner, _) => self.resolve(inner, allowed, context)?,
            AstExpr::Neg(inner, _) => Expr::Neg(Box::new(self.resolve(inner, allowed, context)?)),
            AstExpr::Binary(op, a, b, _) => {
                let a = self.resolve(a, allowed, context);
                let b = self.resolve(b, allowed, context);
                let op = match op {
                    AstBinOp::Add => BinOp::Add,
                    AstBinOp::Sub => BinOp::Sub,
                    AstBinOp::Mul => BinOp::Mul,
                    AstBinOp::Div => BinOp::Div,
                    AstBinOp::Pow => BinOp::Pow,
                };
                Expr::bin(op, a?, b?)
            }
            AstExpr::Call(name, args, span) => {
                let resolved: Vec<Option<Expr>> = args
                    .iter()
                    .map(|a| self.resolve(a, allowed, context))
                    .collect();
                let Some(func) = Func::from_name(&name.name) else {
                    let all = ["exp", "ln", "log10", "sqrt", "abs", "min", "max", "pow"];
                    let hint = did_you_mean(&name.name, all)
                        .map(|c| format!("did you mean `{c}`? "))
                        .unwrap_or_default();
                    self.error(
                        Diagnostic::error(
                            Code::UnknownFunction,
                            format!("unknown function `{}`", name.name),
                        )
                        .with_label(name.span, "not a function")
                        .with_help(format!("{hint}the functions are {}", all.join(", "))),
                    );
                    return None;
                };
                if args.len() != func.arity() {
                    self.error(
                        Diagnostic::error(
                            Code::WrongArity,
                            format!(
                                "`{}` takes {} argument(s), not {}",
                                func.name(),
                                func.arity(),
                                args.len()
                            ),
                        )
                        .with_label(*span, "here")
                        .with_help(format!(
                            "write `{}({})`",
                            func.name(),
                            if func.arity() == 1 { "x" } else { "x, y" }
                        )),
                    );
                    return None;
                }
                Expr::Call(func, resolved.into_iter().collect::<Option<Vec<_>>>()?)
            }
            AstExpr::Name(ident) => match ident.name.as_str() {
                "t" => Expr::Time,
                "pi" => Expr::Number(std::f64::consts::PI),
                name => match self.lookup(name) {
                    Some(Decl::Sym(sym)) if allowed(sym) => {
                        self.used.insert(sym);
                        Expr::Name(sym)
                    }
                    Some(Decl::Sym(sym)) => {
                        self.error(
                            Diagnostic::error(
                                Code::WrongKind,
                                format!(
                                    "`{name}` is {} and cannot appear in {context}",
                                    kind_word(sym)
                                ),
                            )
                            .with_label(ident.span, "not allowed here")
                            .with_help(context_help(context)),
                        );
                        return None;
                    }
                    Some(Decl::Step(_)) => {
                        self.error(Diagnostic::error(Code::WrongKind, format!("`{name}` is a step, not a value")).with_label(ident.span, "a step name").with_help("expressions use species, fixed species, params, totals and observables"));
                        return None;
                    }
                    None => {
                        self.unknown_name(ident, "anything");
                        return None;
                    }
                },
            },
        })
    }

    fn resolve_params(&mut self) {
        let n = self.model.params.len();
        let mut exprs: Vec<Option<Expr>> = vec![None; n];
        let sources = std::mem::take(&mut self.param_sources);
        for (i, (value, units)) in sources.iter().enumerate() {
            match value {
                ParamValue::Quantity(q) => {
                    self.check_quantity_ambiguity(q);
                    if let Some((v, dim)) = self.quantity(q, *units) {
                        // A unitless number is taken in the default units; its
                        // dimension stays unknown.
                        self.model.params[i].definition = ParamDef::Value(v);
                        self.model.params[i].value = v;
                        self.model.params[i].dim = dim;
                    }
                }
                ParamValue::Expr(e) => {
                    if let Some(word) = self.word_in_place_of_a_number(e) {
                        self.report_word_for_a_number(word);
                        continue;
                    }
                    exprs[i] = self.resolve(e, &|s| matches!(s, Sym::Param(_)), "a param's value");
                    // A param is a constant: the time has no place in it
                    // (a run would freeze it at t = 0, emitted code would
                    // let it vary).
                    if exprs[i].as_ref().is_some_and(Expr::mentions_time) {
                        exprs[i] = None;
                        let span = self.model.params[i].span;
                        let name = self.model.params[i].name.clone();
                        self.error(
                            Diagnostic::error(
                                Code::WrongKind,
                                format!("param `{name}` uses the time `t`; a param is a constant"),
                            )
                            .with_label(span, "uses t")
                            .with_help("write a time-dependent quantity as an `observe` statement, or put the expression in the step's `law`"),
                        );
                    }
                }
            }
        }
        self.param_sources = sources;
        // Topological order (depth-first), reporting cycles once.
        let deps: Vec<Vec<usize>> = exprs
            .iter()
            .map(|e| {
                e.as_ref()
                    .map(|e| {
                        e.names()
                            .into_iter()
                            .filter_map(|s| if let Sym::Param(j) = s { Some(j) } else { None })
                            .collect()
                    })
                    .unwrap_or_default()
            })
            .collect();
        let mut state = vec![0u8; n]; // 0 new, 1 on stack, 2 done
        let mut order = Vec::with_capacity(n);
        let mut reported = false;
        for start in 0..n {
            if state[start] != 0 {
                continue;
            }
            let mut stack: Vec<(usize, usize)> = vec![(start, 0)];
            state[start] = 1;
            while let Some(&mut (node, ref mut next)) = stack.last_mut() {
                if *next < deps[node].len() {
                    let d = deps[node][*next];
                    *next += 1;
                    match state[d] {
                        0 => {
                            state[d] = 1;
                            stack.push((d, 0));
                        }
                        1 if !reported => {
                            reported = true;
                            let from = stack.iter().position(|(x, _)| *x == d).unwrap_or(0);
                            let cycle: Vec<usize> = stack[from..].iter().map(|(x, _)| *x).collect();
                            let names: Vec<&str> = cycle
                                .iter()
                                .chain([&d])
                                .map(|&k| self.model.params[k].name.as_str())
                                .collect();
                            let mut diag = Diagnostic::error(
                                Code::ParamCycle,
                                format!("params are defined in a cycle: {}", names.join(" → ")),
                            );
                            for &k in &cycle {
                                diag = diag.with_label(
                                    self.model.params[k].span,
                                    format!("`{}` depends on the next", self.model.params[k].name),
                                );
                            }
                            self.error(
                                diag.with_help(
                                    "give one of them a number instead of an expression",
                                ),
                            );
                        }
                        _ => {}
                    }
                } else {
                    state[node] = 2;
                    order.push(node);
                    stack.pop();
                }
            }
        }
        self.model.param_order = order;
        if reported {
            return;
        }
        for &i in &self.model.param_order.clone() {
            if let Some(e) = exprs[i].take() {
                let v = e.eval(&|s| self.model.initial_value(s), 0.0);
                let what = format!("param `{}`", self.model.params[i].name);
                self.report_mismatched_sum(&e, &what, self.model.params[i].span);
                let dim = self.infer_dim(&e);
                if !v.is_finite() {
                    self.error(
                        Diagnostic::error(
                            Code::BadParamValue,
                            format!("param `{}` evaluates to {v}", self.model.params[i].name),
                        )
                        .with_label(self.model.params[i].span, "not a finite number")
                        .with_help("check for division by zero or overflow"),
                    );
                }
                let p = &mut self.model.params[i];
                p.value = v;
                p.dim = dim;
                p.definition = ParamDef::Expr(e);
            }
        }
    }

    /// `param k = NaN /s` or `param k = fast /s`: an undeclared word where
    /// the number of a quantity belongs, followed by unit words. Reported
    /// once, for the word; the unit words are not names to resolve.
    fn word_in_place_of_a_number<'e>(&self, e: &'e AstExpr) -> Option<&'e Ident> {
        let undeclared = |name: &str| !self.names.contains_key(name) && !RESERVED.contains(&name);
        let undeclared_unit = |x: &AstExpr| matches!(x, AstExpr::Name(u) if undeclared(&u.name) && parse_unit(&u.name).is_ok());
        match e {
            AstExpr::Name(word) if undeclared(&word.name) => Some(word),
            AstExpr::Binary(AstBinOp::Div | AstBinOp::Mul, lhs, rhs, _) if undeclared_unit(rhs) => {
                self.word_in_place_of_a_number(lhs)
            }
            _ => None,
        }
    }

    fn report_word_for_a_number(&mut self, word: &Ident) {
        let lower = word.name.to_ascii_lowercase();
        if matches!(lower.as_str(), "nan" | "inf" | "infinity") {
            self.error(
                Diagnostic::error(
                    Code::BadNumber,
                    format!("`{}` is not a finite number", word.name),
                )
                .with_label(word.span, "not a number")
                .with_help("a value must be a finite number, e.g. `param k = 0.5 /s`"),
            );
        } else {
            self.unknown_name(word, "anything");
        }
    }

    /// `param K = 1 /h` where `h` is also a declared name: the text reads as
    /// a quantity and as an expression.
    fn check_quantity_ambiguity(&mut self, q: &Quantity) {
        let Some((unit, span)) = &q.unit else { return };
        // Only `N /word...` also reads as an expression (`N / word`): the
        // language has no implicit product, so `2 uM/s` or `77.27 s` are
        // quantities whatever params exist.
        if !unit.trim_start().starts_with('/') {
            return;
        }
        let words: Vec<&str> = unit
            .split(['/', '*', '·'])
            .map(|w| w.split('^').next().unwrap_or(w))
            .filter(|w| !w.is_empty() && *w != "1")
            .collect();
        // The expression reading is valid only if every word is a param
        // (a param's expression may use params only).
        let is_param = |w: &str| matches!(self.names.get(w), Some((Decl::Sym(Sym::Param(_)), _)));
        if words.is_empty() || !words.iter().all(|w| is_param(w)) {
            return;
        }
        let w = words[0];
        let as_expr = format!(
            "({} / {})",
            q.number,
            unit.trim_start_matches('/').replace('/', " / ")
        );
        self.error(
            Diagnostic::error(Code::AmbiguousQuantity, format!("`{} {unit}` reads both as a quantity with unit `{unit}` and as an expression over the param `{w}`", q.number))
                .with_label(*span, "unit or name?")
                .with_help(format!("for the expression write `{as_expr}`; for the unit rename the param `{w}`")),
        );
    }

    /// The dimension of an expression where it follows from its parts.
    fn infer_dim(&self, e: &Expr) -> Option<Dim> {
        match e {
            Expr::Number(_) => Some(Dim::NONE),
            Expr::Time => Some(Dim::TIME),
            Expr::Name(Sym::Param(i)) => self.model.params[*i].dim,
            Expr::Name(Sym::Species(_) | Sym::Fixed(_) | Sym::Total(_)) => Some(Dim::CONC),
            Expr::Name(Sym::Observable(_)) => None,
            Expr::Neg(a) => self.infer_dim(a),
            Expr::Binary(op, a, b) => {
                let (da, db) = (self.infer_dim(a), self.infer_dim(b));
                match op {
                    BinOp::Add | BinOp::Sub => match (da, db) {
                        (Some(x), Some(y)) if x == y => Some(x),
                        // A bare number added to a dimensioned term: the
                        // number is taken in that dimension's default units.
                        (Some(x), Some(y)) if x == Dim::NONE && is_plain_number(a) => Some(y),
                        (Some(x), Some(y)) if y == Dim::NONE && is_plain_number(b) => Some(x),
                        _ => None,
                    },
                    BinOp::Mul => Some(da?.mul(db?)),
                    BinOp::Div => Some(da?.div(db?)),
                    BinOp::Pow => match (**b).clone() {
                        Expr::Number(p) if p == p.trunc() && p.abs() < 100.0 => {
                            Some(da?.powi(p as i32))
                        }
                        _ if da == Some(Dim::NONE) => Some(Dim::NONE),
                        _ => None,
                    },
                }
            }
            Expr::Call(f, args) => match f {
                Func::Abs | Func::Min | Func::Max => {
                    let d = self.infer_dim(args.first()?)?;
                    if args.iter().skip(1).all(|a| self.infer_dim(a) == Some(d)) {
                        Some(d)
                    } else {
                        None
                    }
                }
                Func::Sqrt => {
                    let d = self.infer_dim(args.first()?)?;
                    if d.conc % 2 == 0 && d.time % 2 == 0 {
                        Some(Dim::new(d.conc / 2, d.time / 2))
                    } else {
                        None
                    }
                }
                _ => {
                    if args.iter().all(|a| self.infer_dim(a) == Some(Dim::NONE)) {
                        Some(Dim::NONE)
                    } else {
                        None
                    }
                }
            },
        }
    }

    /// The dimensions of the first sum, difference, `min` or `max` in `e`
    /// whose two sides have known, different dimensions (a bare number
    /// added to a dimensioned term takes that term's dimension).
    fn mismatched_sum(&self, e: &Expr) -> Option<(Dim, Dim)> {
        self.dim_or_mismatch(e).err()
    }

    /// [`Self::infer_dim`] in one bottom-up pass that also stops at the
    /// first mismatched sum (calling `infer_dim` at every node would be
    /// quadratic in a long sum).
    fn dim_or_mismatch(&self, e: &Expr) -> Result<Option<Dim>, (Dim, Dim)> {
        // A literal has no dimension of its own here, as a param written
        // without a unit has none: published test problems are often
        // scaled, with constants and offsets written as bare numbers
        // (`(1 + y1) * y2`), so anything a literal takes part in is of
        // unknown dimension and only sums of named quantities are judged.
        let same = |_: &Expr, da: Option<Dim>, _: &Expr, db: Option<Dim>| match (da, db) {
            (Some(x), Some(y)) if x == y => Ok(Some(x)),
            (Some(x), Some(y)) => Err((x, y)),
            _ => Ok(None),
        };
        Ok(match e {
            Expr::Number(_) => None,
            Expr::Neg(a) => self.dim_or_mismatch(a)?,
            Expr::Binary(op, a, b) => {
                let (da, db) = (self.dim_or_mismatch(a)?, self.dim_or_mismatch(b)?);
                match op {
                    BinOp::Add | BinOp::Sub => same(a, da, b, db)?,
                    BinOp::Mul => da.zip(db).map(|(x, y)| x.mul(y)),
                    BinOp::Div => da.zip(db).map(|(x, y)| x.div(y)),
                    BinOp::Pow => match **b {
                        Expr::Number(p) if p == p.trunc() && p.abs() < 100.0 => {
                            da.map(|d| d.powi(p as i32))
                        }
                        _ if da == Some(Dim::NONE) => Some(Dim::NONE),
                        _ => None,
                    },
                }
            }
            Expr::Call(f, args) => {
                let dims = args
                    .iter()
                    .map(|a| self.dim_or_mismatch(a))
                    .collect::<Result<Vec<_>, _>>()?;
                if let (Func::Min | Func::Max, [a, b], [da, db]) =
                    (f, args.as_slice(), dims.as_slice())
                {
                    same(a, *da, b, *db)?;
                }
                let first = dims.first().copied().flatten();
                match f {
                    Func::Abs | Func::Min | Func::Max => {
                        first.filter(|d| dims.iter().all(|x| *x == Some(*d)))
                    }
                    Func::Sqrt => first
                        .filter(|d| d.conc % 2 == 0 && d.time % 2 == 0)
                        .map(|d| Dim::new(d.conc / 2, d.time / 2)),
                    _ => dims
                        .iter()
                        .all(|d| *d == Some(Dim::NONE))
                        .then_some(Dim::NONE),
                }
            }
            _ => self.infer_dim(e),
        })
    }

    /// Reports a sum of different dimensions in `e` (the expression of
    /// `what`, written at `span`); true if there was one.
    fn report_mismatched_sum(&mut self, e: &Expr, what: &str, span: Span) -> bool {
        let Some((x, y)) = self.mismatched_sum(e) else {
            return false;
        };
        let units = self.model.units;
        let d = Diagnostic::error(
            Code::DimensionMismatch,
            format!(
                "{what} adds or compares quantities of different dimensions: {} and {}",
                x.display_in(units),
                y.display_in(units)
            ),
        )
        .with_label(span, format!("{} against {}", x.display_in(units), y.display_in(units)))
        .with_help("terms of a sum, and the two sides of `min` or `max`, must have the same dimension; check the units of the params used");
        self.error(d);
        true
    }

    fn lower_terms(&mut self, side: &Side) -> Vec<Term> {
        let mut terms: Vec<Term> = Vec::new();
        for t in &side.terms {
            let Some(sym) = self.participant(&t.name, "a step's species") else {
                continue;
            };
            let Some(c) = self.coefficient(t) else {
                continue;
            };
            self.used.insert(sym);
            match terms.iter_mut().find(|x| x.sym == sym) {
                Some(x) => match x.coefficient.checked_add(&c) {
                    Some(sum) => x.coefficient = sum,
                    None => self.error(coefficient_overflow(
                        t.span,
                        "the coefficients of this species on one side",
                    )),
                },
                None => terms.push(Term {
                    sym,
                    coefficient: c,
                    span: t.span,
                }),
            }
        }
        terms
    }

    fn participant(&mut self, ident: &Ident, what: &str) -> Option<Sym> {
        match self.lookup(&ident.name) {
            Some(Decl::Sym(s @ (Sym::Species(_) | Sym::Fixed(_)))) => Some(s),
            Some(Decl::Sym(s)) => {
                self.error(
                    Diagnostic::error(
                        Code::WrongKind,
                        format!("`{}` is {}, not a species", ident.name, kind_word(s)),
                    )
                    .with_label(ident.span, format!("used as {what}"))
                    .with_help("only `species` and `fixed` names take part in steps"),
                );
                None
            }
            Some(Decl::Step(_)) => {
                self.error(
                    Diagnostic::error(
                        Code::WrongKind,
                        format!("`{}` is a step, not a species", ident.name),
                    )
                    .with_label(ident.span, "a step name")
                    .with_help("only `species` and `fixed` names take part in steps"),
                );
                None
            }
            None => {
                self.unknown_name(ident, "a species");
                None
            }
        }
    }

    fn coefficient(&mut self, t: &StepTerm) -> Option<Coef> {
        let Some((text, span)) = &t.coefficient else {
            return Some(Coef::one());
        };
        let bad = |msg: String| {
            Diagnostic::error(Code::BadCoefficient, msg).with_label(*span, "this coefficient").with_help("coefficients are positive whole numbers, decimals or fractions such as `2`, `0.5`, `1/2`, at most 18 digits")
        };
        let parsed = parse_coefficient(text);
        match parsed {
            Some(c) if c.is_positive() => Some(c),
            Some(_) => {
                self.error(bad(format!("coefficient `{text}` must be positive")));
                None
            }
            None => {
                self.error(bad(format!(
                    "coefficient `{text}` is not a number this tool can hold exactly"
                )));
                None
            }
        }
    }

    fn lower_step(&mut self, item: &Item) {
        let StatementKind::Step {
            name,
            lhs,
            reversible,
            arrow_span,
            rhs,
            rate,
            rate_span,
            description,
            ..
        } = item.kind
        else {
            return;
        };
        let Some(Decl::Step(idx)) = self.lookup(&name.name) else {
            return;
        };
        if self.model.steps[idx].span != item.span {
            return; // a duplicate name, already reported
        }
        let errors_before = self.diags.iter().filter(|d| d.is_error()).count();
        let reactants = self.lower_terms(lhs);
        let products = self.lower_terms(rhs);
        // Later stages add and subtract coefficients exactly in 64 bits:
        // refuse a step whose side orders or net changes would overflow.
        if let Some(what) = coefficient_sums_overflow(&reactants, &products) {
            self.error(coefficient_overflow(item.span, what));
            return;
        }
        let rate = match rate {
            RateAst::Law(e) => {
                let resolved = self.resolve(e, &|s| !matches!(s, Sym::Observable(_)), "a rate law");
                Rate::Law(resolved.unwrap_or(Expr::Number(0.0)))
            }
            RateAst::MassAction(constants) => {
                let resolved: Vec<Option<Expr>> = constants
                    .iter()
                    .map(|c| {
                        self.resolve(
                            c,
                            &|s| matches!(s, Sym::Param(_) | Sym::Fixed(_) | Sym::Total(_)),
                            "a rate constant",
                        )
                    })
                    .collect();
                match (*reversible, constants.len()) {
                    (true, 1) => self.error(
                        Diagnostic::error(
                            Code::MissingReverseConstant,
                            format!(
                                "reversible step `{}` has no reverse rate constant",
                                name.name
                            ),
                        )
                        .with_label(*arrow_span, "reversible")
                        .with_label(*rate_span, "only a forward constant")
                        .with_help("write `with KF, KR`, or use `->` for an irreversible step"),
                    ),
                    (false, 2) => self.error(
                        Diagnostic::error(
                            Code::ExtraReverseConstant,
                            format!("irreversible step `{}` has two rate constants", name.name),
                        )
                        .with_label(*arrow_span, "irreversible")
                        .with_label(constants[1].span(), "a reverse constant")
                        .with_help("use `<=>` for a reversible step, or drop the second constant"),
                    ),
                    (_, n) if n > 2 => self.error(
                        Diagnostic::error(
                            Code::ExtraReverseConstant,
                            format!("step `{}` has {n} rate constants", name.name),
                        )
                        .with_label(constants[2].span(), "one too many")
                        .with_help("a step takes one constant (`->`) or two (`<=>`)"),
                    ),
                    _ => {}
                }
                let forward = resolved
                    .first()
                    .cloned()
                    .flatten()
                    .unwrap_or(Expr::Number(0.0));
                let reverse = if *reversible {
                    resolved
                        .get(1)
                        .cloned()
                        .flatten()
                        .or(Some(Expr::Number(0.0)))
                } else {
                    None
                };
                // Dimension check per direction.
                let units = self.model.units;
                let directions = [(0usize, &reactants, "forward"), (1, &products, "reverse")];
                for (k, side, dir) in directions {
                    let Some(Some(expr)) = resolved.get(k) else {
                        continue;
                    };
                    if k == 1 && !*reversible {
                        continue;
                    }
                    let order = Model::order(side);
                    if !order.is_integer() {
                        continue;
                    }
                    let Some(order) = order.to_integer().to_i32() else {
                        continue;
                    };
                    let want = Dim::mass_action_constant(order);
                    if let Some(have) = self.infer_dim(expr)
                        && have != want
                        && !(have == Dim::NONE && matches!(expr, Expr::Number(_)))
                    {
                        let mut d = Diagnostic::error(
                            Code::DimensionMismatch,
                            format!("the {dir} constant of step `{}` has dimension {}, but a step of order {order} needs {}", name.name, have.display_in(units), want.display_in(units)),
                        )
                        .with_label(constants[k].span(), format!("{dir} constant: {}", have.display_in(units)));
                        if let Expr::Name(Sym::Param(p)) = expr {
                            let span = self.model.params[*p].span;
                            d = d.with_label(span, "declared here");
                        }
                        let side_span = if k == 0 { lhs.span } else { rhs.span };
                        d = d.with_label(side_span, format!("order {order} ({dir})"));
                        let per = match 1 - order {
                            0 => "inverse time".to_string(),
                            1 => "concentration per time".to_string(),
                            p => format!("concentration^{p} per time"),
                        };
                        self.error(d.with_help(format!(
                            "a mass-action constant for order {order} is in {per}, e.g. `{}`",
                            want.display_in(units)
                        )));
                    }
                }
                for (k, constant) in [(0, Some(&forward)), (1, reverse.as_ref())] {
                    let Some(constant) = constant else { continue };
                    let v = constant.eval(&|s| self.model.initial_value(s), 0.0);
                    // A param whose value is not finite was reported with
                    // the param; an expression written here was not.
                    if !v.is_finite() && !matches!(constant, Expr::Name(_)) {
                        let dir = if k == 0 { "forward" } else { "reverse" };
                        self.error(
                            Diagnostic::error(
                                Code::BadParamValue,
                                format!("the {dir} constant of step `{}` evaluates to {v}", name.name),
                            )
                            .with_label(constants[k].span(), "not a finite number")
                            .with_help("check for division by zero, overflow or a root or logarithm of a negative number"),
                        );
                    }
                    if v < 0.0 && v.is_finite() {
                        let dir = if k == 0 { "forward" } else { "reverse" };
                        let mut d = Diagnostic::error(
                            Code::NegativeRateConstant,
                            format!("the {dir} constant of step `{}` is {v}; a rate constant cannot be negative", name.name),
                        )
                        .with_label(constants[k].span(), format!("{dir} constant: {v}"));
                        if let Expr::Name(Sym::Param(p)) = constant {
                            d = d.with_label(self.model.params[*p].span, "declared here");
                        }
                        self.error(d.with_help("mass action makes the rate proportional to its constant: a negative one would drive concentrations below zero; write the step the other way round if that is the direction meant"));
                    }
                }
                Rate::MassAction { forward, reverse }
            }
        };
        let law_mismatch = match &rate {
            Rate::Law(e) => self.report_mismatched_sum(
                e,
                &format!("the law of step `{}`", name.name),
                *rate_span,
            ),
            Rate::MassAction { .. } => false,
        };
        // A law whose names failed to resolve has no dimension worth a
        // warning: the error says what is wrong.
        let step_failed = self.diags.iter().filter(|d| d.is_error()).count() > errors_before;
        if let Rate::Law(e) = &rate
            && !law_mismatch
            && !step_failed
        {
            match self.infer_dim(e) {
                Some(d) if d == Dim::RATE => {}
                Some(d) => self.diags.push(
                    Diagnostic::warning(Code::LawDimensionMismatch, format!("the law of step `{}` has dimension {}, not concentration per time", name.name, d.display_in(self.model.units)))
                        .with_label(*rate_span, "this law")
                        .with_help(format!("a rate is in {}", Dim::RATE.display_in(self.model.units))),
                ),
                None => self.diags.push(
                    Diagnostic::warning(Code::LawDimensionUnknown, format!("the dimension of the law of step `{}` cannot be inferred", name.name))
                        .with_label(*rate_span, "this law")
                        .with_help("give its params units (e.g. `param Vmax = 3 uM/s`) so the law can be checked"),
                ),
            }
        }
        let step = &mut self.model.steps[idx];
        step.reactants = reactants;
        step.products = products;
        step.reversible = *reversible;
        step.rate = rate;
        step.description = description.clone();
        step.rate_span = *rate_span;
    }

    fn lower_observable(&mut self, item: &Item) {
        let StatementKind::Observe { name, expr } = item.kind else {
            return;
        };
        let Some(Decl::Sym(Sym::Observable(i))) = self.lookup(&name.name) else {
            return;
        };
        if self.model.observables[i].span != item.span {
            return;
        }
        if let Some(e) = self.resolve(expr, &|_| true, "an observable") {
            let what = format!("observable `{}`", name.name);
            self.report_mismatched_sum(&e, &what, item.span);
            self.model.observables[i].expr = e;
        }
    }

    fn check_observable_cycles(&mut self) {
        let n = self.model.observables.len();
        for start in 0..n {
            // Follow observable references; a path back to `start` is a cycle.
            let mut seen = vec![false; n];
            let mut todo = vec![start];
            while let Some(k) = todo.pop() {
                for s in self.model.observables[k].expr.names() {
                    if let Sym::Observable(j) = s {
                        if j == start {
                            let o = &self.model.observables[start];
                            let d = Diagnostic::error(
                                Code::ParamCycle,
                                format!("observable `{}` depends on itself", o.name),
                            )
                            .with_label(o.span, "part of a cycle")
                            .with_help(
                                "an observable may use other observables, but not in a circle",
                            );
                            self.error(d);
                            return;
                        }
                        if !seen[j] {
                            seen[j] = true;
                            todo.push(j);
                        }
                    }
                }
            }
        }
    }

    fn lower_total(&mut self, item: &Item) {
        let StatementKind::Total { name, terms, value } = item.kind else {
            return;
        };
        let Some(Decl::Sym(Sym::Total(i))) = self.lookup(&name.name) else {
            return;
        };
        if self.model.totals[i].span != item.span {
            return;
        }
        let mut lowered: Vec<(usize, Coef)> = Vec::new();
        for t in terms {
            let Some(sym) = self.participant(&t.name, "a term of a total") else {
                continue;
            };
            let Sym::Species(k) = sym else {
                self.error(
                    Diagnostic::error(
                        Code::WrongKind,
                        format!(
                            "`{}` is a fixed species; totals sum dynamic species",
                            t.name.name
                        ),
                    )
                    .with_label(t.name.span, "fixed")
                    .with_help("a fixed species never changes, so it needs no total"),
                );
                continue;
            };
            let Some(mut c) = self.coefficient(t) else {
                continue;
            };
            if t.negative {
                c = -c;
            }
            match lowered.iter_mut().find(|(j, _)| *j == k) {
                Some((_, x)) => *x += c,
                None => lowered.push((k, c)),
            }
        }
        lowered.retain(|(_, c)| !c.is_zero());
        if lowered.is_empty() {
            self.error(
                Diagnostic::error(
                    Code::TotalEmpty,
                    format!("total `{}` sums no species", name.name),
                )
                .with_label(item.span, "empty")
                .with_help("write the species it sums, e.g. `total E_t = E + ES`"),
            );
            return;
        }
        // Conserved by every step?
        for (j, step) in self.model.steps.iter().enumerate() {
            let change: Coef = self
                .model
                .net_change(j)
                .iter()
                .map(|(k, c)| {
                    lowered
                        .iter()
                        .find(|(x, _)| x == k)
                        .map(|(_, w)| *w * *c)
                        .unwrap_or_else(Coef::zero)
                })
                .fold(Coef::zero(), |a, b| a + b);
            if !change.is_zero() {
                let d = Diagnostic::error(Code::TotalNotConserved, format!("total `{}` is not conserved: step `{}` changes it by {} per firing", name.name, step.name, change))
                    .with_label(item.span, "this total")
                    .with_label(step.span, "changes the total")
                    .with_help("a total must sum species whose amounts the steps only move between each other; check the coefficients or drop the total");
                self.diags.push(d);
                break;
            }
        }
        let mut given = None;
        if let Some(q) = value {
            if let Some(v) = self.concentration(q, item.units, "a total") {
                if v < 0.0 {
                    self.negative_value(name, q.span);
                }
                given = Some(v);
            }
        }
        let t = &mut self.model.totals[i];
        t.terms = lowered;
        t.value_given = given.is_some();
        t.value = given.unwrap_or(0.0);
    }

    /// Sets the start value of each valued total's adjusted species, then
    /// checks every total against the initial values.
    fn apply_total_values(&mut self) {
        let mut adjusted: HashMap<usize, usize> = HashMap::new();
        // Totals already reported here are not reported again below.
        let mut reported: Vec<usize> = Vec::new();
        for i in 0..self.model.totals.len() {
            if !self.model.totals[i].value_given {
                continue;
            }
            let Some(k) = self.model.total_adjusted_species(i) else {
                continue;
            };
            if self.model.species[k].initial_given || adjusted.contains_key(&k) {
                continue; // all given: only checked below
            }
            match self.model.apply_total_value(i) {
                Ok(()) => {
                    adjusted.insert(k, i);
                    self.model.species[k].initial_given = true;
                }
                Err(msg) => {
                    reported.push(i);
                    let span = self.model.totals[i].span;
                    self.error(
                        Diagnostic::error(Code::TotalInconsistent, msg)
                            .with_label(span, "this total")
                            .with_help(
                                "raise the total or lower the initial values of its species",
                            ),
                    );
                }
            }
        }
        for i in 0..self.model.totals.len() {
            let t = &self.model.totals[i];
            let from_initial = self.model.total_from_initial(i);
            if !t.value_given {
                self.model.totals[i].value = from_initial;
                continue;
            }
            let scale = t.value.abs().max(from_initial.abs()).max(1e-300);
            if (t.value - from_initial).abs() > 1e-9 * scale && !reported.contains(&i) {
                let mut d = Diagnostic::error(
                    Code::TotalInconsistent,
                    format!(
                        "total `{}` is given as {} but its species start at a sum of {}",
                        t.name,
                        fmt_num(t.value),
                        fmt_num(from_initial)
                    ),
                )
                .with_label(t.span, "this total");
                for (k, _) in &t.terms {
                    let s = &self.model.species[*k];
                    if s.initial_given {
                        d = d.with_label(
                            s.span,
                            format!("`{}` starts at {}", s.name, fmt_num(s.initial)),
                        );
                    }
                }
                self.diags.push(d.with_help("leave out one species' initial value so it follows from the total, or correct the numbers"));
            }
        }
    }

    fn lower_event(&mut self, item: &Item) {
        let (kind, target, amount, time) = match item.kind {
            StatementKind::Event {
                kind,
                amount,
                target,
                time,
            } => (
                match kind {
                    syntax::EventKindAst::Add => EventKind::Add,
                    syntax::EventKindAst::Remove => EventKind::Remove,
                },
                target,
                amount,
                time,
            ),
            StatementKind::Set {
                target,
                value,
                time,
            } => (EventKind::Set, target, value, time),
            _ => return,
        };
        let species = match self.lookup(&target.name) {
            Some(Decl::Sym(Sym::Species(k))) => Some(k),
            Some(Decl::Sym(s)) => {
                self.error(
                    Diagnostic::error(Code::EventTarget, format!("`{}` is {}; events change species only", target.name, kind_word(s)))
                        .with_label(target.span, "not a species")
                        .with_help("timed additions, withdrawals and resets act on `species`; to change a param use `--set` or a scan"),
                );
                None
            }
            Some(Decl::Step(_)) => {
                self.error(
                    Diagnostic::error(
                        Code::EventTarget,
                        format!("`{}` is a step; events change species only", target.name),
                    )
                    .with_label(target.span, "not a species")
                    .with_help("name a species"),
                );
                None
            }
            None => {
                self.unknown_name(target, "a species");
                None
            }
        };
        let amount_v = self.concentration(amount, item.units, "an amount");
        let time_v = self.time(time, item.units);
        if let Some(v) = amount_v
            && v < 0.0
        {
            self.error(
                Diagnostic::error(Code::BadEvent, "event amounts cannot be negative")
                    .with_label(amount.span, "negative")
                    .with_help("use `remove` to take material away"),
            );
        }
        if let Some(t) = time_v
            && t < 0.0
        {
            self.error(
                Diagnostic::error(Code::BadEvent, "events cannot happen before time 0")
                    .with_label(time.span, "negative time")
                    .with_help("runs start at t = 0"),
            );
        }
        if let (Some(species), Some(amount), Some(time)) = (species, amount_v, time_v) {
            self.model.events.push(Event {
                kind,
                species,
                amount,
                time,
                span: item.span,
            });
        }
    }

    fn lower_assumption(&mut self, item: &Item) {
        match item.kind {
            StatementKind::AssumeSteady(names) => {
                for n in names {
                    match self.lookup(&n.name) {
                        Some(Decl::Sym(Sym::Species(k))) => self.model.assumptions.steady.push((k, n.span)),
                        Some(_) => self.error(Diagnostic::error(Code::BadAssumption, format!("`{}` is not a species", n.name)).with_label(n.span, "not a species").with_help("`assume steady` names the species (usually enzyme forms) held at quasi-steady state")),
                        None => self.unknown_name(n, "a species"),
                    }
                }
            }
            StatementKind::AssumeEquilibrium(names) => {
                for n in names {
                    match self.lookup(&n.name) {
                        Some(Decl::Step(k)) => self.model.assumptions.equilibrium.push((k, n.span)),
                        Some(_) => self.error(
                            Diagnostic::error(
                                Code::BadAssumption,
                                format!("`{}` is not a step", n.name),
                            )
                            .with_label(n.span, "not a step")
                            .with_help("`assume equilibrium` names the steps at rapid equilibrium"),
                        ),
                        None => {
                            let steps: Vec<&str> =
                                self.model.steps.iter().map(|s| s.name.as_str()).collect();
                            let hint = did_you_mean(&n.name, steps.iter().copied())
                                .map(|h| format!("did you mean `{h}`?"))
                                .unwrap_or_else(|| "name a declared step".into());
                            self.error(
                                Diagnostic::error(
                                    Code::UnknownName,
                                    format!("unknown step `{}`", n.name),
                                )
                                .with_label(n.span, "not a step")
                                .with_help(hint),
                            );
                        }
                    }
                }
            }
            _ => {}
        }
    }

    fn lint(&mut self) {
        // Params used by totals' values? Totals carry numbers only; params
        // count as used when any expression mentions them.
        for (i, p) in self.model.params.iter().enumerate() {
            if !self.used.contains(&Sym::Param(i)) {
                self.diags.push(
                    Diagnostic::warning(
                        Code::UnusedParam,
                        format!("param `{}` is never used", p.name),
                    )
                    .with_label(p.span, "unused")
                    .with_help("use it in a rate, law, observable or another param, or remove it"),
                );
            }
        }
        let mut touched = vec![false; self.model.species.len()];
        let mut produced = vec![false; self.model.species.len()];
        let mut consumed = vec![false; self.model.species.len()];
        for (j, step) in self.model.steps.iter().enumerate() {
            for t in step.reactants.iter().chain(&step.products) {
                if let Sym::Species(k) = t.sym {
                    touched[k] = true;
                }
            }
            if let Rate::Law(e) = &step.rate {
                for s in e.names() {
                    if let Sym::Species(k) = s {
                        touched[k] = true;
                    }
                }
            }
            for (k, c) in self.model.net_change(j) {
                if c.is_positive() || step.reversible {
                    produced[k] = true;
                }
                if c.is_negative() || step.reversible {
                    consumed[k] = true;
                }
            }
            let sorted = |ts: &[Term]| {
                let mut v: Vec<(Sym, Coef)> = ts.iter().map(|t| (t.sym, t.coefficient)).collect();
                v.sort_by_key(|x| x.0);
                v
            };
            if sorted(&step.reactants) == sorted(&step.products) {
                self.diags.push(
                    Diagnostic::warning(Code::NoOpStep, format!("step `{}` has the same species on both sides", step.name))
                        .with_label(step.span, "changes nothing")
                        .with_help("a step whose sides are equal never changes any concentration; remove it or fix a side"),
                );
            }
        }
        for e in &self.model.events {
            produced[e.species] = true;
        }
        for (k, s) in self.model.species.iter().enumerate() {
            if !touched[k] {
                self.diags.push(
                    Diagnostic::warning(
                        Code::UntouchedSpecies,
                        format!("species `{}` takes part in no step", s.name),
                    )
                    .with_label(s.span, "never changes")
                    .with_help(
                        "use it in a step, declare it `fixed` if it is a constant, or remove it",
                    ),
                );
            } else if consumed[k]
                && !produced[k]
                && s.initial == 0.0
                && !self.initial_refused.contains(&k)
            {
                self.diags.push(
                    Diagnostic::warning(
                        Code::ConsumedOnly,
                        format!(
                            "species `{}` is consumed but starts at 0 and nothing produces it",
                            s.name
                        ),
                    )
                    .with_label(s.span, "no source")
                    .with_help(
                        "give it an initial value, an `add` event, or a step that produces it",
                    ),
                );
            }
        }
        let _ = self.sources;
    }
}

fn is_plain_number(e: &Expr) -> bool {
    matches!(e, Expr::Number(_)) || matches!(e, Expr::Neg(x) if matches!(**x, Expr::Number(_)))
}

fn kind_word(s: Sym) -> &'static str {
    match s {
        Sym::Species(_) => "a species",
        Sym::Fixed(_) => "a fixed species",
        Sym::Param(_) => "a param",
        Sym::Total(_) => "a total",
        Sym::Observable(_) => "an observable",
    }
}

fn context_help(context: &str) -> String {
    match context {
        "a param's value" => "a param's expression may use only other params and numbers (it is a constant)".into(),
        "a rate constant" => "a mass-action constant uses params, fixed species and totals; for rates that depend on species write `law EXPR`".into(),
        "a rate law" => "a law uses species, fixed species, params, totals and `t`".into(),
        _ => format!("check what {context} may use in docs/language.md"),
    }
}

fn coefficient_overflow(span: Span, what: &str) -> Diagnostic {
    Diagnostic::error(Code::BadCoefficient, format!("{what} add up to more than this tool can hold exactly"))
        .with_label(span, "coefficients too large")
        .with_help("use smaller coefficients (numerators and denominators of a few digits); scale a step's coefficients down by their common factor")
}

/// Which sum of a step's coefficients (side orders, net change of a
/// species) does not fit in 64-bit rationals, if any.
fn coefficient_sums_overflow(reactants: &[Term], products: &[Term]) -> Option<&'static str> {
    let sum = |terms: &[Term]| {
        terms
            .iter()
            .try_fold(Coef::zero(), |a, t| a.checked_add(&t.coefficient))
    };
    if sum(reactants).is_none() || sum(products).is_none() {
        return Some("the coefficients of one side of this step");
    }
    for r in reactants {
        if let Some(p) = products.iter().find(|p| p.sym == r.sym)
            && p.coefficient.checked_sub(&r.coefficient).is_none()
        {
            return Some("the net change of a species in this step");
        }
    }
    None
}

/// Parses `2`, `0.5`, `1/2` exactly; None on overflow or malformed text.
pub(crate) fn parse_coefficient(text: &str) -> Option<Coef> {
    let (num, den) = match text.split_once('/') {
        Some((a, b)) => (a, Some(b)),
        None => (text, None),
    };
    let mut value = match num.split_once('.') {
        Some((int, frac)) => {
            let digits = format!("{int}{frac}");
            let n: i64 = digits.parse().ok()?;
            let d = 10i64.checked_pow(frac.len() as u32)?;
            Coef::new(n, d)
        }
        None => Coef::from_integer(num.parse().ok()?),
    };
    if let Some(d) = den {
        let d: i64 = d.parse().ok()?;
        if d == 0 {
            return Some(Coef::zero());
        }
        value = value.checked_div(&Coef::from_integer(d))?;
    }
    Some(value)
}

fn fmt_num(v: f64) -> String {
    let s = format!("{v}");
    if s.len() > 12 { format!("{v:.6e}") } else { s }
}
