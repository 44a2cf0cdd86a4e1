//! `ratewright lsp` driven end to end by a real client library (pygls's
//! language client, tests/python/lsp_client.py) over stdio, its answers
//! checked against the command line on the same texts: diagnostics against
//! `check --format json`, formatting against `fmt`, hover values and names
//! against `emit -t json`. Also: the TextMate grammar of editors/vscode run
//! by a real engine (vscode-textmate with vscode-oniguruma) over every
//! model and fixture.

mod common;

use common::{bin, ratewright, root};
use serde_json::Value;
use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;
use std::process::Command;

const LIB: &str = "# Shared enzyme parts
species E = 0.02 uM \"free enzyme\"
param kcat = 150 /s \"turnover\"
";

const MAIN: &str = "mechanism demo \"a test mechanism\"
units concentration uM, time s

use \"lib.mech\"

species S = 2 mM \"substrate\"
species ES
species P

param k1 = 5 /uM/s \"binding\"
param km1 = 60 /s

step bind E + S <=> ES with k1, km1
step cat ES -> E + P with kcat

total E_t = E + ES
observe A340 = 0.00622 * P
";

/// A model that is never opened, sharing lib.mech: references and rename
/// must reach it too.
const OTHER: &str = "# Another mechanism on the same parts
use \"lib.mech\"
species F
step slow E -> F with kcat
";

/// Runs the client session once per test binary; its record is shared.
fn session() -> &'static (tempfile::TempDir, Value) {
    static SESSION: std::sync::OnceLock<(tempfile::TempDir, Value)> = std::sync::OnceLock::new();
    SESSION.get_or_init(|| {
        common::ensure_python_module("pygls", "pygls>=2,<3");
        let dir = tempfile::tempdir().expect("a temporary folder");
        std::fs::write(dir.path().join("lib.mech"), LIB).unwrap();
        std::fs::write(dir.path().join("main.mech"), MAIN).unwrap();
        std::fs::write(dir.path().join("other.mech"), OTHER).unwrap();
        let out = Command::new("python3")
            .arg(root().join("tests/python/lsp_client.py"))
            .arg(bin())
            .arg(dir.path())
            .output()
            .expect("python3 runs");
        assert!(
            out.status.success(),
            "the client session failed:\n{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let record: Value = serde_json::from_slice(&out.stdout).expect("the client prints JSON");
        (dir, record)
    })
}

/// `ratewright ARGS` on a file `name` holding `text`, written beside
/// lib.mech so its `use` line resolves as the document's does.
fn on_text(dir: &Path, name: &str, text: &str, args: &[&str]) -> std::process::Output {
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    let mut all: Vec<&str> = args.to_vec();
    let shown = path.to_str().unwrap().to_string();
    all.push(&shown);
    ratewright(&all)
}

fn check_json(dir: &Path, name: &str, text: &str) -> Value {
    let out = on_text(dir, name, text, &["check", "--format", "json"]);
    serde_json::from_slice(&out.stdout).expect("check prints JSON")
}

