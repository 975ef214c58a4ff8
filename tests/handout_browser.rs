//! The HTML handout opened in a real browser: Debian's Chromium, headless.
//!
//! `kerf compare --handout` runs over the demo corpus plus one document and one reference whose
//! text holds markup (`<script>`, `&`). Chromium then loads the file with every host name
//! unresolvable and checks, from the DOM it built:
//! - the plan table, the chart and one section per reference are there;
//! - the markup in document and reference text arrived as text, not as elements (Chromium's own
//!   HTML parser is the reference for the escaping);
//! - the page fetched nothing: the browser's Resource Timing list is empty, and every link in the
//!   file is an in-page anchor;
//! - the inline script sorts the plan table; without the script the same content is there and
//!   the chunk viewers are plain `<details>` elements.
//!
//! A screenshot is saved under the target folder (its path is printed). The test fails, never
//! skips, when Chromium is missing: `.ci/run` installs it.
mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

use common::{kerf_in, ok, repo};

fn chromium() -> PathBuf {
    for name in ["chromium", "chromium-browser"] {
        if let Ok(out) = Command::new("sh")
            .arg("-c")
            .arg(format!("command -v {name}"))
            .output()
        {
            let p = String::from_utf8_lossy(&out.stdout).trim().to_string();
            if out.status.success() && !p.is_empty() {
                return PathBuf::from(p);
            }
        }
    }
    panic!("chromium not found: install it (Debian: apt-get install chromium); .ci/run does");
}

/// Run headless Chromium on a file with the network made unreachable; returns (stdout, stderr).
fn browse(page: &Path, profile: &Path, extra: &[&str]) -> (String, String) {
    let out = Command::new("timeout")
        .arg("180")
        .arg(chromium())
        .args([
            "--headless",
            "--disable-gpu",
            "--no-sandbox",
            "--no-first-run",
            "--disable-extensions",
            "--disable-background-networking",
            "--host-resolver-rules=MAP * ~NOTFOUND",
            "--enable-logging=stderr",
            "--v=0",
            "--virtual-time-budget=5000",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(extra)
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("chromium runs");
    let (so, se) = (
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    );
    assert!(
        out.status.success(),
        "chromium failed: {:?}\n{se}",
        out.status
    );
    (so, se)
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        if e.file_type().unwrap().is_file() {
            std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
        }
    }
}

/// The value of attribute `name` on the first element that has it, in serialised HTML.
fn attr<'a>(html: &'a str, name: &str) -> Option<&'a str> {
    let key = format!(" {name}=\"");
    let start = html.find(&key)? + key.len();
    Some(&html[start..start + html[start..].find('"')?])
}

