//! Whether two names lead to the same file, by what the file system says
//! (device and inode) rather than by spelling: `-o` must not replace an
//! input reached through stdin (`kimech km - -o in.csv < in.csv`), a hard
//! link, or a path spelled another way.

use std::fs::Metadata;
use std::path::Path;

/// Whether `path` names the very file that stdin reads. False when either
/// is not a regular file (a pipe, a terminal, `/dev/null`): writing to
/// those cannot destroy the input.
pub fn is_stdin(path: &Path) -> bool {
    match (std::fs::metadata(path), stdin_metadata()) {
        (Ok(target), Some(stdin)) => target.is_file() && stdin.is_file() && same(&target, &stdin),
        _ => false,
    }
}

/// Whether `a` and `b` name the same existing file.
pub fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(a), Ok(b)) => same(&a, &b),
        _ => false,
    }
}

/// The temporary file an output is written to before it is renamed into
/// place: a hidden sibling (same file system, so the rename is atomic)
/// whose name says who left it and for what, should a kill or power cut
/// stop the run before the rename: `.results.csv.kimech-4711.tmp`.
pub fn temp_sibling(path: &Path) -> std::path::PathBuf {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_else(|| "output".into());
    path.with_file_name(format!(".{name}.kimech-{}.tmp", std::process::id()))
}

#[cfg(unix)]
fn same(a: &Metadata, b: &Metadata) -> bool {
    use std::os::unix::fs::MetadataExt;
    (a.dev(), a.ino()) == (b.dev(), b.ino())
}

#[cfg(not(unix))]
fn same(_: &Metadata, _: &Metadata) -> bool {
    false // no portable identity; the caller's path comparison still applies
}

#[cfg(unix)]
fn stdin_metadata() -> Option<Metadata> {
    use std::os::fd::AsFd;
    let fd = std::io::stdin().as_fd().try_clone_to_owned().ok()?;
    std::fs::File::from(fd).metadata().ok()
}

#[cfg(not(unix))]
fn stdin_metadata() -> Option<Metadata> {
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn temporary_outputs_are_hidden_siblings_named_after_kimech() {
        let temp = temp_sibling(Path::new("out/results.csv"));
        let name = temp.file_name().unwrap().to_string_lossy().into_owned();
        assert_eq!(temp.parent(), Some(Path::new("out")));
        assert_eq!(name, format!(".results.csv.kimech-{}.tmp", std::process::id()));
    }

    #[test]
    fn hard_links_are_the_same_file_and_siblings_are_not() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b, c) = (dir.path().join("a.csv"), dir.path().join("b.csv"), dir.path().join("c.csv"));
        std::fs::write(&a, "x\n1\n").unwrap();
        std::fs::write(&c, "x\n1\n").unwrap();
        std::fs::hard_link(&a, &b).unwrap();
        assert!(same_file(&a, &b));
        assert!(!same_file(&a, &c));
        assert!(!same_file(&a, &dir.path().join("missing.csv")));
    }
}
