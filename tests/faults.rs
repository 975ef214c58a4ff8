//! Faults around `kerf embed`: interrupts, a file size limit reached mid-write, an output
//! location that cannot be written, two processes sharing one cache, and damaged cache files.
//! In every case: a clear error naming the file, a non-zero exit, nothing under the output's
//! name that looks complete, and a rerun that gives the uninterrupted output byte for byte.
//!
//! Text: demo-texts/ (invented, the demo corpus) for output checks; the Debian FAQ
//! (debian-faq 11.1, scripts/fetch-testdata) where a job must run long enough to interrupt.
mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use common::{fails, faq_chapters, files_of, kerf_in, ok};

fn no_partials(dir: &Path) {
    let left: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("partial"))
        .collect();
    assert!(left.is_empty(), "partial folders left: {left:?}");
}

fn profile() -> String {
    common::repo()
        .join("profiles/paragraphs-256-overlap.toml")
        .to_string_lossy()
        .into_owned()
}

fn demo() -> String {
    common::repo()
        .join("demo-texts")
        .to_string_lossy()
        .into_owned()
}

fn embed_args(corpus: &str, out: &str, cache: &str) -> Vec<String> {
    [
        "embed",
        "-p",
        &profile(),
        corpus,
        "--out",
        out,
        "--cache",
        cache,
        "--batch-tokens",
        "1024",
        "--quiet",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect()
}

fn run(dir: &Path, args: &[String]) -> std::process::Output {
    let a: Vec<&str> = args.iter().map(String::as_str).collect();
    kerf_in(dir, &a)
}

fn cached_rows(path: &Path) -> usize {
    rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
        .and_then(|c| c.query_row("SELECT COUNT(*) FROM vectors", [], |r| r.get::<_, i64>(0)))
        .map(|n| n as usize)
        .unwrap_or(0)
}

/// SIGINT and SIGTERM stop the job between batches: exit 130, a message saying how to resume,
/// no output folder, no partial folder; the rerun finishes from the cache to identical bytes.
#[test]
fn interrupts_stop_cleanly_and_the_rerun_resumes() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::create_dir(d.join("corpus")).unwrap();
    assert_eq!(faq_chapters(&d.join("corpus"), 8), 8);
    ok(&run(d, &embed_args("corpus", "whole", "cache-a.sqlite")));
    for (signal, cache) in [("INT", "cache-int.sqlite"), ("TERM", "cache-term.sqlite")] {
        let child = Command::new(env!("CARGO_BIN_EXE_kerf"))
            .args(embed_args("corpus", "out", cache))
            .current_dir(d)
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let mut waited = 0;
        while cached_rows(&d.join(cache)) == 0 && waited < 6000 {
            std::thread::sleep(std::time::Duration::from_millis(10));
            waited += 1;
        }
        let sent = Command::new("kill")
            .args([format!("-{signal}"), child.id().to_string()])
            .status()
            .unwrap();
        assert!(sent.success());
        let out = child.wait_with_output().unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        if out.status.success() {
            // The job ended before the signal arrived: nothing to check but the output.
            eprintln!("SIG{signal}: the job had finished first");
        } else {
            assert_eq!(out.status.code(), Some(130), "SIG{signal}: {err}");
            assert!(
                err.contains("stopped") && err.contains("again to resume"),
                "{err}"
            );
            assert!(!err.contains("panicked"), "{err}");
            assert!(!d.join("out").exists(), "SIG{signal} left an output folder");
        }
        no_partials(d);
        ok(&run(d, &embed_args("corpus", "out", cache)));
        assert!(
            files_of(&d.join("out")) == files_of(&d.join("whole")),
            "SIG{signal}: the resumed output differs"
        );
        std::fs::remove_dir_all(d.join("out")).unwrap();
    }
}

/// A file size limit reached while writing (as on a full disk): an error naming the file and
/// the cause, and nothing under the output's name.
#[test]
fn file_size_limit_is_a_clear_error_and_leaves_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let args = embed_args(&demo(), "out", "cache.sqlite");
    // Fill the cache first so the limit is hit by the output files, not SQLite.
    ok(&run(d, &embed_args(&demo(), "warm", "cache.sqlite")));
    // 100 blocks of 1 KiB (bash) or 512 B (POSIX sh) per file: chunks.jsonl is ~330 kB.
    let cmd = format!(
        "ulimit -f 100 && exec \"{}\" {}",
        env!("CARGO_BIN_EXE_kerf"),
        args.iter()
            .map(|a| format!("'{a}'"))
            .collect::<Vec<_>>()
            .join(" ")
    );
    let out = Command::new("sh")
        .args(["-c", &cmd])
        .current_dir(d)
        .output()
        .unwrap();
    let err = fails(&out);
    assert!(err.contains("File too large"), "{err}");
    assert!(err.contains("out/"), "names the file: {err}");
    assert!(!d.join("out").exists());
    no_partials(d);
}

