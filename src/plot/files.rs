//! File names for `--plot DIR`: one SVG per series or compound, named after
//! its id, made safe so that no id can write outside DIR.
//!
//! An id may hold anything a spreadsheet cell can: `/`, `\`, spaces, `..`,
//! non-ASCII letters, control characters. The stem keeps ASCII letters,
//! digits, `-` and `_`; every other run of characters becomes one `_`; dots
//! are kept only between other characters (so `..` and hidden names cannot
//! arise); the stem is cut to 80 bytes. Names that collide after this (ids
//! differing only in case or in replaced characters) get `-2`, `-3` … so no
//! plot overwrites another.

use std::collections::HashSet;
use std::path::{Component, Path, PathBuf};

use crate::error::{Error, Result};

const MAX_STEM: usize = 80;

/// Names reserved by Windows whatever the extension.
const RESERVED: [&str; 22] = [
    "con", "prn", "aux", "nul", "com1", "com2", "com3", "com4", "com5", "com6", "com7", "com8", "com9", "lpt1", "lpt2",
    "lpt3", "lpt4", "lpt5", "lpt6", "lpt7", "lpt8", "lpt9",
];

/// A file-name stem for an id: only `[A-Za-z0-9._-]`, no leading or
/// trailing dot, never empty.
pub fn safe_stem(id: &str) -> String {
    let mut stem = String::new();
    for c in id.chars() {
        let keep = c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.';
        let c = if keep { c } else { '_' };
        // One '_' for a run of replaced characters; no two dots in a row.
        if (c == '_' && stem.ends_with('_')) || (c == '.' && stem.ends_with('.')) {
            continue;
        }
        stem.push(c);
    }
    let mut stem = stem.trim_matches(|c| c == '.' || c == '_').to_string();
    stem.truncate(MAX_STEM);
    let stem = stem.trim_end_matches('.').to_string();
    if stem.is_empty() {
        return "unnamed".into();
    }
    let base = stem.split('.').next().unwrap_or("").to_ascii_lowercase();
    if RESERVED.contains(&base.as_str()) { format!("_{stem}") } else { stem }
}

/// Hands out file names `prefix-stem.svg`, unique ignoring case, one at a
/// time (for runs that write plots as they go).
#[derive(Debug, Clone, Default)]
pub struct Names {
    prefix: String,
    taken: HashSet<String>,
}

impl Names {
    /// Names starting with `prefix`.
    pub fn new(prefix: &str) -> Names {
        Names { prefix: prefix.to_string(), taken: HashSet::new() }
    }

    /// The next name for `id` (`prefix.svg` when there is none).
    pub fn next(&mut self, id: Option<&str>) -> String {
        let base = match id {
            Some(id) => format!("{}-{}", self.prefix, safe_stem(id)),
            None => self.prefix.clone(),
        };
        let mut name = base.clone();
        let mut k = 2;
        while !self.taken.insert(name.to_ascii_lowercase()) {
            name = format!("{base}-{k}");
            k += 1;
        }
        format!("{name}.svg")
    }
}

/// File names `prefix-stem.svg` for each id, unique ignoring case.
pub fn unique_names(prefix: &str, ids: &[Option<&str>]) -> Vec<String> {
    let mut names = Names::new(prefix);
    ids.iter().map(|id| names.next(*id)).collect()
}

/// Writes each (file name, SVG) into `dir`, creating it if needed. Names must
/// be single plain components (as [`unique_names`] makes them); anything else
/// is refused rather than written elsewhere. Returns the paths written.
pub fn write_plots(dir: &Path, files: &[(String, String)], inputs: &[&str]) -> Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir).map_err(|source| Error::Write { path: dir.to_path_buf(), source })?;
    let mut written = Vec::with_capacity(files.len());
    for (name, svg) in files {
        let mut parts = Path::new(name).components();
        let single = matches!((parts.next(), parts.next()), (Some(Component::Normal(_)), None));
        if !single {
            return Err(Error::Plot {
                what: format!("the plot file '{name}'"),
                problem: "the name is not a single file name inside the --plot directory".into(),
            });
        }
        let path = dir.join(name);
        crate::io::write_output(Some(&path), svg.as_bytes(), inputs)?;
        written.push(path);
    }
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stems_keep_plain_ids() {
        assert_eq!(safe_stem("KX-101"), "KX-101");
        assert_eq!(safe_stem("batch_A.2"), "batch_A.2");
    }

    #[test]
    fn stems_cannot_climb_or_hide() {
        for id in ["../../etc/passwd", "..", ".", "/abs/path", "a/../b", "..\\win", " .hidden", ""] {
            let s = safe_stem(id);
            assert!(!s.contains('/') && !s.contains('\\') && !s.contains(".."), "{id} -> {s}");
            assert!(!s.starts_with('.') && !s.is_empty(), "{id} -> {s}");
        }
        assert_eq!(safe_stem("../../etc/passwd"), "etc_passwd");
        assert_eq!(safe_stem("KX 101 / lot 3"), "KX_101_lot_3");
        assert_eq!(safe_stem("inhibiteur-α"), "inhibiteur-");
        assert_eq!(safe_stem("CON"), "_CON");
    }

    #[test]
    fn colliding_ids_get_numbered() {
        let names = unique_names("km", &[Some("A/1"), Some("A 1"), Some("a_1"), None]);
        assert_eq!(names, ["km-A_1.svg", "km-A_1-2.svg", "km-a_1-3.svg", "km.svg"]);
    }
}
