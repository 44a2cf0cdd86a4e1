//! Sources: several files in one string, `use` through the trait, and files
//! identified by what they are rather than how they are named.

use super::*;
use crate::model::load_with;

#[test]
fn a_bundle_holds_several_files_and_use_resolves_between_them() {
    let files = InMemory::from_bundle(
        "=== file lab/main.mech
use \"parts/rates.mech\"
species A = 1 uM
species B
step r A -> B with k
=== file lab/parts/rates.mech
use \"../shared.mech\"
param k = 2 /s
=== file lab/shared.mech
species C = 3 uM
",
    );
    let loaded = load_with(&files, Path::new("lab/main.mech"));
    assert!(
        !loaded.diagnostics.iter().any(|d| d.is_error()),
        "{:?}",
        loaded.diagnostics
    );
    let model = loaded.model.expect("lowers");
    // The included files' statements stand at their `use` lines.
    let species: Vec<&str> = model.species.iter().map(|s| s.name.as_str()).collect();
    assert_eq!(species, ["C", "A", "B"]);
    assert_eq!(model.params[0].value, 2.0);
    let shown: Vec<String> = loaded
        .sources
        .files()
        .iter()
        .map(|f| f.path.display().to_string())
        .collect();
    assert_eq!(
        shown,
        ["lab/main.mech", "lab/parts/rates.mech", "lab/shared.mech"]
    );
}

#[test]
fn a_cycle_and_a_missing_file_in_memory_are_located_at_the_use_line() {
    let files = InMemory::from_bundle(
        "=== file a.mech
use \"b.mech\"
species A
=== file b.mech
use \"./a.mech\"
use \"gone.mech\"
",
    );
    let loaded = load_with(&files, Path::new("a.mech"));
    assert!(loaded.model.is_none());
    let codes: Vec<Code> = loaded.diagnostics.iter().map(|d| d.code).collect();
    assert_eq!(codes, [Code::UseCycle, Code::FileRead]);
    for (d, named) in loaded.diagnostics.iter().zip(["./a.mech", "gone.mech"]) {
        let span = d.primary_span().expect("located");
        let file = loaded.sources.get(span.file).unwrap();
        assert_eq!(file.path, Path::new("b.mech"));
        assert!(file.text[span.start..span.end].contains(named), "{d:?}");
    }
}

#[test]
fn a_byte_order_mark_is_dropped_and_remembered() {
    let read = from_text("\u{FEFF}species A", Path::new("m.mech"));
    assert_eq!(read.text, "species A");
    assert!(read.had_bom);
    let err = decode(vec![b'a', 0xB5, b'M'], Path::new("m.mech")).unwrap_err();
    assert_eq!(err.diagnostic.code, Code::NotUtf8);
    let excerpt = err.excerpt.expect("shown");
    assert_eq!(excerpt.at, 1..4);
    assert_eq!(excerpt.text, "a\u{FFFD}M");
}

/// Issue 23, finding 13: a file included twice through a hard link was
/// read twice, and its names declared twice (E0202).
#[cfg(unix)]
#[test]
fn a_file_reached_through_a_hard_link_is_read_once() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("b.mech"), "species B = 1 uM\n").unwrap();
    std::fs::hard_link(dir.path().join("b.mech"), dir.path().join("c.mech")).unwrap();
    std::fs::write(
        dir.path().join("a.mech"),
        "use \"b.mech\"\nuse \"c.mech\"\nspecies A\nparam k = 1 /s\nstep r B -> A with k\n",
    )
    .unwrap();
    let loaded = crate::model::load_path(&dir.path().join("a.mech"));
    assert!(
        !loaded.diagnostics.iter().any(|d| d.is_error()),
        "{:?}",
        loaded.diagnostics
    );
    assert_eq!(loaded.sources.files().len(), 2);
    assert_eq!(loaded.model.unwrap().species.len(), 2);
    assert_eq!(
        Disk.identity(&dir.path().join("b.mech")),
        Disk.identity(&dir.path().join("c.mech"))
    );
}

#[test]
fn an_overlay_replaces_one_file_and_reads_the_rest_from_its_base() {
    let mut base = InMemory::new();
    base.insert("m.mech", "use \"k.mech\"\nspecies A\n");
    base.insert("k.mech", "param k = 4 /s\n");
    let over = Overlay {
        base: &base,
        path: PathBuf::from("m.mech"),
        text: "use \"k.mech\"\nspecies A = 2 uM\nobserve twice = 2 * A\n".into(),
    };
    let model = load_with(&over, Path::new("m.mech")).model.expect("lowers");
    assert_eq!(model.species[0].initial, 2.0);
    assert_eq!(model.observables.len(), 1);
    assert_eq!(model.params[0].value, 4.0);
}
