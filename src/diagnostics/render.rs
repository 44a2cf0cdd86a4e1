//! Rendering diagnostics for people (miette's graphical report, without
//! colour so output is stable) and for programs (JSON).

use super::{Diagnostic, Severity, SourceMap};
use miette::{
    GraphicalReportHandler, GraphicalTheme, LabeledSpan, MietteDiagnostic, MietteError,
    MietteSpanContents, SourceCode, SourceSpan, SpanContents,
};

/// Renders one diagnostic as a user sees it in a terminal (no colour).
pub fn render_human(diag: &Diagnostic, sources: &SourceMap) -> String {
    let handler =
        GraphicalReportHandler::new_themed(GraphicalTheme::unicode_nocolor()).with_width(90);
    let primary_file = diag.labels.first().map(|l| l.span.file);
    let mut report = MietteDiagnostic::new(diag.message.clone())
        .with_code(diag.code.as_str())
        .with_severity(match diag.severity {
            Severity::Error => miette::Severity::Error,
            Severity::Warning => miette::Severity::Warning,
        });
    let mut elsewhere = Vec::new();
    let window = primary_file
        .and_then(|f| sources.get(f))
        .map(|file| WindowSource::around(file, &diag.labels));
    let too_long = window
        .as_ref()
        .is_some_and(|w| w.text.lines().any(|l| l.len() > MAX_DRAWN_LINE));
    for label in &diag.labels {
        if too_long {
            let path = sources
                .get(label.span.file)
                .map(|f| f.path.display().to_string())
                .unwrap_or_default();
            let (line, col) = sources.line_col(label.span.file, label.span.start);
            elsewhere.push(format!(
                "{}: {path}:{line}:{col} (the line is too long to show)",
                label.message
            ));
        } else if Some(label.span.file) == primary_file {
            let len = label.span.len();
            report = report.and_label(LabeledSpan::new(
                Some(label.message.clone()),
                label.span.start,
                len,
            ));
        } else {
            let path = sources
                .get(label.span.file)
                .map(|f| f.path.display().to_string())
                .unwrap_or_default();
            let (line, col) = sources.line_col(label.span.file, label.span.start);
            elsewhere.push(format!("{}: {path}:{line}:{col}", label.message));
        }
    }
    let mut help = diag.help.clone().unwrap_or_default();
    for note in elsewhere {
        if !help.is_empty() {
            help.push('\n');
        }
        help.push_str(&note);
    }
    if !help.is_empty() {
        report = report.with_help(help);
    }
    let mut out = String::new();
    let result = match window.filter(|_| !too_long) {
        Some(source) => {
            let report = miette::Report::new(report).with_source_code(source);
            handler.render_report(&mut out, report.as_ref())
        }
        None => handler.render_report(&mut out, &report),
    };
    if result.is_err() {
        out = format!(
            "{}: {} [{}]\n",
            severity_word(diag.severity),
            diag.message,
            diag.code.as_str()
        );
    }
    out
}

/// Lines longer than this are not drawn: a terminal wraps them unreadably,
/// and the renderer cannot pad columns past 65,535 characters. Their
/// diagnostics give `path:line:column` instead.
const MAX_DRAWN_LINE: usize = 2000;

fn severity_word(s: Severity) -> &'static str {
    match s {
        Severity::Error => "error",
        Severity::Warning => "warning",
    }
}

/// The JSON object of one diagnostic: file, line, column (1-based), code,
/// severity, message, help and all labels.
pub fn to_json_value(diag: &Diagnostic, sources: &SourceMap) -> serde_json::Value {
    let position = |span: super::Span| {
        let (line, column) = sources.line_col(span.file, span.start);
        let (end_line, end_column) = sources.line_col(span.file, span.end);
        let file = sources.get(span.file).map(|f| f.path.display().to_string());
        (file, line, column, end_line, end_column)
    };
    let (file, line, column) = match diag.primary_span() {
        Some(span) => {
            let (f, l, c, _, _) = position(span);
            (f, Some(l), Some(c))
        }
        None => (
            diag.path.as_ref().map(|p| p.display().to_string()),
            None,
            None,
        ),
    };
    let labels: Vec<serde_json::Value> = diag
        .labels
        .iter()
        .map(|label| {
            let (file, line, column, end_line, end_column) = position(label.span);
            serde_json::json!({
                "file": file, "line": line, "column": column,
                "end_line": end_line, "end_column": end_column,
                "message": label.message,
            })
        })
        .collect();
    serde_json::json!({
        "file": file,
        "line": line,
        "column": column,
        "code": diag.code.as_str(),
        "severity": diag.severity,
        "message": diag.message,
        "help": diag.help,
        "labels": labels,
    })
}

