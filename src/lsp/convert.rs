//! Between the protocol's names for things (file URIs, ranges) and the
//! compiler's (paths, byte spans).

use super::analysis::Analysis;
use crate::diagnostics::Span;
use lsp_types::{Location, Range, Uri};
use std::path::{Path, PathBuf};
use std::str::FromStr;

/// The path a `file:` URI names (percent-decoded); `None` for any other
/// scheme or a malformed escape.
pub fn uri_to_path(uri: &Uri) -> Option<PathBuf> {
    let text = uri.as_str();
    let rest = text.strip_prefix("file://")?;
    // `file://host/path`: only the local host is a path here.
    let rest = rest.strip_prefix("localhost").unwrap_or(rest);
    let bytes = rest.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] == b'%' {
            let hex = rest.get(i + 1..i + 3)?;
            out.push(u8::from_str_radix(hex, 16).ok()?);
            i += 3;
        } else {
            out.push(bytes[i]);
            i += 1;
        }
    }
    let decoded = String::from_utf8(out).ok()?;
    Some(PathBuf::from(decoded))
}

/// The `file:` URI of an absolute path, with every byte outside the
/// unreserved set and `/` percent-encoded.
pub fn path_to_uri(path: &Path) -> Option<Uri> {
    // `use "../x.mech"` joins to `a/../x.mech`: the URI names `x.mech`.
    let normalized = crate::model::source::normalize(path).unwrap_or_else(|| path.to_path_buf());
    let text = normalized.to_str()?;
    let mut out = String::from("file://");
    for b in text.bytes() {
        if b.is_ascii_alphanumeric() || b"/-._~".contains(&b) {
            out.push(b as char);
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    Uri::from_str(&out).ok()
}

/// The protocol range of a span of file `span.file` of `analysis`.
pub fn range_of(analysis: &Analysis, span: Span) -> Option<Range> {
    let file = analysis.files().get(span.file.0 as usize)?;
    Some(file.lines.range(&file.text, span.start, span.end))
}

/// Where a span of `analysis` is, for go-to and references.
pub fn location_of(
    analysis: &Analysis,
    span: Span,
    uri_of: &dyn Fn(&Path) -> Option<Uri>,
) -> Option<Location> {
    let file = analysis.files().get(span.file.0 as usize)?;
    Some(Location::new(
        uri_of(&file.path)?,
        file.lines.range(&file.text, span.start, span.end),
    ))
}