/// Output locations that cannot be written: inside a file, and where no folder can be made.
#[test]
fn unwritable_output_locations_are_clear_errors() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::write(d.join("a-file"), "x").unwrap();
    for (out, names) in [("a-file/out", "a-file"), ("/proc/kerf-out", "/proc")] {
        let e = fails(&run(d, &embed_args(&demo(), out, "cache.sqlite")));
        assert!(e.contains(names), "{out}: {e}");
    }
    no_partials(d);
}

/// Two processes embedding at once into one cache both finish with the uninterrupted output;
/// a third run finds every vector cached and gives the same bytes.
#[test]
fn two_processes_share_one_cache() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let spawn = |out: &str| {
        Command::new(env!("CARGO_BIN_EXE_kerf"))
            .args(embed_args(&demo(), out, "shared.sqlite"))
            .current_dir(d)
            .output()
    };
    let (a, b) = std::thread::scope(|s| {
        let a = s.spawn(|| spawn("a"));
        let b = s.spawn(|| spawn("b"));
        (a.join().unwrap().unwrap(), b.join().unwrap().unwrap())
    });
    ok(&a);
    ok(&b);
    let third = run(d, &embed_args(&demo(), "c", "shared.sqlite"));
    ok(&third);
    let err = String::from_utf8_lossy(&third.stderr);
    assert!(err.contains("(0 embedded,"), "{err}");
    let a = files_of(&d.join("a"));
    assert!(a == files_of(&d.join("b")) && a == files_of(&d.join("c")));
}

/// A cache file truncated, overwritten in the middle, or replaced by a folder: refused with the
/// path and what to do, never read as vectors; `--rebuild-cache` recovers the exact output.
#[test]
fn damaged_caches_are_refused_and_rebuilt() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    ok(&run(d, &embed_args(&demo(), "whole", "good.sqlite")));
    let good = std::fs::read(d.join("good.sqlite")).unwrap();
    assert!(good.len() > 64 * 1024, "cache of {} bytes", good.len());
    type Damage<'a> = Box<dyn Fn(&Path) + 'a>;
    let damaged: Vec<(&str, Damage)> = vec![
        (
            "truncated",
            Box::new(|p: &Path| std::fs::write(p, &good[..good.len() / 3]).unwrap()),
        ),
        (
            "garbage in the middle",
            Box::new(|p: &Path| {
                let mut b = good.clone();
                let mid = b.len() / 2;
                for (i, x) in b[mid..mid + 8192].iter_mut().enumerate() {
                    *x = (i as u8).wrapping_mul(31).wrapping_add(7);
                }
                std::fs::write(p, b).unwrap()
            }),
        ),
        (
            "a folder",
            Box::new(|p: &Path| std::fs::create_dir(p).unwrap()),
        ),
    ];
    for (what, damage) in damaged {
        let cache: PathBuf = d.join(format!("{}.sqlite", what.replace(' ', "-")));
        damage(&cache);
        let name = cache.file_name().unwrap().to_string_lossy().into_owned();
        let out = run(d, &embed_args(&demo(), "out", &name));
        if out.status.success() {
            // Damage SQLite and the checksums both missed can only be damage to unused space:
            // the output must then be exactly right.
            assert!(
                files_of(&d.join("out")) == files_of(&d.join("whole")),
                "{what}: a damaged cache gave different output"
            );
            std::fs::remove_dir_all(d.join("out")).unwrap();
        } else {
            let err = fails(&out);
            assert!(err.contains(&name), "{what}: {err}");
            assert!(!d.join("out").exists(), "{what}");
            if what != "a folder" {
                assert!(err.contains("--rebuild-cache"), "{what}: {err}");
            }
        }
        if what == "a folder" {
            std::fs::remove_dir(&cache).unwrap();
        }
        let mut args = embed_args(&demo(), "out", &name);
        args.push("--rebuild-cache".into());
        ok(&run(d, &args));
        assert!(
            files_of(&d.join("out")) == files_of(&d.join("whole")),
            "{what}: the rebuilt run differs"
        );
        std::fs::remove_dir_all(d.join("out")).unwrap();
        no_partials(d);
    }
}