fn emit_json(dir: &Path, text: &str) -> Value {
    let out = on_text(dir, "emitted.mech", text, &["emit", "-t", "json"]);
    assert!(
        out.status.success(),
        "emit failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("emit prints JSON")
}

/// The file a check label names, as the document's file names it.
fn as_document_file(file: &str, checked: &str) -> String {
    if file.ends_with(checked) {
        "main.mech".to_string()
    } else {
        Path::new(file)
            .file_name()
            .unwrap()
            .to_string_lossy()
            .into_owned()
    }
}

#[test]
fn diagnostics_are_those_of_check_for_every_text_the_server_saw() {
    let (dir, record) = session();
    let snapshots = record["snapshots"].as_array().unwrap();
    assert!(snapshots.len() >= 7, "{snapshots:?}");
    let mut codes_seen = BTreeSet::new();
    for (n, snapshot) in snapshots.iter().enumerate() {
        let text = snapshot["text"].as_str().unwrap();
        let checked = format!("snapshot{n}.mech");
        let report = check_json(dir.path(), &checked, text);
        let expected: Vec<&Value> = report["diagnostics"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|d| d["file"].as_str().is_some_and(|f| f.ends_with(&checked)))
            .collect();
        let got = snapshot["diagnostics"].as_array().unwrap();
        let label = snapshot["label"].as_str().unwrap();
        assert_eq!(
            got.len(),
            expected.len(),
            "{label}: {got:?} vs {expected:?}"
        );
        for (g, e) in got.iter().zip(&expected) {
            codes_seen.insert(e["code"].as_str().unwrap().to_string());
            assert_eq!(g["code"], e["code"], "{label}");
            let severity = if e["severity"] == "error" { 1 } else { 2 };
            assert_eq!(g["severity"], severity, "{label}");
            let message = match e["help"].as_str() {
                Some(help) => format!("{}\nhelp: {help}", e["message"].as_str().unwrap()),
                None => e["message"].as_str().unwrap().to_string(),
            };
            assert_eq!(g["message"], message.as_str(), "{label}");
            // The texts are ASCII: UTF-16 columns are character columns.
            assert_eq!(g["range"]["start"]["line"], e["line"].as_u64().unwrap() - 1);
            assert_eq!(
                g["range"]["start"]["character"],
                e["column"].as_u64().unwrap() - 1
            );
            let related = g["relatedInformation"].as_array().unwrap();
            let labels = e["labels"].as_array().unwrap();
            assert_eq!(related.len(), labels.len(), "{label}");
            for (r, l) in related.iter().zip(labels) {
                assert_eq!(r["message"], l["message"]);
                let uri = r["location"]["uri"].as_str().unwrap();
                let file = as_document_file(l["file"].as_str().unwrap(), &checked);
                assert!(uri.ends_with(&format!("/{file}")), "{uri} vs {file}");
                let range = &r["location"]["range"];
                assert_eq!(range["start"]["line"], l["line"].as_u64().unwrap() - 1);
                assert_eq!(
                    range["start"]["character"],
                    l["column"].as_u64().unwrap() - 1
                );
                assert_eq!(range["end"]["line"], l["end_line"].as_u64().unwrap() - 1);
                assert_eq!(
                    range["end"]["character"],
                    l["end_column"].as_u64().unwrap() - 1
                );
            }
        }
        // What the code actions were for is gone after them, as check sees it.
        let codes: Vec<&str> = expected.iter().filter_map(|d| d["code"].as_str()).collect();
        match label {
            "typo fixed by its code action" | "unknown species declared by its code action" => {
                assert!(!codes.contains(&"E0201"), "{label}: {codes:?}")
            }
            "reverse constant added by its code action" => {
                assert!(!codes.contains(&"E0401"), "{label}: {codes:?}")
            }
            _ => {}
        }
    }
    // The session went through the mistakes it was meant to.
    for code in ["E0201", "E0401"] {
        assert!(codes_seen.contains(code), "{codes_seen:?}");
    }
    assert_eq!(record["capabilities"]["textDocumentSync"]["change"], 2);
}

#[test]
fn half_typed_text_never_breaks_a_request() {
    let (_, record) = session();
    let states = record["half_typed"].as_array().unwrap();
    assert!(states.len() > 10);
    for state in states {
        assert!(state["error"].is_null(), "{state}");
        assert!(state["tokens"].as_u64().unwrap() > 0);
        // Hover on a species keeps working while another line is broken.
        assert!(
            state["hover"].as_str().is_some_and(|h| h.contains("`S`")),
            "{state}"
        );
    }
    // Once the step names `kcat`, go-to lands in lib.mech on its declaration.
    let last = &states.last().unwrap()["definition"];
    assert!(last["uri"].as_str().unwrap().ends_with("/lib.mech"));
    let line = LIB
        .lines()
        .position(|l| l.starts_with("param kcat"))
        .unwrap();
    assert_eq!(last["range"]["start"]["line"], line);
}

#[test]
fn mangled_models_get_an_answer_to_every_request() {
    let (_, record) = session();
    let mangled = &record["mangled"];
    assert!(mangled["files"].as_u64().unwrap() >= 15, "{mangled}");
    // Ten mangled texts per file, eleven requests each.
    assert_eq!(
        mangled["answered"].as_u64().unwrap(),
        mangled["files"].as_u64().unwrap() * 10 * 11
    );
    assert_eq!(mangled["internal_errors"], serde_json::json!([]));
}

fn number_after<'a>(text: &'a str, marker: &str) -> (f64, &'a str) {
    let at = text
        .find(marker)
        .unwrap_or_else(|| panic!("{marker:?} in {text}"));
    let rest = &text[at + marker.len()..];
    let line = rest.lines().next().unwrap();
    let (number, unit) = line.split_once(' ').unwrap_or((line, ""));
    (number.parse().unwrap(), unit.trim())
}

