//! Folder-driven definition tests: every shipped definition compiles and is documented,
//! every fixture in `valid/` compiles, every fixture in `invalid/` fails with the words its
//! first line expects (`# expect: a | b` — each `|`-separated part must appear in the
//! message), and the registry loads, overrides and reports errors as documented.

use std::fs;
use std::path::{Path, PathBuf};

use settle::parser::{Definition, DefinitionError, Origin, Registry};

fn fixtures(kind: &str) -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/parsers").join(kind);
    let mut files: Vec<PathBuf> = fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.expect("readable folder entry").path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    files.sort();
    files
}

#[test]
fn every_shipped_definition_compiles_and_is_described() {
    let reg = Registry::builtin();
    let names: Vec<&str> = reg.definitions().iter().map(|d| d.name()).collect();
    assert_eq!(names, vec!["table", "csv", "tarn"]);
    let shipped = Path::new(env!("CARGO_MANIFEST_DIR")).join("parsers");
    let readme = fs::read_to_string(shipped.join("README.md")).expect("parsers/README.md exists");
    for d in reg.definitions() {
        assert_eq!(d.origin(), &Origin::Builtin);
        assert!(!d.description().is_empty(), "{} has a description", d.name());
        // The embedded text is the file in parsers/ (provenance hashing relies on it).
        let on_disk = fs::read_to_string(shipped.join(format!("{}.toml", d.name())))
            .expect("shipped definition file");
        assert_eq!(d.source_text(), on_disk);
        assert!(readme.contains(&format!("`{}`", d.name())), "README mentions {}", d.name());
        // Each one also compiles from its file.
        let again = Definition::from_file(&shipped.join(format!("{}.toml", d.name())))
            .unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(again.engine(), d.engine());
    }
    assert_eq!(reg.get("tarn").map(Definition::engine), Some("lines"));
    assert_eq!(reg.get("csv").map(Definition::engine), Some("table"));
    assert!(reg.get("nope").is_none());
}

#[test]
fn every_shipped_toml_file_is_embedded() {
    let shipped = Path::new(env!("CARGO_MANIFEST_DIR")).join("parsers");
    let reg = Registry::builtin();
    for entry in fs::read_dir(&shipped).expect("parsers/ exists") {
        let path = entry.expect("entry").path();
        if path.extension().is_some_and(|x| x == "toml") {
            let stem = path.file_stem().expect("stem").to_string_lossy().into_owned();
            assert!(reg.get(&stem).is_some(), "{} is not in BUILTIN", path.display());
        }
    }
}

#[test]
fn every_valid_fixture_compiles() {
    let files = fixtures("valid");
    assert!(files.len() >= 5);
    for f in files {
        let d = Definition::from_file(&f).unwrap_or_else(|e| panic!("{e}"));
        assert!(matches!(d.origin(), Origin::File(p) if p == &f));
    }
}

#[test]
fn every_invalid_fixture_fails_with_the_expected_words() {
    let files = fixtures("invalid");
    assert!(files.len() >= 20, "found {}", files.len());
    for f in files {
        let text = fs::read_to_string(&f).expect("fixture readable");
        let first = text.lines().next().unwrap_or_default();
        let expect = first
            .strip_prefix("# expect:")
            .unwrap_or_else(|| panic!("{}: first line must be `# expect: ...`", f.display()));
        let err = match Definition::from_file(&f) {
            Ok(_) => panic!("{} compiled but should fail", f.display()),
            Err(e) => e.to_string(),
        };
        let file_name = f.file_name().expect("name").to_string_lossy().into_owned();
        assert!(err.contains(&file_name), "{file_name}: message names the file: {err}");
        for part in expect.split('|').map(str::trim).filter(|p| !p.is_empty()) {
            assert!(err.contains(part), "{file_name}: expected `{part}` in: {err}");
        }
    }
}

