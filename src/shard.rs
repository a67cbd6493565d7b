//! Work split into parts that run apart (the tasks of a cluster's job array) and merged back: which part
//! owns which item, the part file every part folder holds, and the checks a merge makes before anything
//! is written.
//!
//! A part K of N owns the items i with i mod N = K (interleaved, so that slow and fast corners of a scan
//! spread over the parts). Each part folder holds [`PART_FILE`]: the command, a fingerprint of its
//! input and settings (everything but the shard and the output folder), the shard, whether every owned
//! item finished, the command line that made it and the command's own result. A merge takes the parts
//! only when every one of 0..N is there once, finished, with one fingerprint; otherwise it names each
//! part that is missing or stopped and the command that reruns just it.

use crate::error::{Error, Result};
use serde_json::{Value, json};
use std::path::{Path, PathBuf};

/// The file of a part folder that merging reads.
pub const PART_FILE: &str = "part.json";

/// Version of the part file's layout.
const PART_LAYOUT: u64 = 1;

/// Part `index` of `count` (0 ≤ index < count).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// Which part, from 0 (Slurm's array task id).
    pub index: usize,
    /// How many parts.
    pub count: usize,
}

impl Shard {
    /// Read "K/N" (0 ≤ K < N ≤ 100000).
    pub fn parse(text: &str) -> Result<Shard> {
        let bad = || Error::input("--shard", format!("expected K/N with 0 ≤ K < N ≤ 100000 (part K of N, counted from 0), got \"{text}\""));
        let (k, n) = text.split_once('/').ok_or_else(bad)?;
        let (index, count): (usize, usize) = (k.trim().parse().map_err(|_| bad())?, n.trim().parse().map_err(|_| bad())?);
        if count == 0 || count > 100_000 || index >= count {
            return Err(bad());
        }
        Ok(Shard { index, count })
    }

    /// True when item `i` (of any number) belongs to this part.
    pub fn owns(&self, i: usize) -> bool {
        i % self.count == self.index
    }

    /// How many of `total` items this part owns.
    pub fn owned(&self, total: usize) -> usize {
        (0..total).filter(|&i| self.owns(i)).count()
    }
}

impl std::fmt::Display for Shard {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// A 64-bit FNV-1a hash of the pieces (each followed by a 0xff byte, which no UTF-8 text holds), in hex:
/// enough to tell the parts of one input from another's, not a protection against forgery.
pub fn fingerprint(pieces: &[&str]) -> String {
    let bytes: Vec<u8> = pieces.iter().flat_map(|p| p.as_bytes().iter().copied().chain(std::iter::once(0xff))).collect();
    format!("{:016x}", fnv1a(&bytes))
}

/// FNV-1a, 64 bits.
fn fnv1a(bytes: &[u8]) -> u64 {
    bytes.iter().fold(0xcbf2_9ce4_8422_2325, |h, &b| (h ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3))
}

/// One part folder's contents.
#[derive(Debug, Clone)]
pub struct Part {
    /// Where it was read from (empty for a part being written).
    pub dir: PathBuf,
    /// The command that made it ("scan", "tolerance").
    pub command: String,
    /// See [`fingerprint`].
    pub fingerprint: String,
    /// Which part.
    pub shard: Shard,
    /// True when every item the part owns finished.
    pub complete: bool,
    /// The command line that made it (to rerun it, or a missing sibling).
    pub argv: Vec<String>,
    /// Wall time of the part, s.
    pub run_time_s: f64,
    /// The command's own result.
    pub result: Value,
}

impl Part {
    /// The part file's text.
    pub fn to_json(&self) -> String {
        let v = json!({
            "kicktrain_part": PART_LAYOUT,
            "command": self.command,
            "fingerprint": self.fingerprint,
            "shard": {"index": self.shard.index, "count": self.shard.count},
            "complete": self.complete,
            "argv": self.argv,
            "run_time_s": self.run_time_s,
            "kicktrain_version": env!("CARGO_PKG_VERSION"),
            "laser_safety": crate::report::LASER_SAFETY,
            "result": self.result,
        });
        serde_json::to_string_pretty(&v).expect("json") + "\n"
    }