/// Makes a file or folder unwritable, even for root (the tests run as root here, for whom file
/// modes do not apply): the immutable attribute through `chattr +i` (e2fsprogs) as root, mode
/// 0444/0555 otherwise. Undone on drop, so the temporary folder can be removed.
struct Unwritable {
    path: PathBuf,
    immutable: bool,
}

impl Unwritable {
    fn new(path: &Path) -> Self {
        let root = Command::new("id")
            .arg("-u")
            .output()
            .is_ok_and(|o| String::from_utf8_lossy(&o.stdout).trim() == "0");
        if root {
            let st = Command::new("chattr").arg("+i").arg(path).status();
            assert!(
                st.is_ok_and(|s| s.success()),
                "chattr +i {} failed: the read-only cache test needs the immutable attribute as root (e2fsprogs, a file system that has it)",
                path.display()
            );
        } else {
            use std::os::unix::fs::PermissionsExt;
            let mode = if path.is_dir() { 0o555 } else { 0o444 };
            std::fs::set_permissions(path, std::fs::Permissions::from_mode(mode)).unwrap();
        }
        Unwritable {
            path: path.to_path_buf(),
            immutable: root,
        }
    }
}

impl Drop for Unwritable {
    fn drop(&mut self) {
        if self.immutable {
            let _ = Command::new("chattr").arg("-i").arg(&self.path).status();
        } else {
            use std::os::unix::fs::PermissionsExt;
            let _ = std::fs::set_permissions(&self.path, std::fs::Permissions::from_mode(0o755));
        }
    }
}

/// A cache that cannot be written (the file, or the folder it and its WAL files live in) is
/// refused when it is opened, before any work, naming the file and the ways out; `--no-cache`
/// or another `--cache` file then gives the exact output. `--rebuild-cache` on a file that
/// cannot be deleted says so rather than calling the file corrupt.
#[test]
fn read_only_caches_are_refused_before_any_work() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    ok(&run(d, &embed_args(&demo(), "whole", "good.sqlite")));

    // The file itself.
    let cache = d.join("ro.sqlite");
    std::fs::copy(d.join("good.sqlite"), &cache).unwrap();
    {
        let lock = Unwritable::new(&cache);
        let err = fails(&run(d, &embed_args(&demo(), "out", "ro.sqlite")));
        assert!(err.contains("ro.sqlite is read-only"), "{err}");
        assert!(err.contains("--no-cache"), "{err}");
        assert!(!d.join("out").exists());
        let mut args = embed_args(&demo(), "out", "ro.sqlite");
        args.push("--rebuild-cache".into());
        let out = run(d, &args);
        if lock.immutable {
            // The file cannot go, and the message says so instead of calling it corrupt.
            let err = fails(&out);
            assert!(err.contains("cannot be deleted to rebuild it"), "{err}");
            assert!(err.contains("remove it by hand"), "{err}");
            assert!(!d.join("out").exists());
        } else {
            // A 0444 file in a writable folder is deleted and rebuilt.
            ok(&out);
            assert!(files_of(&d.join("out")) == files_of(&d.join("whole")));
            std::fs::remove_dir_all(d.join("out")).unwrap();
        }
    }

    // The folder: SQLite cannot make the WAL files beside the cache.
    let sub = d.join("locked");
    std::fs::create_dir(&sub).unwrap();
    std::fs::copy(d.join("good.sqlite"), sub.join("c.sqlite")).unwrap();
    {
        let _lock = Unwritable::new(&sub);
        let out = run(d, &embed_args(&demo(), "out", "locked/c.sqlite"));
        let err = fails(&out);
        assert!(err.contains("locked/c.sqlite"), "{err}");
        assert!(!d.join("out").exists());
    }

    let mut args = embed_args(&demo(), "out", "unused.sqlite");
    args.retain(|a| a != "--cache" && a != "unused.sqlite");
    args.push("--no-cache".into());
    ok(&run(d, &args));
    assert!(files_of(&d.join("out")) == files_of(&d.join("whole")));
    no_partials(d);
}