#[test]
fn the_demo_handout_opens_in_chromium_and_fetches_nothing() {
    let browser = chromium();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    copy_dir(&repo().join("demo-texts"), &d.join("corpus"));
    std::fs::remove_file(d.join("corpus/references.toml")).unwrap();
    std::fs::write(
        d.join("corpus/markup-notice.txt"),
        "Tea urn notice.\n\nVolunteers wrote <script>alert('x')</script> & <b>bold</b> on the \
         tea urn rota at Pennick, and the urn is to be descaled every Friday by the booking office.\n",
    )
    .unwrap();
    let mut refs = std::fs::read_to_string(repo().join("demo-texts/references.toml")).unwrap();
    refs.push_str(
        "\n[[reference]]\nid = \"q-markup-<urn>\"\ntext = \"Who wrote <script>alert('x')</script> & what on the tea urn rota?\"\nexpect = [\"markup-notice.txt\"]\n",
    );
    std::fs::write(d.join("refs.toml"), &refs).unwrap();
    let ref_ids: Vec<String> = refs
        .lines()
        .filter_map(|l| l.strip_prefix("id = \""))
        .map(|l| l.trim_end_matches('"').to_string())
        .collect();
    assert!(ref_ids.len() > 10, "{ref_ids:?}");

    let artefacts = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| repo().join("target"))
        .join("kerf-artefacts");
    std::fs::create_dir_all(&artefacts).unwrap();
    let page = d.join("handout.html");
    ok(&kerf_in(
        d,
        &[
            "compare",
            "--refs",
            "refs.toml",
            "corpus",
            "-p",
            &repo()
                .join("profiles/sentences-256.toml")
                .display()
                .to_string(),
            "-p",
            &repo()
                .join("profiles/paragraphs-256-overlap.toml")
                .display()
                .to_string(),
            "--cache",
            "c.sqlite",
            "-q",
            "--handout",
            "handout.html",
        ],
    ));
    let html = std::fs::read_to_string(&page).unwrap();
    std::fs::copy(&page, artefacts.join("handout-demo.html")).unwrap();

    // Static: nothing in the file points outside it.
    for needle in [
        " src=", "srcset=", "@import", "url(", "<link", "<iframe", "<img",
    ] {
        assert!(!html.contains(needle), "the handout contains `{needle}`");
    }
    let mut rest = html.as_str();
    while let Some(i) = rest.find(" href=\"") {
        rest = &rest[i + 7..];
        assert!(
            rest.starts_with('#'),
            "a link leaves the page: {}",
            &rest[..40.min(rest.len())]
        );
    }
    assert!(
        !html.contains("<script>alert"),
        "document text reached the file unescaped"
    );

    // With script: the probe records what the browser fetched and sorts the plan table.
    let probe = d.join("probe.html");
    let probe_script = r#"<script>addEventListener('load',function(){
      var t=document.getElementById('plan-table');var b=t.tHead.rows[0].cells[1].querySelector('button');
      b.click();b.click();
      document.body.setAttribute('data-probe-sorted',[].map.call(t.tBodies[0].rows,function(r){return r.cells[1].getAttribute('data-key');}).join(' '));
      document.body.setAttribute('data-probe-fetched',performance.getEntriesByType('resource').map(function(e){return e.name;}).join(' ')||'nothing');
      document.body.setAttribute('data-probe-scripts',String(document.scripts.length));
    });</script></body>"#;
    std::fs::write(&probe, html.replacen("</body>", probe_script, 1)).unwrap();
    let (dom, log) = browse(&probe, &d.join("profile-1"), &["--dump-dom"]);
    assert!(
        dom.contains("id=\"plan-table\""),
        "no plan table in the DOM"
    );
    assert!(
        dom.contains("class=\"kerf-chart\"") && dom.contains("id=\"plot-area\""),
        "no chart"
    );
    for id in &ref_ids {
        let esc = id
            .replace('&', "&amp;")
            .replace('<', "&lt;")
            .replace('>', "&gt;");
        assert!(
            dom.contains(&format!("data-reference=\"{esc}\"")),
            "no section for reference {id}"
        );
    }
    assert_eq!(
        attr(&dom, "data-probe-fetched"),
        Some("nothing"),
        "the page fetched something"
    );
    for bad in ["net::ERR_", "Failed to load resource", "Refused to load"] {
        assert!(
            !log.contains(bad),
            "browser log reports a load: {bad}\n{log}"
        );
    }
    // Escaping, as Chromium parsed it: the markup is text (re-serialised with &lt; and &amp;),
    // and the only scripts are the handout's own and the probe.
    assert!(dom.contains("&lt;script&gt;alert('x')&lt;/script&gt; &amp; &lt;b&gt;bold&lt;/b&gt;"));
    assert!(dom.contains("Who wrote &lt;script&gt;alert('x')&lt;/script&gt; &amp; what"));
    assert_eq!(attr(&dom, "data-probe-scripts"), Some("2"));
    // The script ran: sorted by quality, highest first.
    let keys: Vec<f64> = attr(&dom, "data-probe-sorted")
        .expect("the probe ran")
        .split(' ')
        .map(|k| k.parse().unwrap())
        .collect();
    assert_eq!(keys.len(), 3, "baseline and two plans: {keys:?}");
    assert!(
        keys.windows(2).all(|w| w[0] >= w[1]),
        "not sorted descending: {keys:?}"
    );
    assert!(
        dom.contains("class=\"scripted\""),
        "the inline script did not run"
    );

    // Without script (the handout with its one script element cut out, since a browser with
    // script turned off cannot dump its DOM): the same content, chunk viewers as details.
    let (at, end) = (
        html.find("<script>").unwrap(),
        html.find("</script>").unwrap(),
    );
    let unscripted = d.join("unscripted.html");
    std::fs::write(&unscripted, format!("{}{}", &html[..at], &html[end + 9..])).unwrap();
    let (plain, _) = browse(&unscripted, &d.join("profile-2"), &["--dump-dom"]);
    assert!(!plain.contains("<script"));
    assert!(!plain.contains("class=\"scripted\""));
    assert!(plain.contains("id=\"plan-table\"") && plain.contains("<details class=\"chunk\">"));

    // The picture a person sees.
    let shot = artefacts.join("handout-demo.png");
    let _ = std::fs::remove_file(&shot);
    browse(
        &page,
        &d.join("profile-3"),
        &[
            &format!("--screenshot={}", shot.display()),
            "--window-size=1280,2400",
            "--hide-scrollbars",
        ],
    );
    let png = std::fs::read(&shot).expect("chromium saved a screenshot");
    assert!(
        png.starts_with(b"\x89PNG") && png.len() > 20_000,
        "{} bytes",
        png.len()
    );
    println!(
        "handout screenshot: {} (browser {})",
        shot.display(),
        browser.display()
    );
}

#[test]
fn an_unwritable_handout_path_fails_naming_the_file_and_leaves_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    copy_dir(&repo().join("demo-texts"), &d.join("corpus"));
    let out = kerf_in(
        d,
        &[
            "compare",
            "--refs",
            "corpus/references.toml",
            "corpus",
            "-p",
            &repo()
                .join("profiles/sentences-256.toml")
                .display()
                .to_string(),
            "--cache",
            "c.sqlite",
            "-q",
            "--handout",
            "missing-folder/handout.html",
        ],
    );
    let err = common::fails(&out);
    assert!(err.contains("missing-folder/handout.html"), "{err}");
    assert!(!d.join("missing-folder").exists());
    let leftovers: Vec<_> = std::fs::read_dir(d)
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().contains("handout"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}
