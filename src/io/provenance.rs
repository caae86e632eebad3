//! Provenance: what made an output from what. Every JSON document and HTML
//! report of a command run from the command line records the tool and version,
//! the command as typed, when it started (ISO 8601, UTC) and, for every input
//! it read, the path, the number of bytes and their SHA-256 (FIPS 180-4,
//! computed by the `sha2` crate while the bytes are read, so stdin is covered
//! and nothing is read twice).
//!
//! The readers register what they read here ([`record_bytes`] for a whole
//! table, [`HashingReader`] for a stream); [`start`] is called once by
//! `cli::run`. Library calls that never went through `cli::run` record nothing.

use std::io::Read;
use std::sync::Mutex;

use serde::Serialize;
use sha2::{Digest, Sha256};

/// The provenance record written into outputs.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Provenance {
    /// `kimech <version>`.
    pub tool: String,
    /// The command line as typed (argv).
    pub command: Vec<String>,
    /// When the run started, ISO 8601 UTC (`2026-12-02T03:16:39Z`).
    pub started: String,
    /// Every input read, in the order first read.
    pub inputs: Vec<Input>,
}

/// One input file.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Input {
    /// As named on the command line (`-` for stdin).
    pub path: String,
    /// SHA-256 of its bytes, lower-case hex.
    pub sha256: String,
    /// Its size in bytes.
    pub bytes: u64,
}

struct Reading {
    path: String,
    hasher: Sha256,
    bytes: u64,
}

struct State {
    command: Vec<String>,
    started: String,
    inputs: Vec<Reading>,
}

static STATE: Mutex<Option<State>> = Mutex::new(None);

fn with_state<T>(f: impl FnOnce(&mut Option<State>) -> T) -> T {
    let mut guard = STATE.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
    f(&mut guard)
}

/// Starts the record of a run: the command line as typed and the time now.
pub fn start(command: Vec<String>) {
    let started = iso8601_utc(std::time::SystemTime::now());
    with_state(|s| *s = Some(State { command, started, inputs: Vec::new() }));
}

/// Registers an input read whole.
pub fn record_bytes(path: &str, bytes: &[u8]) {
    let i = register(path);
    update(i, bytes);
}

fn register(path: &str) -> Option<usize> {
    with_state(|s| {
        let state = s.as_mut()?;
        state.inputs.push(Reading { path: path.to_string(), hasher: Sha256::new(), bytes: 0 });
        Some(state.inputs.len() - 1)
    })
}

fn update(i: Option<usize>, bytes: &[u8]) {
    let Some(i) = i else { return };
    with_state(|s| {
        if let Some(r) = s.as_mut().and_then(|state| state.inputs.get_mut(i)) {
            r.hasher.update(bytes);
            r.bytes += bytes.len() as u64;
        }
    });
}

/// A reader that hashes what passes through it (for streamed inputs).
pub struct HashingReader<R: Read> {
    inner: R,
    index: Option<usize>,
}

impl<R: Read> HashingReader<R> {
    /// Registers `path` and wraps its reader.
    pub fn new(path: &str, inner: R) -> HashingReader<R> {
        HashingReader { inner, index: register(path) }
    }
}

impl<R: Read> Read for HashingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        update(self.index, &buf[..n]);
        Ok(n)
    }
}

/// `kimech <version>`: how every output names the tool that made it.
pub fn tool() -> String {
    format!("kimech {}", env!("CARGO_PKG_VERSION"))
}

/// The record so far; `None` when the run did not come through `cli::run`.
/// A streamed input's hash covers the bytes read until now (all of them once
/// the command has read to the end, which every command does before writing
/// its provenance).
pub fn current() -> Option<Provenance> {
    with_state(|s| {
        let state = s.as_ref()?;
        Some(Provenance {
            tool: tool(),
            command: state.command.clone(),
            started: state.started.clone(),
            inputs: distinct_inputs(&state.inputs),
        })
    })
}

/// The inputs, each listed once: a command may read the same file twice (a
/// first pass to learn the plate controls, for example), which is one input.
fn distinct_inputs(readings: &[Reading]) -> Vec<Input> {
    let mut inputs: Vec<Input> = Vec::with_capacity(readings.len());
    for r in readings {
        let input = Input { path: r.path.clone(), sha256: hex(&r.hasher.clone().finalize()), bytes: r.bytes };
        if !inputs.contains(&input) {
            inputs.push(input);
        }
    }
    inputs
}

/// SHA-256 of `bytes` as lower-case hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

fn hex(digest: &[u8]) -> String {
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// Adds `"provenance": {…}` as the last field of a pretty-printed JSON object
/// (as `serde_json::to_vec_pretty` writes it), keeping every other byte.
pub fn append_to_json(mut json: Vec<u8>) -> Vec<u8> {
    let Some(p) = current() else { return json };
    let Ok(record) = serde_json::to_string_pretty(&p) else { return json };
    let text = String::from_utf8_lossy(&json).into_owned();
    let trimmed = text.trim_end();
    let Some(body) = trimmed.strip_suffix('}') else { return json };
    let body = body.trim_end();
    let separator = if body.ends_with('{') { "\n" } else { ",\n" };
    json = format!("{body}{separator}  \"provenance\": {}\n}}\n", record.replace('\n', "\n  ")).into_bytes();
    json
}

/// The end of a compact JSON document whose last field is a `results` list
/// still open: `\n]}` with `"provenance": {…}` added after the list when there is one.
pub fn compact_json_tail() -> Vec<u8> {
    match current().and_then(|p| serde_json::to_string(&p).ok()) {
        Some(record) => format!("\n],\n\"provenance\": {record}}}\n").into_bytes(),
        None => b"\n]}\n".to_vec(),
    }
}

/// Seconds since 1970 as `YYYY-MM-DDThh:mm:ssZ` (proleptic Gregorian calendar;
/// days to civil date by the algorithm in H. Hinnant, "chrono-Compatible
/// Low-Level Date Algorithms", 2013).
pub fn iso8601_utc(time: std::time::SystemTime) -> String {
    let secs = time.duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_secs()) as i64;
    let (days, rem) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!("{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z", rem / 3600, rem % 3600 / 60, rem % 60)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// FIPS 180-4 examples (NIST CSRC "Example Algorithms", SHA-256): "abc", the
    /// 448-bit two-block message, and the empty message.
    #[test]
    fn sha256_matches_the_fips_180_4_examples() {
        assert_eq!(sha256_hex(b"abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
        assert_eq!(
            sha256_hex(b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"
        );
        assert_eq!(sha256_hex(b""), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
    }

    #[test]
    fn dates_are_iso_8601_utc() {
        use std::time::{Duration, UNIX_EPOCH};
        assert_eq!(iso8601_utc(UNIX_EPOCH), "1970-01-01T00:00:00Z");
        // 951782400 s = 2000-02-29 00:00:00 UTC (a leap day of a century leap year).
        assert_eq!(iso8601_utc(UNIX_EPOCH + Duration::from_secs(951_782_400)), "2000-02-29T00:00:00Z");
        assert_eq!(iso8601_utc(UNIX_EPOCH + Duration::from_secs(1_764_646_599)), "2025-12-02T03:36:39Z");
    }
}