    /// Read the part file of `dir`.
    pub fn read(dir: &Path) -> Result<Part> {
        let path = dir.join(PART_FILE);
        let shown = path.display();
        let text = std::fs::read_to_string(&path).map_err(|e| Error::input("parts", format!("cannot read {shown}: {e}")))?;
        let v: Value = serde_json::from_str(&text).map_err(|e| Error::input("parts", format!("{shown} is not a part file: {e}")))?;
        let bad = |what: &str| Error::input("parts", format!("{shown} is not a part file of this kicktrain ({what})"));
        if v.get("kicktrain_part").and_then(Value::as_u64) != Some(PART_LAYOUT) {
            return Err(bad("layout"));
        }
        let text_of = |k: &str| v.get(k).and_then(Value::as_str).map(str::to_string).ok_or_else(|| bad(k));
        let shard = v.get("shard").ok_or_else(|| bad("shard"))?;
        let number = |k: &str| shard.get(k).and_then(Value::as_u64).map(|x| x as usize).ok_or_else(|| bad("shard"));
        let shard = Shard { index: number("index")?, count: number("count")? };
        if shard.count == 0 || shard.index >= shard.count {
            return Err(bad("shard"));
        }
        Ok(Part {
            dir: dir.to_path_buf(),
            command: text_of("command")?,
            fingerprint: text_of("fingerprint")?,
            shard,
            complete: v.get("complete").and_then(Value::as_bool).ok_or_else(|| bad("complete"))?,
            argv: v
                .get("argv")
                .and_then(Value::as_array)
                .map(|a| a.iter().filter_map(|x| x.as_str().map(str::to_string)).collect())
                .ok_or_else(|| bad("argv"))?,
            run_time_s: v.get("run_time_s").and_then(Value::as_f64).unwrap_or(0.0),
            result: v.get("result").cloned().ok_or_else(|| bad("result"))?,
        })
    }
}

/// The command line that makes part `index` from the command line `argv` of a sibling part: the value
/// of `--shard` becomes index/N, and an output folder named after the sibling's index (`run/parts/3`,
/// `part-3`) is renamed after `index`. Quoted for a POSIX shell.
pub fn rerun_command(argv: &[String], from: Shard, index: usize) -> String {
    let mut out: Vec<String> = vec![];
    let mut i = 0;
    while i < argv.len() {
        let a = &argv[i];
        let value_of = |flag: &str| -> Option<(String, bool)> {
            if a == flag { argv.get(i + 1).map(|v| (v.clone(), true)) } else { a.strip_prefix(&format!("{flag}=")).map(|v| (v.to_string(), false)) }
        };
        if let Some((_, separate)) = value_of("--shard") {
            out.push("--shard".into());
            out.push(format!("{index}/{}", from.count));
            i += if separate { 2 } else { 1 };
            continue;
        }
        if let Some((dir, separate)) = value_of("--out") {
            let old = from.index.to_string();
            let renamed = match dir.strip_suffix(&old) {
                Some(stem) if !stem.ends_with(|c: char| c.is_ascii_digit()) => format!("{stem}{index}"),
                _ => format!("{dir}-part{index}"),
            };
            out.push("--out".into());
            out.push(renamed);
            i += if separate { 2 } else { 1 };
            continue;
        }
        out.push(a.clone());
        i += 1;
    }
    out.iter().map(|a| shell_quote(a)).collect::<Vec<_>>().join(" ")
}

/// `a` as one word of a POSIX shell command.
pub fn shell_quote(a: &str) -> String {
    if !a.is_empty() && a.chars().all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c)) {
        a.to_string()
    } else {
        format!("'{}'", a.replace('\'', "'\\''"))
    }
}

