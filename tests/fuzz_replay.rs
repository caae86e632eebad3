//! The fuzz corpus in `cargo test` (stable toolchain): every committed input
//! under fuzz/corpus/<target>/ is replayed through its target, and random
//! mutations of it (bytes replaced, inserted, deleted) through the readers
//! and the fast commands. The targets are the very code the `cargo fuzz`
//! harness runs (fuzz/fuzz_targets/common.rs). A panic fails the test; an
//! error is the expected answer to bad bytes.

#[path = "../fuzz/fuzz_targets/common.rs"]
mod fuzz_common;

use std::path::{Path, PathBuf};

use proptest::prelude::*;

fn corpus(target: &str) -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/corpus").join(target);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    files
}

#[test]
fn every_corpus_input_runs_through_its_target_without_panic() {
    for (target, run) in fuzz_common::TARGETS {
        let files = corpus(target);
        assert!(!files.is_empty(), "fuzz/corpus/{target} is empty");
        let mut succeeded = 0;
        for file in &files {
            let bytes = std::fs::read(file).unwrap();
            succeeded += usize::from(run(&bytes));
            // The fuzzer writes each input in one format (chosen by its length);
            // the replay writes the seeds in every format.
            if let Some((_, args)) = fuzz_common::COMMANDS.iter().find(|c| c.0 == target) {
                for format in fuzz_common::FORMATS {
                    fuzz_common::run_command(args, &bytes, format);
                }
            }
        }
        // The seeds reach the end of their path, not just a first error.
        assert!(succeeded > 0, "no input of fuzz/corpus/{target} ran to a result");
    }
}

/// Replace (0), insert (1) or delete (2) one byte at a position.
fn mutate(mut bytes: Vec<u8>, edits: &[(prop::sample::Index, u8, u8)]) -> Vec<u8> {
    for (at, byte, kind) in edits {
        let len = bytes.len();
        match kind {
            0 if len > 0 => bytes[at.index(len)] = *byte,
            1 => bytes.insert(at.index(len + 1), *byte),
            _ if len > 0 => {
                bytes.remove(at.index(len));
            }
            _ => {}
        }
    }
    bytes
}

/// Bytes a CSV mutation should favour: delimiters, quotes, line ends, signs, exponents.
fn interesting_byte() -> impl Strategy<Value = u8> {
    prop_oneof![
        prop::sample::select(vec![b',', b'"', b'\r', b'\n', b'\t', b'#', b'-', b'e', b'9', b'.', b' ', b'>', 0xff]),
        any::<u8>(),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn mutated_corpus_inputs_never_panic(
        pick in any::<prop::sample::Index>(),
        edits in prop::collection::vec((any::<prop::sample::Index>(), interesting_byte(), 0u8..3), 1..12),
    ) {
        for target in ["read_table", "read_stream", "km", "ki", "rank"] {
            let files = corpus(target);
            let bytes = mutate(std::fs::read(pick.get(&files)).unwrap(), &edits);
            let run = fuzz_common::TARGETS.iter().find(|t| t.0 == target).unwrap().1;
            let _ = run(&bytes);
        }
    }
}
