//! Every warning and flag code the tool can raise is one variant of
//! `kimech::report::Code` (the compiler refuses a misspelt code), and every
//! variant is documented in the README (as `` `code` ``), with a meaning and
//! a source in the catalogue itself.

use kimech::report::Code;
use std::path::Path;

#[test]
fn every_warning_and_flag_code_is_in_the_readme() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let readme = std::fs::read_to_string(root.join("README.md")).unwrap();
    assert!(Code::ALL.len() > 50, "the catalogue holds only {} codes", Code::ALL.len());
    let missing: Vec<&str> =
        Code::ALL.iter().map(|c| c.as_str()).filter(|code| !readme.contains(&format!("`{code}`"))).collect();
    assert!(missing.is_empty(), "codes not documented in README.md: {missing:?}");
}

/// No code is made from a bare string any more: a warning's code is a `Code`.
#[test]
fn no_warning_is_made_from_a_bare_string() {
    fn source_files(dir: &Path, out: &mut Vec<std::path::PathBuf>) {
        for entry in std::fs::read_dir(dir).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                source_files(&path, out);
            } else if path.extension().is_some_and(|e| e == "rs") {
                out.push(path);
            }
        }
    }
    let mut files = Vec::new();
    source_files(&Path::new(env!("CARGO_MANIFEST_DIR")).join("src"), &mut files);
    for file in files {
        let text = std::fs::read_to_string(&file).unwrap();
        for call in ["Warning::new(\"", "flags.push(\"", "Flag::new(\""] {
            assert!(!text.contains(call), "{} makes a code from a string ({call}…)", file.display());
        }
    }
}
