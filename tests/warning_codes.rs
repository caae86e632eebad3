//! Every warning and flag code the source can raise is documented in the
//! README (as `` `code` ``). Codes are found where they are made: the first
//! argument of `Warning::new("…")` and every `flags.push("…")` /
//! `window_flags.push("…")` in `src/`. (The `onset` command's warning enum has
//! its own test in tests/onset.rs.)

use std::path::Path;

/// The string literal that follows each occurrence of `call` in `text`
/// (whitespace and line breaks between them allowed).
fn literals_after(text: &str, call: &str) -> Vec<String> {
    let mut found = Vec::new();
    let mut rest = text;
    while let Some(at) = rest.find(call) {
        rest = &rest[at + call.len()..];
        let trimmed = rest.trim_start();
        if let Some(body) = trimmed.strip_prefix('"')
            && let Some(end) = body.find('"')
        {
            found.push(body[..end].to_string());
        }
    }
    found
}

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

#[test]
fn every_warning_and_flag_code_is_in_the_readme() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let readme = std::fs::read_to_string(root.join("README.md")).unwrap();
    let mut files = Vec::new();
    source_files(&root.join("src"), &mut files);
    let mut codes = Vec::new();
    for file in &files {
        let text = std::fs::read_to_string(file).unwrap();
        let text = text.split("#[cfg(test)]").next().unwrap_or("");
        for call in ["Warning::new(", "flags.push(", "window_flags.push("] {
            for code in literals_after(text, call) {
                codes.push((code, file.strip_prefix(root).unwrap().display().to_string()));
            }
        }
    }
    assert!(codes.len() > 30, "the scan found only {} codes: is it still looking in the right places?", codes.len());
    let missing: Vec<String> = codes
        .iter()
        .filter(|(code, _)| !readme.contains(&format!("`{code}`")))
        .map(|(code, file)| format!("{code} ({file})"))
        .collect();
    assert!(missing.is_empty(), "codes not documented in README.md: {missing:?}");
}