#[test]
fn error_kinds_and_locations() {
    let syntax =
        Definition::from_text("a = 1\nengine = = \"lines\"\n", Origin::Builtin, "t.toml", "t")
            .expect_err("bad TOML");
    assert!(matches!(syntax, DefinitionError::Syntax { line: 2, .. }), "{syntax:?}");
    let invalid = Definition::from_text(
        "engine = \"lines\"\n\n[[rules]]\nkind = \"step\"\npattern = \"(\"\n",
        Origin::Builtin,
        "t.toml",
        "t",
    )
    .expect_err("bad regex");
    match &invalid {
        DefinitionError::Invalid { key, line, .. } => {
            assert_eq!(key, "rules[0].pattern");
            assert_eq!(*line, Some(5));
        }
        other => panic!("{other:?}"),
    }
    assert!(
        invalid.to_string().starts_with("t.toml:5:11: rules[0].pattern: invalid regex"),
        "{invalid}"
    );
    let missing = Definition::from_file(Path::new("/nonexistent/x.toml")).expect_err("no file");
    assert!(matches!(missing, DefinitionError::Read { .. }));
    assert!(missing.to_string().contains("/nonexistent/x.toml"), "{missing}");
}

#[test]
fn registry_layers_override_by_name() {
    let dir = tempfile::tempdir().expect("temp dir");
    let user = dir.path().join("user");
    let extra = dir.path().join("extra");
    fs::create_dir_all(&user).expect("mkdir");
    fs::create_dir_all(&extra).expect("mkdir");
    // The user's folder replaces the shipped `csv` and adds `mine`.
    fs::write(
        user.join("csv.toml"),
        "name = \"csv\"\ndescription = \"semicolon csv\"\nengine = \"table\"\n[table]\ndelimiter = \"semicolon\"\n",
    )
    .expect("write");
    fs::write(user.join("mine.toml"), "engine = \"table\"\ndescription = \"user\"\n")
        .expect("write");
    fs::write(user.join("notes.txt"), "not a definition").expect("write");
    // An extra folder replaces `mine` again.
    fs::write(extra.join("mine.toml"), "engine = \"table\"\ndescription = \"extra\"\n")
        .expect("write");

    let reg = Registry::load_from(Some(&user), std::slice::from_ref(&extra)).expect("loads");
    let names: Vec<&str> = reg.definitions().iter().map(|d| d.name()).collect();
    assert_eq!(names, vec!["table", "csv", "tarn", "mine"]);
    let csv = reg.get("csv").expect("csv");
    assert_eq!(csv.description(), "semicolon csv");
    assert_eq!(csv.origin(), &Origin::File(user.join("csv.toml")));
    assert_eq!(reg.get("mine").map(Definition::description), Some("extra"));

    // A missing user folder is fine; a missing --parsers folder is an error.
    let reg = Registry::load_from(Some(&dir.path().join("absent")), &[]).expect("loads");
    assert_eq!(reg.definitions().len(), 3);
    let err = Registry::load_from(None, &[dir.path().join("absent")]).expect_err("missing dir");
    assert!(matches!(err, DefinitionError::Read { .. }));

    // A single file can be given instead of a folder. Its TOML is checked at load; its
    // rules are compiled when it is first used, and a broken one names itself then.
    let bad = dir.path().join("bad.toml");
    fs::write(&bad, "engine = \"lines\"\n").expect("write");
    let reg = Registry::load_from(None, std::slice::from_ref(&bad)).expect("TOML is fine");
    let err = reg.definition("bad").expect_err("no step rule");
    assert!(err.to_string().contains("bad.toml"), "{err}");
    fs::write(&bad, "engine = \"lines\"\npatern = 1\n").expect("write");
    let err = Registry::load_from(None, std::slice::from_ref(&bad)).expect_err("unknown key");
    assert!(err.to_string().contains("bad.toml"), "{err}");
    let mut reg = Registry::builtin();
    reg.add_file(&user.join("mine.toml")).expect("adds");
    assert_eq!(reg.definitions().len(), 4);
}