fn dimension_words(d: &Value) -> String {
    let mut parts = Vec::new();
    for (key, word) in [("concentration", "concentration"), ("time", "time")] {
        match d[key].as_i64().unwrap() {
            0 => {}
            1 => parts.push(word.to_string()),
            p => parts.push(format!("{word}^{p}")),
        }
    }
    parts.join(" · ")
}

#[test]
fn hover_values_are_those_of_the_compiled_model() {
    let (dir, record) = session();
    let text = record["hover_text"].as_str().unwrap();
    let model = emit_json(dir.path(), text);
    let hover = &record["hover"];
    let find = |list: &str, name: &str| -> Value {
        model[list]
            .as_array()
            .unwrap()
            .iter()
            .find(|x| x["name"] == name)
            .unwrap_or_else(|| panic!("{name} in {list}"))
            .clone()
    };
    let conc = model["units"]["concentration"].as_str().unwrap();
    // A species: its value as written and in the model's units.
    let s = hover["S"].as_str().unwrap();
    assert!(s.starts_with("**species** `S`"), "{s}");
    assert!(s.contains("as written: `2 mM`"), "{s}");
    let (value, unit) = number_after(s, "in model units: ");
    assert_eq!(value, find("species", "S")["initial"].as_f64().unwrap());
    assert_eq!(unit, conc);
    // A param: value, unit and dimension.
    let k1 = hover["k1"].as_str().unwrap();
    let param = find("params", "k1");
    let (value, unit) = number_after(k1, "in model units: ");
    assert_eq!(value, param["value"].as_f64().unwrap());
    assert_eq!(unit, param["unit"].as_str().unwrap());
    assert!(
        k1.contains(&format!(
            "dimension: {}",
            dimension_words(&param["dimension"])
        )),
        "{k1}"
    );
    // A step: its rate law, order and the dimensions its constants have.
    let bind = hover["bind"].as_str().unwrap();
    let step = find("steps", "bind");
    assert!(
        bind.contains(&format!(
            "rate law (mass action): `{}`",
            step["rate"].as_str().unwrap()
        )),
        "{bind} vs {step}"
    );
    let order = |side: &str| -> i64 {
        step[side]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| t["coefficient"].as_i64().unwrap())
            .sum()
    };
    assert!(
        bind.contains(&format!(
            "order: {} forward, {} reverse",
            order("reactants"),
            order("products")
        )),
        "{bind}"
    );
    let unit_of = |constant: &str| {
        find("params", constant)["unit"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert!(
        bind.contains(&format!(
            "forward constant needs {}; reverse constant needs {}",
            unit_of(step["forward_constant"].as_str().unwrap()),
            unit_of(step["reverse_constant"].as_str().unwrap())
        )),
        "{bind}"
    );
    // A total: its sum and its value.
    let total = find("totals", "E_t");
    let e_t = hover["E_t"].as_str().unwrap();
    let sum: Vec<&str> = total["coefficients"]
        .as_object()
        .unwrap()
        .keys()
        .map(String::as_str)
        .collect();
    assert!(
        e_t.contains(&format!("sum: `{}`", sum.join(" + "))),
        "{e_t}"
    );
    let (value, _) = number_after(e_t, "value: ");
    assert!(
        (value - total["value"].as_f64().unwrap()).abs() < 1e-12,
        "{e_t}"
    );
    // Names from the used file say where they come from.
    for (name, prefix) in [("E", "species E"), ("kcat", "param kcat")] {
        let h = hover[name].as_str().unwrap();
        let line = LIB.lines().position(|l| l.starts_with(prefix)).unwrap() + 1;
        assert!(h.contains(&format!("from `lib.mech`, line {line}")), "{h}");
    }
    assert!(
        hover["A340"]
            .as_str()
            .unwrap()
            .starts_with("**observable**")
    );
}

/// Every (line, column) where `name` stands as a word outside strings and
/// comments.
fn word_positions(text: &str, name: &str) -> BTreeSet<(usize, usize)> {
    let mut out = BTreeSet::new();
    for (l, line) in text.lines().enumerate() {
        let code = line.split('#').next().unwrap();
        let mut in_string = false;
        let chars: Vec<char> = code.chars().collect();
        let word = |c: char| c.is_alphanumeric() || c == '_';
        let mut i = 0;
        while i < chars.len() {
            if chars[i] == '"' {
                in_string = !in_string;
            } else if !in_string
                && (i == 0 || !word(chars[i - 1]))
                && chars[i..].starts_with(&name.chars().collect::<Vec<_>>())
                && chars
                    .get(i + name.chars().count())
                    .is_none_or(|c| !word(*c))
            {
                out.insert((l, i));
            }
            i += 1;
        }
    }
    out
}

fn located(locations: &Value, file: &str) -> BTreeSet<(usize, usize)> {
    locations
        .as_array()
        .unwrap()
        .iter()
        .filter(|l| l["uri"].as_str().is_some_and(|u| u.ends_with(file)))
        .map(|l| {
            (
                l["range"]["start"]["line"].as_u64().unwrap() as usize,
                l["range"]["start"]["character"].as_u64().unwrap() as usize,
            )
        })
        .collect()
}

#[test]
fn definition_references_and_rename_reach_the_used_file() {
    let (dir, record) = session();
    let text = record["hover_text"].as_str().unwrap();
    let definition = &record["definition_E"];
    assert!(definition["uri"].as_str().unwrap().ends_with("/lib.mech"));
    let lib_e = word_positions(LIB, "E");
    assert_eq!(
        BTreeSet::from([(
            definition["range"]["start"]["line"].as_u64().unwrap() as usize,
            definition["range"]["start"]["character"].as_u64().unwrap() as usize
        )]),
        lib_e
    );
    let references = &record["references_E"];
    assert_eq!(located(references, "/lib.mech"), lib_e);
    assert_eq!(located(references, "/main.mech"), word_positions(text, "E"));
    assert_eq!(
        located(references, "/other.mech"),
        word_positions(OTHER, "E")
    );

    // Rename: every `kcat` of both files, each edit naming its version.
    let changes = record["rename"]["documentChanges"].as_array().unwrap();
    let mut renamed: BTreeMap<String, String> = BTreeMap::new();
    for change in changes {
        let uri = change["textDocument"]["uri"].as_str().unwrap();
        let (file, original) = if uri.ends_with("/lib.mech") {
            ("lib.mech", LIB)
        } else if uri.ends_with("/other.mech") {
            ("other.mech", OTHER)
        } else {
            ("main.mech", text)
        };
        // The open documents' versions; none for a file only on disk.
        let version = change["textDocument"]["version"].as_i64();
        let expected_version = match file {
            "lib.mech" => Some(1),
            "other.mech" => None,
            _ => record["snapshots"].as_array().unwrap().last().unwrap()["version"].as_i64(),
        };
        assert_eq!(version, expected_version, "{file}");
        let edits = change["edits"].as_array().unwrap();
        let at: BTreeSet<(usize, usize)> = edits
            .iter()
            .map(|e| {
                (
                    e["range"]["start"]["line"].as_u64().unwrap() as usize,
                    e["range"]["start"]["character"].as_u64().unwrap() as usize,
                )
            })
            .collect();
        assert_eq!(at, word_positions(original, "kcat"), "{file}");
        let mut lines: Vec<String> = original.lines().map(str::to_string).collect();
        for (line, column) in at.iter().rev() {
            let l = &mut lines[*line];
            l.replace_range(*column..*column + 4, "k_cat");
        }
        renamed.insert(file.to_string(), lines.join("\n") + "\n");
    }
    assert_eq!(
        renamed.keys().collect::<Vec<_>>(),
        ["lib.mech", "main.mech", "other.mech"]
    );
    // The renamed files check as the originals did.
    let renamed_dir = tempfile::tempdir().unwrap();
    std::fs::write(renamed_dir.path().join("lib.mech"), &renamed["lib.mech"]).unwrap();
    for (file, original) in [("main.mech", text), ("other.mech", OTHER)] {
        let after = check_json(renamed_dir.path(), file, &renamed[file]);
        let before = check_json(dir.path(), &format!("before_rename_{file}"), original);
        assert_eq!(after["errors"], before["errors"], "{file}");
        assert_eq!(after["warnings"], before["warnings"], "{file}");
    }
    assert_eq!(record["prepare_rename"]["placeholder"], "kcat");
    assert_eq!(record["rename_to_taken"]["code"], -32803);
}

#[test]
fn completion_offers_names_units_and_keywords_of_the_language() {
    let (dir, record) = session();
    let text = record["hover_text"].as_str().unwrap();
    let model = emit_json(dir.path(), text);
    let mut declared: BTreeMap<String, &str> = BTreeMap::new();
    for (list, kind) in [
        ("species", "species"),
        ("fixed", "fixed species"),
        ("params", "param"),
        ("steps", "step"),
        ("totals", "total"),
        ("observables", "observable"),
    ] {
        for item in model[list].as_array().unwrap() {
            declared.insert(item["name"].as_str().unwrap().to_string(), kind);
        }
    }
    let offered: BTreeMap<String, &str> = record["completion_names"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| {
            (
                i["label"].as_str().unwrap().to_string(),
                i["detail"].as_str().unwrap(),
            )
        })
        .collect();
    assert_eq!(offered, declared);
    // Every unit offered is one the compiler accepts after a number.
    let units: Vec<String> = record["completion_units"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["label"].as_str().unwrap().to_string())
        .collect();
    assert!(units.len() >= 9);
    let probe: String = units
        .iter()
        .enumerate()
        .map(|(n, u)| format!("param unit_probe{n} = 1 {u}\n"))
        .collect();
    let report = check_json(dir.path(), "units_probe.mech", &probe);
    assert_eq!(report["errors"], 0, "{report}");
    // Every keyword offered starts a statement in the grammar.
    let grammar = std::fs::read_to_string(root().join("grammar/mechanism.pest")).unwrap();
    for item in record["completion_keywords"].as_array().unwrap() {
        let word = item["label"].as_str().unwrap();
        assert!(
            grammar.contains(&format!("kw_{word} ")),
            "{word} is not a keyword of the grammar"
        );
        assert_eq!(item["kind"], 14);
    }
}

#[test]
fn symbols_and_semantic_tokens_name_every_declaration_by_kind() {
    let (dir, record) = session();
    let text = record["tokens_text"].as_str().unwrap();
    let model = emit_json(dir.path(), text);
    let local: BTreeSet<String> = ["species", "params", "steps", "totals", "observables"]
        .iter()
        .flat_map(|l| model[*l].as_array().unwrap().iter())
        .map(|i| i["name"].as_str().unwrap().to_string())
        // The outline is the document's; lib.mech's names are not in it.
        .filter(|n| word_positions(LIB, n).is_empty())
        .collect();
    let symbols = record["symbols"].as_array().unwrap();
    let children: BTreeSet<String> = symbols
        .iter()
        .filter(|g| g["name"] != "mechanism")
        .flat_map(|g| g["children"].as_array().unwrap().iter())
        .map(|c| c["name"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(children, local);

    // Tokens: in order, one line each, never overlapping; each name
    // coloured by its kind in the compiled model.
    let legend: Vec<String> =
        record["capabilities"]["semanticTokensProvider"]["legend"]["tokenTypes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| t.as_str().unwrap().to_string())
            .collect();
    let data: Vec<u64> = record["tokens"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    let lines: Vec<&str> = text.lines().collect();
    let (mut line, mut column) = (0usize, 0usize);
    let mut previous_end = (0usize, 0usize);
    let mut kinds: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for token in data.chunks(5) {
        if token[0] > 0 {
            line += token[0] as usize;
            column = token[1] as usize;
        } else {
            column += token[1] as usize;
        }
        assert!((line, column) >= previous_end, "overlap at {line}:{column}");
        let end = column + token[2] as usize;
        assert!(end <= lines[line].len());
        previous_end = (line, end);
        kinds
            .entry(lines[line][column..end].to_string())
            .or_default()
            .insert(legend[token[3] as usize].clone());
    }
    for (list, kind) in [
        ("species", "variable"),
        ("params", "parameter"),
        ("steps", "function"),
        ("totals", "property"),
    ] {
        for item in model[list].as_array().unwrap() {
            let name = item["name"].as_str().unwrap();
            assert_eq!(
                kinds.get(name),
                Some(&BTreeSet::from([kind.to_string()])),
                "{name}"
            );
        }
    }
    assert!(kinds["species"].contains("keyword"));
    assert!(kinds["/uM/s"].contains("type"));
}

#[test]
fn requests_are_answered_against_the_version_they_name() {
    let (_, record) = session();
    // A kept earlier version: answered from its text (the hovered position
    // holds `km1` there, another name now).
    let old = record["snapshots"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["version"] == record["old_version"])
        .unwrap();
    let old_text = old["text"].as_str().unwrap();
    let hover = &record["old_version_hover"];
    assert!(
        hover["contents"]["value"]
            .as_str()
            .unwrap()
            .starts_with("**param** `km1`")
    );
    let line = hover["range"]["start"]["line"].as_u64().unwrap() as usize;
    assert!(old_text.lines().nth(line).unwrap().starts_with("param km1"));
    let now = record["hover_text"].as_str().unwrap();
    assert!(!now.lines().nth(line).unwrap().starts_with("param km1"));
    // A version no longer held: ContentModified.
    assert_eq!(record["gone_version"]["code"], -32801);
    // A change naming an older version was refused, not applied.
    assert!(
        record["after_stale_change_hover"]
            .as_str()
            .unwrap()
            .starts_with("**species** `S`")
    );
    assert!(
        record["log"]
            .as_array()
            .unwrap()
            .iter()
            .any(|m| m.as_str().unwrap().contains("refused"))
    );
    assert_eq!(record["exit_code"], 0);
}

#[test]
fn formatting_is_the_layout_of_fmt_for_the_whole_and_a_range() {
    let (dir, record) = session();
    let before = record["format_before"].as_str().unwrap();
    let path = dir.path().join("formatted.mech");
    std::fs::write(&path, before).unwrap();
    let out = ratewright(&["fmt", path.to_str().unwrap()]);
    assert!(out.status.success());
    let by_fmt = std::fs::read_to_string(&path).unwrap();
    assert_eq!(record["format_whole"].as_str().unwrap(), by_fmt);
    assert_ne!(before, by_fmt);
    // A range: its line as fmt lays it out, every other line untouched.
    let ranged = record["format_range"].as_str().unwrap();
    let line = record["format_range_line"].as_u64().unwrap() as usize;
    let fmt_line = by_fmt.lines().find(|l| l.starts_with("param k1 ")).unwrap();
    for (n, (r, b)) in ranged.lines().zip(before.lines()).enumerate() {
        if n == line {
            assert_eq!(r, fmt_line);
            assert_ne!(r, b);
        } else {
            assert_eq!(r, b, "line {n}");
        }
    }
}

/// Every `.mech` file under `dir`, sorted.
fn mech_files(dir: &Path, out: &mut Vec<std::path::PathBuf>) {
    let mut entries: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    entries.sort();
    for path in entries {
        if path.is_dir() {
            mech_files(&path, out);
        } else if path.extension().is_some_and(|x| x == "mech") {
            out.push(path);
        }
    }
}

/// The scopes of each file's lines, from the TextMate engine VS Code uses.
fn tokenised(files: &[std::path::PathBuf]) -> Value {
    let modules = root().join("target/npm-textmate");
    common::ensure_npm_packages(&modules, &["vscode-textmate", "vscode-oniguruma"]);
    let out = Command::new("node")
        .arg(root().join("tests/node/tokenise.js"))
        .arg(root().join("editors/vscode/syntaxes/mech.tmLanguage.json"))
        .args(files)
        .env("NODE_PATH", modules.join("node_modules"))
        .output()
        .expect("node runs");
    assert!(
        out.status.success(),
        "tokenising failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("the tokeniser prints JSON")
}

#[test]
fn the_textmate_grammar_gives_every_character_of_every_model_a_scope() {
    let mut files = Vec::new();
    mech_files(&root().join("models"), &mut files);
    mech_files(&root().join("tests/fixtures"), &mut files);
    assert!(files.len() >= 15, "{files:?}");
    let tokens = tokenised(&files);
    for file in &files {
        let text = std::fs::read_to_string(file).unwrap();
        let lines: Vec<&str> = text.split('\n').collect();
        let per_line = tokens[file.to_str().unwrap()].as_array().unwrap();
        assert_eq!(per_line.len(), lines.len(), "{}", file.display());
        for (n, (line, line_tokens)) in lines.iter().zip(per_line).enumerate() {
            let chars: Vec<char> = line.chars().collect();
            let mut scoped = vec![false; chars.len()];
            for t in line_tokens.as_array().unwrap() {
                // A token with only the file's scope is text the grammar
                // did not recognise.
                if t["scopes"].as_array().unwrap().len() < 2 {
                    continue;
                }
                // The engine counts UTF-16 units; the files' non-ASCII
                // characters are all in the basic plane.
                let (start, end) = (t["start"].as_u64().unwrap(), t["end"].as_u64().unwrap());
                for s in scoped.iter_mut().take(end as usize).skip(start as usize) {
                    *s = true;
                }
            }
            for (c, ok) in chars.iter().zip(&scoped) {
                assert!(
                    ok | c.is_whitespace(),
                    "{}:{}: `{c}` has no scope in `{line}`",
                    file.display(),
                    n + 1
                );
            }
        }
    }
}

#[test]
fn scopes_of_one_model_as_a_snapshot() {
    let file = root().join("models/kinase_cycle.mech");
    let tokens = tokenised(std::slice::from_ref(&file));
    let text = std::fs::read_to_string(&file).unwrap();
    let mut shown = String::new();
    for (n, (line, line_tokens)) in text
        .split('\n')
        .zip(tokens[file.to_str().unwrap()].as_array().unwrap())
        .enumerate()
    {
        for t in line_tokens.as_array().unwrap() {
            let (start, end) = (
                t["start"].as_u64().unwrap() as usize,
                t["end"].as_u64().unwrap() as usize,
            );
            let piece: String = line.chars().skip(start).take(end - start).collect();
            if piece.trim().is_empty() {
                continue;
            }
            let scopes: Vec<&str> = t["scopes"]
                .as_array()
                .unwrap()
                .iter()
                .skip(1)
                .map(|s| s.as_str().unwrap())
                .collect();
            shown.push_str(&format!(
                "{}:{start} {piece:?} {}\n",
                n + 1,
                scopes.join(" ")
            ));
        }
    }
    insta::assert_snapshot!("kinase_cycle_scopes", shown);
}

/// `ratewright lsp` with `input` on standard input: (exit code, stderr).
fn lsp_with_input(input: &[u8]) -> (Option<i32>, String) {
    use std::io::Write;
    let mut child = Command::new(bin())
        .arg("lsp")
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("the binary starts");
    child.stdin.take().unwrap().write_all(input).unwrap();
    let out = child.wait_with_output().unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn framed(messages: &[Value]) -> Vec<u8> {
    let mut out = Vec::new();
    for m in messages {
        let body = m.to_string();
        out.extend(format!("Content-Length: {}\r\n\r\n{body}", body.len()).into_bytes());
    }
    out
}

#[test]
fn a_broken_or_ended_connection_is_a_clear_error_and_exit_status_1() {
    let (code, stderr) = lsp_with_input(b"");
    assert_eq!(code, Some(1));
    assert!(
        stderr.contains("the input ended before the client's `initialize`"),
        "{stderr}"
    );
    let (code, stderr) = lsp_with_input(b"not a header\r\n\r\n");
    assert_eq!(code, Some(1));
    assert!(
        stderr.contains("not Language Server Protocol messages"),
        "{stderr}"
    );
    // The protocol's exit status: 0 after shutdown, 1 for an exit without.
    let initialize = serde_json::json!({"jsonrpc": "2.0", "id": 1, "method": "initialize",
        "params": {"processId": null, "rootUri": null, "capabilities": {}}});
    let initialized = serde_json::json!({"jsonrpc": "2.0", "method": "initialized", "params": {}});
    let shutdown = serde_json::json!({"jsonrpc": "2.0", "id": 2, "method": "shutdown"});
    let exit = serde_json::json!({"jsonrpc": "2.0", "method": "exit"});
    let (code, _) = lsp_with_input(&framed(&[
        initialize.clone(),
        initialized.clone(),
        shutdown,
        exit.clone(),
    ]));
    assert_eq!(code, Some(0));
    let (code, _) = lsp_with_input(&framed(&[initialize, initialized, exit]));
    assert_eq!(code, Some(1));
}
