//! Assay data tables: CSV or TSV text with a header of names, each name
//! optionally with a unit in brackets (`S [mM]`), and rows of numbers.
//!
//! Why here: the fitter needs every cell located, so that a bad cell is an
//! error that points at its file, row and column; the text comes from the
//! caller (the compiler reads no files), registered in the caller's
//! [`SourceMap`] so diagnostics can label it.
//!
//! Invariants: every row has as many cells as the header; a cell is
//! missing (empty or `NA`) or a finite number; every cell keeps its span.

use crate::diagnostics::{Code, Diagnostic, FileId, Span};
use crate::model::units::{UnitExpr, parse_unit};
use crate::model::{Dim, Units};

/// One column of a table: its name, its unit if the header gives one, and
/// the header cell's span.
#[derive(Clone, Debug)]
pub struct Column {
    pub name: String,
    pub unit: Option<UnitExpr>,
    pub span: Span,
}

/// One cell: a number or missing, with its span.
#[derive(Clone, Debug)]
pub struct Cell {
    pub value: Option<f64>,
    pub span: Span,
}

/// A data row with its line number (1-based, as an editor shows it).
#[derive(Clone, Debug)]
pub struct Row {
    pub line: usize,
    pub cells: Vec<Cell>,
}

#[derive(Clone, Debug)]
pub struct Table {
    pub file: FileId,
    pub label: String,
    pub columns: Vec<Column>,
    pub rows: Vec<Row>,
}

impl Table {
    pub fn column(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c.name == name)
    }

    /// The factor from column `k`'s unit to the model's default units (1
    /// without a unit); a unit of another dimension than `dim` is an error
    /// located at the header cell.
    pub fn unit_factor(
        &self,
        k: usize,
        dim: Option<Dim>,
        units: Units,
        errors: &mut Vec<Diagnostic>,
    ) -> f64 {
        let column = &self.columns[k];
        match (&column.unit, dim) {
            (None, _) => 1.0,
            (Some(u), Some(d)) if u.dim() != d => {
                errors.push(
                    Diagnostic::error(
                        Code::BadData,
                        format!(
                            "column `{}` of {} has a unit of dimension {}, expected {}",
                            column.name,
                            self.label,
                            u.dim(),
                            d
                        ),
                    )
                    .with_label(column.span, "this unit"),
                );
                1.0
            }
            (Some(u), _) => u.factor_to(units),
        }
    }

    /// The column a `--weight COLUMN` names, located when it is missing.
    pub fn named_column(&self, name: &str, what: &str) -> Result<usize, Vec<Diagnostic>> {
        self.column(name).ok_or_else(|| {
            vec![
                Diagnostic::error(
                    Code::BadData,
                    format!("{} has no {what} column `{name}`", self.label),
                )
                .with_label(self.columns[0].span, "the header"),
            ]
        })
    }
}

fn cells_of(line: &str, delimiter: char, offset: usize) -> Vec<(String, usize, usize)> {
    let mut out = Vec::new();
    let mut start = 0;
    for (i, c) in line.char_indices().chain([(line.len(), delimiter)]) {
        if c == delimiter {
            let raw = &line[start..i];
            let lead = raw.len() - raw.trim_start().len();
            let text = raw.trim();
            let text = text
                .strip_prefix('"')
                .and_then(|t| t.strip_suffix('"'))
                .unwrap_or(text);
            let begin = offset + start + lead;
            out.push((text.to_string(), begin, begin + raw.trim().len()));
            start = i + c.len_utf8();
        }
    }
    out
}