/// The JSON report of a set of diagnostics, the one shape every command
/// uses: `{"ok", "errors", "warnings", "diagnostics": [...]}`, pretty-printed.
pub fn render_json(diags: &[Diagnostic], sources: &SourceMap) -> String {
    let errors = diags.iter().filter(|d| d.is_error()).count();
    let values: Vec<_> = diags.iter().map(|d| to_json_value(d, sources)).collect();
    let report = serde_json::json!({
        "ok": errors == 0,
        "errors": errors,
        "warnings": diags.len() - errors,
        "diagnostics": values,
    });
    serde_json::to_string_pretty(&report).unwrap_or_else(|_| "{}".into())
}

/// The lines of a file around a diagnostic's labels, with their true line
/// numbers: rendering reads only this window, so a diagnostic costs the size
/// of its context, not of the file (a large generated file with many
/// warnings would otherwise render in quadratic time).
struct WindowSource {
    name: String,
    text: String,
    base_offset: usize,
    base_line: usize,
}

impl WindowSource {
    const CONTEXT_LINES: usize = 3;

    fn around(file: &super::SourceFile, labels: &[super::Label]) -> WindowSource {
        let text = file.text.as_str();
        let first = labels
            .iter()
            .map(|l| l.span.start)
            .min()
            .unwrap_or(0)
            .min(text.len());
        let last = labels
            .iter()
            .map(|l| l.span.end)
            .max()
            .unwrap_or(0)
            .min(text.len());
        let line_start = |pos: usize| text[..pos].rfind('\n').map(|i| i + 1).unwrap_or(0);
        let mut start = line_start(super::floor_char_boundary(text, first));
        for _ in 0..Self::CONTEXT_LINES {
            if start == 0 {
                break;
            }
            start = line_start(start - 1);
        }
        let mut end = super::floor_char_boundary(text, last);
        for _ in 0..=Self::CONTEXT_LINES {
            match text[end..].find('\n') {
                Some(i) => end += i + 1,
                None => {
                    end = text.len();
                    break;
                }
            }
        }
        let base_line = file.line_index(start);
        WindowSource {
            name: file.path.display().to_string(),
            text: shown(&text[start..end]),
            base_offset: start,
            base_line,
        }
    }
}

/// The text as drawn: control characters (escape sequences, NUL, a lone
/// carriage return) and invisible format characters (bidirectional
/// overrides, zero-width spaces) would drive or mislead the user's terminal,
/// so each becomes `?` or U+FFFD of the same byte length (spans stay valid).
fn shown(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        let invisible = matches!(c, '\u{200B}'..='\u{200F}' | '\u{202A}'..='\u{202E}' | '\u{2060}'..='\u{2069}' | '\u{FEFF}');
        match c {
            '\n' | '\t' => out.push(c),
            '\r' if chars.peek() == Some(&'\n') => out.push(c),
            _ if c.is_control() || invisible => match c.len_utf8() {
                3 => out.push('\u{FFFD}'),
                n => out.extend(std::iter::repeat_n('?', n)),
            },
            _ => out.push(c),
        }
    }
    out
}

impl SourceCode for WindowSource {
    fn read_span<'a>(
        &'a self,
        span: &SourceSpan,
        before: usize,
        after: usize,
    ) -> Result<Box<dyn SpanContents<'a> + 'a>, MietteError> {
        let local_offset = span
            .offset()
            .saturating_sub(self.base_offset)
            .min(self.text.len());
        let local = SourceSpan::new(
            local_offset.into(),
            span.len().min(self.text.len() - local_offset),
        );
        let inner = self.text.as_str().read_span(&local, before, after)?;
        let shifted = SourceSpan::new(
            (inner.span().offset() + self.base_offset).into(),
            inner.span().len(),
        );
        Ok(Box::new(MietteSpanContents::new_named(
            self.name.clone(),
            inner.data(),
            shifted,
            inner.line() + self.base_line,
            inner.column(),
            inner.line_count(),
        )))
    }
}
