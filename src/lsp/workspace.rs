//! The workspace: the folders the client opened, and the mechanism files
//! in them that are not open, so references and rename also reach a file
//! that `use`s the renamed name's file without being open in the editor.
//!
//! Invariants: the walk skips hidden folders and build output, follows no
//! symbolic link to a folder, and stops at a bound of files and depth, so a
//! folder opened by mistake (a home directory) costs a bounded time.

use std::path::{Path, PathBuf};

/// Files beyond this many are not looked at.
const MAX_FILES: usize = 2_000;
/// Folders nested deeper than this are not entered.
const MAX_DEPTH: usize = 8;

/// The folders an `initialize` names (`workspaceFolders`, else `rootUri`).
pub fn roots(params: &serde_json::Value) -> Vec<PathBuf> {
    let uri_path = |v: &serde_json::Value| {
        v.as_str()
            .and_then(|u| u.parse::<lsp_types::Uri>().ok())
            .and_then(|u| super::convert::uri_to_path(&u))
    };
    let folders: Vec<PathBuf> = params["workspaceFolders"]
        .as_array()
        .map(|list| list.iter().filter_map(|f| uri_path(&f["uri"])).collect())
        .unwrap_or_default();
    if folders.is_empty() {
        uri_path(&params["rootUri"]).into_iter().collect()
    } else {
        folders
    }
}

/// Every `.mech` file under `roots`, sorted, within the bounds.
pub fn mechanism_files(roots: &[PathBuf]) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for root in roots {
        walk(root, 0, &mut out);
    }
    out.sort();
    out.dedup();
    out
}

fn walk(folder: &Path, depth: usize, out: &mut Vec<PathBuf>) {
    if depth > MAX_DEPTH || out.len() >= MAX_FILES {
        return;
    }
    let Ok(entries) = std::fs::read_dir(folder) else {
        return;
    };
    let mut entries: Vec<_> = entries.filter_map(Result::ok).collect();
    entries.sort_by_key(|e| e.file_name());
    for entry in entries {
        let name = entry.file_name();
        let name = name.to_string_lossy();
        let Ok(kind) = entry.file_type() else {
            continue;
        };
        if kind.is_dir() {
            if !name.starts_with('.') && name != "target" && name != "node_modules" {
                walk(&entry.path(), depth + 1, out);
            }
        } else if name.ends_with(".mech") && out.len() < MAX_FILES {
            out.push(entry.path());
        }
    }
}