/// Parses a table. `tab_separated` for TSV (chosen by the file's
/// extension); lines that are blank or start with `#` are skipped.
pub fn parse_table(
    text: &str,
    file: FileId,
    label: &str,
    tab_separated: bool,
) -> Result<Table, Vec<Diagnostic>> {
    let delimiter = if tab_separated { '\t' } else { ',' };
    let mut errors = Vec::new();
    let mut offset = 0;
    let mut header: Option<Vec<Column>> = None;
    let mut rows = Vec::new();
    for (k, raw_line) in text.split_inclusive('\n').enumerate() {
        let line_start = offset;
        offset += raw_line.len();
        let line = raw_line.trim_end_matches(['\n', '\r']);
        let trimmed = line.trim();
        if trimmed.is_empty() || trimmed.starts_with('#') {
            continue;
        }
        let cells = cells_of(line, delimiter, line_start);
        let Some(columns) = &header else {
            let mut columns = Vec::new();
            for (name, start, end) in cells {
                let span = Span::new(file, start, end);
                let (name, unit) = match name.split_once('[') {
                    Some((n, rest)) => {
                        let unit_text = rest.trim_end().trim_end_matches(']').trim();
                        match parse_unit(unit_text) {
                            Ok(u) => (n.trim().to_string(), Some(u)),
                            Err(e) => {
                                errors.push(
                                    Diagnostic::error(Code::BadData, format!("unknown unit `{unit_text}` in the header of {label}"))
                                        .with_label(span, e.to_string())
                                        .with_help("units are products of M, mM, uM, nM, pM and s, ms, min, h, written like `uM/min`"),
                                );
                                (n.trim().to_string(), None)
                            }
                        }
                    }
                    None => (name, None),
                };
                if name.is_empty() {
                    errors.push(
                        Diagnostic::error(
                            Code::BadData,
                            format!("a column of {label} has no name"),
                        )
                        .with_label(span, "empty header cell"),
                    );
                }
                if columns.iter().any(|c: &Column| c.name == name) {
                    errors.push(
                        Diagnostic::error(
                            Code::BadData,
                            format!("column `{name}` appears twice in {label}"),
                        )
                        .with_label(span, "repeated here"),
                    );
                }
                columns.push(Column { name, unit, span });
            }
            header = Some(columns);
            continue;
        };
        if cells.len() != columns.len() {
            errors.push(
                Diagnostic::error(
                    Code::BadData,
                    format!(
                        "row {} of {label} has {} cells; the header has {}",
                        k + 1,
                        cells.len(),
                        columns.len()
                    ),
                )
                .with_label(
                    Span::new(file, line_start, line_start + line.len()),
                    "this row",
                ),
            );
            continue;
        }
        let mut row = Vec::new();
        for (j, (text, start, end)) in cells.into_iter().enumerate() {
            let span = Span::new(file, start, end);
            let value = if text.is_empty() || text == "NA" {
                None
            } else {
                match text.parse::<f64>() {
                    Ok(v) if v.is_finite() => Some(v),
                    _ => {
                        errors.push(
                            Diagnostic::error(
                                Code::BadData,
                                format!("`{text}` in column `{}`, row {} of {label}, is not a number", columns[j].name, k + 1),
                            )
                            .with_label(span, "a number belongs here")
                            .with_help("write a finite number, or leave the cell empty (or NA) for a missing value"),
                        );
                        None
                    }
                }
            };
            row.push(Cell { value, span });
        }
        rows.push(Row {
            line: k + 1,
            cells: row,
        });
    }
    let Some(columns) = header else {
        return Err(vec![
            Diagnostic::error(Code::BadData, format!("{label} has no header line"))
                .with_path(label),
        ]);
    };
    if rows.is_empty() {
        errors.push(
            Diagnostic::error(Code::BadData, format!("{label} has no data rows"))
                .with_label(columns[0].span, "only a header"),
        );
    }
    if errors.is_empty() {
        Ok(Table {
            file,
            label: label.to_string(),
            columns,
            rows,
        })
    } else {
        Err(errors)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnostics::SourceMap;

    #[test]
    fn cells_keep_their_spans_and_units() {
        let text = "S [mM], v\n# comment\n1.5, 2\n, NA\n";
        let mut map = SourceMap::new();
        let id = map.add("d.csv".into(), text.into());
        let t = parse_table(text, id, "d.csv", false).unwrap();
        assert_eq!(t.columns[0].name, "S");
        assert!(t.columns[0].unit.is_some());
        assert_eq!(t.rows.len(), 2);
        assert_eq!(t.rows[0].line, 3);
        let c = &t.rows[0].cells[1];
        assert_eq!(&text[c.span.start..c.span.end], "2");
        assert_eq!(t.rows[1].cells[0].value, None);
        assert_eq!(t.rows[1].cells[1].value, None);
    }

    #[test]
    fn text_where_a_number_belongs_is_located() {
        let text = "S,v\n1,abc\n";
        let mut map = SourceMap::new();
        let id = map.add("d.csv".into(), text.into());
        let e = parse_table(text, id, "d.csv", false).unwrap_err();
        let span = e[0].primary_span().unwrap();
        assert_eq!(&text[span.start..span.end], "abc");
    }
}