/// Read the part folders `dirs` of one run and check them: one command and fingerprint, every part of
/// 0..N once, each finished. The parts come back in shard order. Errors name every part that is missing
/// or stopped, with the command that reruns it (from a sibling's command line).
pub fn gather(dirs: &[PathBuf]) -> Result<Vec<Part>> {
    if dirs.is_empty() {
        return Err(Error::input("parts", "expected one or more part folders (the --out folders of the runs with --shard)"));
    }
    let mut parts: Vec<Part> = vec![];
    let mut unreadable: Vec<String> = vec![];
    for d in dirs {
        if d.join(PART_FILE).is_file() {
            parts.push(Part::read(d)?);
        } else {
            unreadable.push(d.display().to_string());
        }
    }
    let Some(first) = parts.first().cloned() else {
        return Err(Error::input(
            "parts",
            format!("none of the {} folders holds a {PART_FILE}: the parts failed, are still running, or these are not part folders", dirs.len()),
        ));
    };
    for p in &parts {
        if p.command != first.command {
            return Err(Error::input(
                "parts",
                format!("{} is a part of `{}`, {} of `{}`; expected the parts of one run", p.dir.display(), p.command, first.dir.display(), first.command),
            ));
        }
        if p.fingerprint != first.fingerprint || p.shard.count != first.shard.count {
            return Err(Error::input(
                "parts",
                format!(
                    "{} belongs to another input or split (fingerprint {}, {} parts) than {} (fingerprint {}, {} parts); expected the parts of one run",
                    p.dir.display(),
                    p.fingerprint,
                    p.shard.count,
                    first.dir.display(),
                    first.fingerprint,
                    first.shard.count
                ),
            ));
        }
    }
    let n = first.shard.count;
    let mut slots: Vec<Option<&Part>> = vec![None; n];
    for p in &parts {
        if let Some(other) = slots[p.shard.index] {
            return Err(Error::input(
                "parts",
                format!("part {} of {n} appears twice ({} and {}); expected each part once", p.shard.index, other.dir.display(), p.dir.display()),
            ));
        }
        slots[p.shard.index] = Some(p);
    }
    let mut problems: Vec<String> = vec![];
    for (k, slot) in slots.iter().enumerate() {
        match slot {
            None => problems.push(format!("part {k} is missing (failed, timed out or still running); rerun: {}", rerun_command(&first.argv, first.shard, k))),
            Some(p) if !p.complete => {
                problems.push(format!("part {k} ({}) stopped before its end; rerun: {}", p.dir.display(), rerun_command(&p.argv, p.shard, k)))
            }
            Some(_) => {}
        }
    }
    if !problems.is_empty() {
        let extra = if unreadable.is_empty() { String::new() } else { format!(" (no {PART_FILE} in {})", unreadable.join(", ")) };
        return Err(Error::input("parts", format!("{} of {n} parts are not ready, nothing written{extra}: {}", problems.len(), problems.join("; "))));
    }
    parts.sort_by_key(|p| p.shard.index);
    Ok(parts)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_read_and_split_items_between_them() {
        assert_eq!(Shard::parse("3/8").unwrap(), Shard { index: 3, count: 8 });
        for bad in ["8/8", "1", "a/2", "0/0", "-1/3", "1/2/3"] {
            assert!(Shard::parse(bad).is_err(), "{bad}");
        }
        // Every item belongs to exactly one part of any split.
        for n in 1..7 {
            for i in 0..40 {
                assert_eq!((0..n).filter(|&k| Shard { index: k, count: n }.owns(i)).count(), 1);
            }
        }
        assert_eq!(Shard { index: 1, count: 3 }.owned(10), 3);
    }

    #[test]
    fn fingerprints_are_fnv1a_and_separate_pieces() {
        // Test vectors of FNV-1a 64 (Fowler, Noll, Vo, the FNV reference code's test suite; from memory):
        // the empty input gives the offset basis, "a" 0xaf63dc4c8601ec8c, "foobar" 0x85944171f73967e8.
        assert_eq!(fnv1a(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a(b"foobar"), 0x8594_4171_f739_67e8);
        assert_ne!(fingerprint(&["ab", "c"]), fingerprint(&["a", "bc"]));
        assert_eq!(fingerprint(&["x"]), fingerprint(&["x"]));
    }

    #[test]
    fn reruns_replace_the_shard_and_the_folder_named_after_it() {
        let argv: Vec<String> = "kicktrain scan s.json --x pulses[0].center_ps --shard 3/8 --out run/parts/3".split(' ').map(String::from).collect();
        let from = Shard { index: 3, count: 8 };
        assert_eq!(rerun_command(&argv, from, 5), "kicktrain scan s.json --x 'pulses[0].center_ps' --shard 5/8 --out run/parts/5");
        let argv: Vec<String> = "kicktrain scan s.json --shard=3/8 --out=p13".split(' ').map(String::from).collect();
        assert_eq!(rerun_command(&argv, from, 5), "kicktrain scan s.json --shard 5/8 --out p13-part5");
    }
}
