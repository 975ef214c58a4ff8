//! Fuzz findings and seeds replayed without libFuzzer.
//!
//! Every file under `fuzz/regressions/<target>/` (an input that once broke an invariant, kept
//! after the fix) and `fuzz/seeds/<target>/` (the small committed seeds) goes through the same
//! check its fuzz target runs, from `fuzz/src/checks.rs`. The split target's regressions are
//! JSON [`checks::SplitCase`]s; every other target's are the raw bytes libFuzzer gave it.
//! docs/fuzzing.md says how a finding becomes a file here.
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;

#[allow(dead_code)]
#[path = "../fuzz/src/checks.rs"]
mod checks;

fn replay(folder: &str) -> usize {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fuzz")
        .join(folder);
    let mut failures = Vec::new();
    let mut count = 0;
    for target in checks::TARGETS {
        // The split target's seeds are libFuzzer bytes, not SplitCase JSON: only regressions.
        if folder == "seeds" && target == "split" {
            continue;
        }
        let Ok(entries) = std::fs::read_dir(root.join(target)) else {
            continue;
        };
        let mut files: Vec<_> = entries.map(|e| e.unwrap().path()).collect();
        files.sort();
        for f in files {
            let data = std::fs::read(&f).unwrap();
            count += 1;
            if let Err(e) = catch_unwind(AssertUnwindSafe(|| checks::run(target, &data))) {
                let why = e
                    .downcast_ref::<String>()
                    .cloned()
                    .or_else(|| e.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default();
                failures.push(format!("{}: {why}", f.display()));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
    count
}

#[test]
fn regressions_stay_fixed() {
    replay("regressions");
}

#[test]
fn committed_seeds_pass() {
    assert!(replay("seeds") > 0, "no seeds found under fuzz/seeds");
}
