//! End to end: the real `kerf explore` binary in a detached tmux session. Change the overlap,
//! switch the boundary rule, save a profile (and be refused an overwrite), quit; check the
//! screen at each step and that the saved profile passes `kerf profile check` and `kerf cut`.
//! tmux is required: .ci/run installs it, and without it this test fails rather than skips.
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

mod common;

/// A tmux server of our own (its own socket), killed when the test ends however it ends.
struct Session {
    socket: String,
}

impl Session {
    /// A detached 140x45 tmux session on its own socket running `cmd` in `cwd`.
    fn start(socket: &str, cwd: &std::path::Path, cmd: &str) -> Self {
        let s = Session {
            socket: socket.to_string(),
        };
        let out = s.tmux(&[
            "new-session",
            "-d",
            "-x",
            "140",
            "-y",
            "45",
            "-s",
            "kerf",
            "-c",
            cwd.to_str().unwrap(),
            cmd,
        ]);
        assert!(
            out.status.success(),
            "tmux new-session: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        s
    }

    fn tmux(&self, args: &[&str]) -> std::process::Output {
        Command::new("tmux")
            .arg("-L")
            .arg(&self.socket)
            .args(args)
            .output()
            .expect("tmux runs")
    }
    fn send(&self, keys: &[&str]) {
        let mut args = vec!["send-keys", "-t", "kerf"];
        args.extend_from_slice(keys);
        let out = self.tmux(&args);
        assert!(
            out.status.success(),
            "send-keys: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    fn type_text(&self, text: &str) {
        self.send(&["-l", text]);
    }
    fn capture(&self) -> String {
        String::from_utf8_lossy(&self.tmux(&["capture-pane", "-p", "-t", "kerf"]).stdout)
            .into_owned()
    }
    /// Poll the screen until `want` appears; fail with the last screen after the deadline.
    fn wait_for(&self, want: &str) -> String {
        let deadline = Instant::now() + Duration::from_secs(30);
        loop {
            let s = self.capture();
            if s.contains(want) {
                return s;
            }
            if Instant::now() > deadline {
                panic!("timed out waiting for {want:?}; screen:\n{s}");
            }
            std::thread::sleep(Duration::from_millis(100));
        }
    }
}

impl Drop for Session {
    fn drop(&mut self) {
        let _ = self.tmux(&["kill-server"]);
    }
}

/// Fail (never skip) when tmux is missing.
fn require_tmux() {
    let tmux = Command::new("tmux").arg("-V").output();
    assert!(
        tmux.as_ref().is_ok_and(|o| o.status.success()),
        "tmux is required for this test and was not found (install it, e.g. apt-get install tmux; .ci/run does)"
    );
}

fn header(screen: &str) -> String {
    screen.lines().next().unwrap_or("").to_string()
}

fn kerf_in(dir: &Path, args: &[&str]) -> std::process::Output {
    common::kerf_in(dir, args)
}

#[test]
fn explore_in_tmux_changes_plan_and_saves_a_profile() {
    require_tmux();
    common::model_dir();
    let dir = tempfile::tempdir().unwrap();
    let repo = common::repo();
    let demo = repo.join("demo-texts");
    // The corpus: demo-texts plus one file that is not UTF-8, which must be listed, not fatal.
    let corpus = dir.path().join("corpus");
    std::fs::create_dir(&corpus).unwrap();
    for e in std::fs::read_dir(&demo).unwrap() {
        let p = e.unwrap().path();
        std::fs::copy(&p, corpus.join(p.file_name().unwrap())).unwrap();
    }
    std::fs::write(corpus.join("broken.txt"), b"Caf\xe9 menu, in Latin-1.\n").unwrap();
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_kerf"));
    let cmd = format!(
        "{} explore --hash-embedder --cache {} --refs {} {}; echo KERF-EXITED-$?; sleep 600",
        bin.display(),
        dir.path().join("cache.sqlite").display(),
        demo.join("references.toml").display(),
        corpus.display()
    );
    let s = Session::start(
        &format!("kerf-test-{}", std::process::id()),
        dir.path(),
        &cmd,
    );
    let start = s.wait_for("window 256");
    assert!(header(&start).contains("overlap 0"), "{start}");
    assert!(header(&start).contains("boundary sentence"), "{start}");
    assert!(start.contains("12 documents"), "{start}");
    s.wait_for("broken.txt: left out: invalid UTF-8 at byte 3");
    // Wait for the first embedding (hash vectors) to finish, then change the plan.
    s.wait_for("compared with baseline-head-256");

    s.send(&["O"]);
    let after_o = s.wait_for("overlap 8");
    assert!(!header(&after_o).contains("overlap 0"), "{after_o}");
    s.send(&["O"]);
    s.wait_for("overlap 16");
    s.send(&["b"]);
    let after_b = s.wait_for("boundary paragraph");
    assert!(header(&after_b).contains("overlap 16"), "{after_b}");

    // Save: the prompt suggests a name; replace it with ours.
    s.send(&[">"]);
    s.wait_for("save plan as:");
    s.send(&["C-u"]);
    s.type_text("mine.toml");
    s.send(&["Enter"]);
    s.wait_for("saved mine.toml");
    let saved = dir.path().join("mine.toml");
    assert!(saved.is_file());

    // Saving over it asks first; anything but y keeps the file.
    let before = std::fs::read_to_string(&saved).unwrap();
    s.send(&["O"]);
    s.wait_for("overlap 32");
    s.send(&[">"]);
    s.wait_for("save plan as:");
    s.send(&["BSpace"; 60]);
    s.type_text("mine.toml");
    s.send(&["Enter"]);
    s.wait_for("exists: overwrite it?");
    s.send(&["n"]);
    s.wait_for("not saved");
    assert_eq!(std::fs::read_to_string(&saved).unwrap(), before);

    // Help overlay, then quit: the shell line after the UI shows a clean exit.
    s.send(&["?"]);
    s.wait_for("kerf explore: keys");
    s.send(&["Escape"]);
    s.send(&["q"]);
    let end = s.wait_for("KERF-EXITED-");
    assert!(end.contains("KERF-EXITED-0"), "{end}");
    assert!(!end.contains("window 256"), "alternate screen left: {end}");

    // The saved profile works unchanged with the other commands.
    let check = common::ok(&kerf_in(dir.path(), &["profile", "check", "mine.toml"]));
    assert!(check.contains("mine.toml: ok"), "{check}");
    assert!(check.contains("boundary paragraph, overlap 16"), "{check}");
    let cut = common::ok(&kerf_in(
        dir.path(),
        &[
            "cut",
            "-p",
            "mine.toml",
            demo.join("fares-and-timetables-2032.md").to_str().unwrap(),
        ],
    ));
    let lines: Vec<serde_json::Value> = cut
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert!(lines.len() > 1, "{cut}");
    assert!(lines.iter().all(|c| c["tokens"].as_u64().unwrap() <= 256));
    // Paragraph chunks follow one another in the document.
    assert!(
        lines
            .windows(2)
            .all(|w| w[0]["bytes"][0].as_u64() < w[1]["bytes"][0].as_u64()),
        "{cut}"
    );
}

/// Without --refs the explorer judges plans by self-retrieval probes and says so; c/C steps a
/// late-chunking context, which the worker runs and the saved profile keeps.
#[test]
fn explore_in_tmux_judges_by_probes_and_runs_late_chunking() {
    require_tmux();
    common::model_dir();
    let dir = tempfile::tempdir().unwrap();
    let demo = common::repo().join("demo-texts");
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_kerf"));
    let cmd = format!(
        "{} explore --hash-embedder --no-cache --probes 30 --probe-seed 5 {}; echo KERF-EXITED-$?; sleep 600",
        bin.display(),
        demo.display()
    );
    let s = Session::start(
        &format!("kerf-probe-test-{}", std::process::id()),
        dir.path(),
        &cmd,
    );
    s.wait_for("window 256");
    s.send(&["3"]);
    let judged = s.wait_for("self-retrieval by 30 probes (no --refs given)");
    assert!(judged.contains("Probe 1/30"), "{judged}");
    assert!(judged.contains("MRR@10 by depth:"), "{judged}");
    // A late-chunking context of 256 tokens: re-embedded through passes, then judged again.
    s.send(&["C"]);
    let late = s.wait_for("context 256");
    assert!(header(&late).contains("context 256"), "{late}");
    s.wait_for("self-retrieval by 30 probes (no --refs given)");
    s.send(&[">"]);
    s.wait_for("save plan as:");
    s.send(&["C-u"]);
    s.type_text("late.toml");
    s.send(&["Enter"]);
    s.wait_for("saved late.toml");
    s.send(&["q"]);
    let end = s.wait_for("KERF-EXITED-");
    assert!(end.contains("KERF-EXITED-0"), "{end}");
    let saved = std::fs::read_to_string(dir.path().join("late.toml")).unwrap();
    assert!(saved.contains("context = 256"), "{saved}");
    let shown = common::ok(&kerf_in(dir.path(), &["profile", "show", "late.toml"]));
    assert!(shown.contains("late chunking"), "{shown}");
}

#[test]
fn a_panic_restores_the_terminal() {
    require_tmux();
    common::model_dir();
    let dir = tempfile::tempdir().unwrap();
    let demo = common::repo().join("demo-texts");
    // After the panic the shell reports the exit code and whether the tty is back in canonical
    // (cooked) mode: raw mode left on would show `-icanon`.
    let cmd = format!(
        "KERF_EXPLORE_TEST_PANIC=1 {} explore --hash-embedder --no-cache {}; echo KERF-EXITED-$?; stty -a | grep -o -- '-*icanon' | sed 's/^/TTY-/'; sleep 600",
        env!("CARGO_BIN_EXE_kerf"),
        demo.display()
    );
    let s = Session::start(
        &format!("kerf-test-panic-{}", std::process::id()),
        dir.path(),
        &cmd,
    );
    let end = s.wait_for("TTY-");
    assert!(
        end.contains("KERF_EXPLORE_TEST_PANIC is set"),
        "panic message shown: {end}"
    );
    assert!(end.contains("KERF-EXITED-101"), "{end}");
    // The message is printed on the restored screen, before the shell's next line, and
    // nothing the explorer does while unwinding moves the cursor back over it.
    let lines: Vec<&str> = end.lines().collect();
    let at = |s: &str| lines.iter().position(|l| l.contains(s));
    assert!(at("panicked at src/cli/explore.rs").is_some(), "{end}");
    assert!(at("panicked at") < at("KERF-EXITED-101"), "{end}");
    assert!(
        end.contains("TTY-icanon"),
        "terminal back in cooked mode: {end}"
    );
    assert!(!end.contains("window 256"), "alternate screen left: {end}");
}

/// SIGTERM, SIGINT or SIGHUP sent to the explorer (`kill`, a closed terminal window, a job
/// scheduler's stop): it leaves the alternate screen, gives the terminal back in cooked mode,
/// says what stopped and exits 130.
#[test]
fn a_signal_restores_the_terminal() {
    require_tmux();
    common::model_dir();
    let demo = common::repo().join("demo-texts");
    for sig in ["TERM", "INT", "HUP"] {
        let dir = tempfile::tempdir().unwrap();
        let pid_file = dir.path().join("pid");
        // A child shell writes its pid and then becomes kerf (exec), in the foreground.
        let cmd = format!(
            "sh -c 'echo $$ > {}; exec {} explore --hash-embedder --no-cache {}'; echo KERF-EXITED-$?; stty -a | grep -o -- '-*icanon' | sed 's/^/TTY-/'; sleep 600",
            pid_file.display(),
            env!("CARGO_BIN_EXE_kerf"),
            demo.display()
        );
        let s = Session::start(
            &format!("kerf-test-sig{sig}-{}", std::process::id()),
            dir.path(),
            &cmd,
        );
        s.wait_for("window 256");
        let pid = std::fs::read_to_string(&pid_file).unwrap();
        let kill = Command::new("kill")
            .args([&format!("-{sig}"), pid.trim()])
            .status()
            .unwrap();
        assert!(kill.success());
        let end = s.wait_for("TTY-");
        assert!(end.contains("KERF-EXITED-130"), "SIG{sig}: {end}");
        assert!(
            end.contains("kerf explore stopped by a signal"),
            "SIG{sig}: {end}"
        );
        assert!(
            end.contains("TTY-icanon"),
            "SIG{sig}: terminal back in cooked mode: {end}"
        );
        assert!(
            !end.contains("window 256"),
            "SIG{sig}: alternate screen left: {end}"
        );
    }
}
