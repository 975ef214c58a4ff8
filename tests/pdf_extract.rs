//! PDF extraction (`kerf::extract::pdf`) checked against outside sources: the Debian FAQ's PDF
//! edition (Debian package debian-faq 11.1, fetched by scripts/fetch-testdata) against the plain
//! text edition of the same release and against poppler's `pdftotext` (Debian package
//! poppler-utils), its outline against the plain-text edition's question headings, and hostile
//! files (truncated, empty, random, not a PDF, encrypted, images only) against the errors the
//! extractor promises.
mod common;

use std::collections::HashMap;
use std::process::Command;
use std::sync::OnceLock;
use std::time::Instant;

use kerf::extract::pdf::extract;
use kerf::extract::{ExtractError, Extracted};
use lopdf::{dictionary, Document, Object, Stream, StringFormat};

/// The FAQ's PDF edition, extracted once for all tests (and timed).
fn faq() -> &'static Extracted {
    static FAQ: OnceLock<Extracted> = OnceLock::new();
    FAQ.get_or_init(|| {
        let path = common::testdata("debian-faq/debian-faq.en.pdf");
        let bytes = std::fs::read(&path).expect("read the FAQ PDF");
        let t = Instant::now();
        let ex = extract(&bytes, "debian-faq.en.pdf").expect("the FAQ PDF extracts");
        eprintln!(
            "extracted {} pages, {} bytes of text in {:.2?} ({} build)",
            ex.report.pages,
            ex.text.len(),
            t.elapsed(),
            if cfg!(debug_assertions) {
                "debug"
            } else {
                "release"
            }
        );
        // KERF_PDF_DUMP=path writes the extracted text out, for reading it beside pdftotext.
        if let Ok(out) = std::env::var("KERF_PDF_DUMP") {
            std::fs::write(out, &ex.text).expect("dump");
        }
        ex
    })
}

/// Words for comparison, the same for both sides: typographic quotes as ASCII, lower case, split
/// on whitespace, what is not a letter or digit stripped from each word's edges, empty words
/// dropped.
fn words(text: &str) -> Vec<String> {
    text.replace(['\u{2019}', '\u{2018}'], "'")
        .replace(['\u{201c}', '\u{201d}'], "\"")
        .to_lowercase()
        .split_whitespace()
        .map(|w| w.trim_matches(|c: char| !c.is_alphanumeric()).to_string())
        .filter(|w| !w.is_empty())
        .collect()
}

/// Letters and digits only, lower case: for finding words whatever the spacing and hyphens.
fn letters(text: &str) -> String {
    text.chars()
        .filter(|c| c.is_alphanumeric())
        .flat_map(char::to_lowercase)
        .collect()
}

/// Source: the plain-text edition of the same FAQ release (debian-faq.en.txt). The word
/// sequences are diffed with the `similar` crate (Myers); similarity = 2*M/(a+b) as Python's
/// difflib defines its ratio, M the words in equal runs. The bar is 0.95.
#[test]
fn faq_text_matches_the_plain_text_edition() {
    let txt = std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt"))
        .expect("read the plain-text FAQ");
    let a = words(&txt);
    let b = words(&faq().text);
    let mut capture = similar::algorithms::Capture::new();
    let Ok(()) = similar::algorithms::myers::diff_deadline_raw(
        &mut capture,
        &a,
        0..a.len(),
        &b,
        0..b.len(),
        None,
    );
    let ops = capture.into_ops();
    let ratio = similar::diff_ratio(&ops, a.len(), b.len());
    eprintln!(
        "word-sequence similarity to the plain-text edition: {ratio:.4} ({} vs {} words)",
        a.len(),
        b.len()
    );
    assert!(ratio >= 0.95, "similarity {ratio:.4} is below the bar 0.95");
}

/// Source: poppler's `pdftotext -f N -l N` (no -layout: reading order) on the page the extractor
/// says holds a paragraph. For 30 paragraphs spread over the document, the first five words
/// (compared as letters and digits only, so line-end hyphens and spacing do not matter) must be
/// on that page in poppler's text.
#[test]
fn faq_pages_agree_with_pdftotext() {
    let ex = faq();
    let pdf = common::testdata("debian-faq/debian-faq.en.pdf");
    // Paragraphs with their page (1-based) and first five words.
    let mut paras = Vec::new();
    for (i, range) in ex.pages.iter().enumerate() {
        let mut at = range.start;
        for para in ex.text[range.clone()].split("\n\n") {
            let w: Vec<&str> = para.split_whitespace().take(5).collect();
            if w.len() == 5 && letters(&w.join(" ")).len() >= 20 {
                paras.push((i + 1, at, w.join(" ")));
            }
            at += para.len() + 2;
        }
    }
    assert!(paras.len() >= 30, "only {} paragraphs", paras.len());
    let step = paras.len() as f64 / 30.0;
    let mut cache: HashMap<usize, String> = HashMap::new();
    let mut misses = Vec::new();
    for k in 0..30 {
        let (page, at, first) = &paras[(k as f64 * step) as usize];
        let poppler = cache
            .entry(*page)
            .or_insert_with(|| poppler_page(&pdf, *page));
        if !poppler.contains(&letters(first)) {
            misses.push(format!("page {page} (byte {at}): {first:?}"));
        }
    }
    eprintln!(
        "pages check: {}/30 paragraphs found on their page by pdftotext",
        30 - misses.len()
    );
    assert!(
        misses.is_empty(),
        "not on the page pdftotext shows:\n{}",
        misses.join("\n")
    );
}

/// Chapters as (number, title).
type ChapterTitles = Vec<(usize, String)>;

/// Chapter titles by number ("Chapter\u{a0}N.\u{a0}Title" lines) and the question headings with
/// their chapter, by the parse rule of tests/reference/debian_faq.py (tests/common/faq.rs).
fn plain_text_questions(text: &str) -> (ChapterTitles, common::faq::Questions) {
    let chapters = text
        .lines()
        .filter_map(|l| l.strip_prefix("Chapter\u{a0}"))
        .filter_map(|rest| rest.split_once(".\u{a0}"))
        .map(|(n, title)| (n.parse().expect("chapter number"), title.trim().to_string()))
        .collect();
    (chapters, common::faq::parse(text).1)
}

/// `pdftotext -f N -l N` of one page (poppler-utils; reading order, no -layout), as letters.
fn poppler_page(pdf: &std::path::Path, page: usize) -> String {
    let out = Command::new("pdftotext")
        .args(["-f", &page.to_string(), "-l", &page.to_string()])
        .arg(pdf)
        .arg("-")
        .output()
        .expect("pdftotext (Debian package poppler-utils) must be installed");
    assert!(out.status.success(), "pdftotext failed on page {page}");
    letters(&String::from_utf8_lossy(&out.stdout))
}

/// Source: the plain-text edition's question headings (119 over 16 chapters). Each must be a
/// heading from the PDF's outline, after its chapter's heading and nested deeper than it, with
/// no other top-level heading between them.
#[test]
fn faq_outline_gives_every_question_under_its_chapter() {
    let ex = faq();
    let txt = std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt"))
        .expect("read the plain-text FAQ");
    let (chapters, questions) = plain_text_questions(&txt);
    assert_eq!(
        questions.len(),
        119,
        "the parse rule finds the 119 questions"
    );
    assert!(!ex.headings.is_empty(), "the FAQ PDF has bookmarks");
    let chapter_title: HashMap<usize, String> =
        chapters.iter().map(|(n, t)| (*n, letters(t))).collect();
    let mut found = 0;
    let mut placed = 0;
    let mut missing = Vec::new();
    let mut from = 0;
    for (q, ch) in &questions {
        let want = letters(q);
        let hit = (from..ex.headings.len())
            .chain(0..from)
            .find(|&j| letters(&ex.headings[j].title) == want);
        let Some(j) = hit else {
            missing.push(format!("not in the outline: {q}"));
            continue;
        };
        from = j + 1;
        let h = &ex.headings[j];
        // The nearest heading above it at a smaller level number is its chapter.
        let parent = ex.headings[..j].iter().rev().find(|p| p.level == 1);
        let chapter_ok = parent
            .is_some_and(|p| letters(&p.title).ends_with(&chapter_title[ch]) && h.level > p.level);
        if chapter_ok {
            found += 1;
        } else {
            missing.push(format!("not under chapter {ch}: {q} (level {})", h.level));
        }
        if !h.bytes.is_empty() && letters(&ex.text[h.bytes.clone()]).contains(&want) {
            placed += 1;
        }
    }
    eprintln!(
        "outline: {found}/119 questions are headings under their chapter; {placed} placed on \
         their title's text ({} headings in all)",
        ex.headings.len()
    );
    assert!(missing.is_empty(), "{}", missing.join("\n"));
}

/// Source: the FAQ PDF's own pages (pdftotext shows a page number at the foot of each page, and
/// a chapter/section header at the top of most). Page numbers are running lines and must be
/// gone: no page's text starts or ends with a paragraph that is only a number (arabic or roman).
/// (A lone footnote mark "1" floats mid-page in chapter 6: that one is text.)
#[test]
fn faq_running_lines_are_dropped_and_reported() {
    let ex = faq();
    eprintln!(
        "dropped {} chars of running lines: {:?}",
        ex.report.dropped_chars, ex.report.dropped
    );
    eprintln!(
        "joined hyphens: {}; pages {}, empty {}",
        ex.report.joined_hyphens, ex.report.pages, ex.report.empty_pages
    );
    assert_eq!(ex.report.pages, 73, "pdfinfo says 73 pages");
    let number = |p: &str| {
        let p = p.trim();
        !p.is_empty()
            && (p.chars().all(|c| c.is_ascii_digit()) || p.chars().all(|c| "ivxlc".contains(c)))
    };
    assert!(
        ex.report.dropped.iter().any(|l| number(l)),
        "a page number is among the dropped lines"
    );
    let mut left = Vec::new();
    for (i, range) in ex.pages.iter().enumerate() {
        let page = &ex.text[range.clone()];
        let paras: Vec<&str> = page.split("\n\n").collect();
        for edge in [paras.first(), paras.last()].into_iter().flatten() {
            if number(edge) {
                left.push(format!("page {}: {edge:?}", i + 1));
            }
        }
    }
    assert!(left.is_empty(), "page numbers left in the text: {left:?}");
    assert!(
        ex.report.joined_hyphens > 0,
        "the FAQ has words hyphenated at line ends"
    );
}

/// Expect a Broken error, print it.
fn assert_broken(bytes: &[u8], what: &str) -> String {
    match extract(bytes, what) {
        Err(e @ ExtractError::Broken { .. }) => {
            eprintln!("{e}");
            e.to_string()
        }
        other => panic!("{what}: expected Broken, got {other:?}"),
    }
}

/// Hostile input (made here from the FAQ files or by hand): truncated, empty, random bytes,
/// random bytes behind a PDF header, and a text file named .pdf are all Broken, with no panic.
#[test]
fn broken_files_are_refused_without_panic() {
    let pdf = std::fs::read(common::testdata("debian-faq/debian-faq.en.pdf")).expect("read");
    assert_broken(&pdf[..pdf.len() / 2], "truncated.pdf");
    assert!(assert_broken(b"", "empty.pdf").contains("no %PDF header"));
    // Deterministic random bytes (a linear congruential generator).
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let random: Vec<u8> = (0..65_536)
        .map(|_| {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (state >> 56) as u8
        })
        .collect();
    assert!(assert_broken(&random, "random.pdf").contains("no %PDF header"));
    let mut headed = b"%PDF-1.5\n".to_vec();
    headed.extend_from_slice(&random);
    assert_broken(&headed, "random-after-header.pdf");
    let txt = std::fs::read(common::testdata("debian-faq/debian-faq.en.txt")).expect("read");
    assert!(assert_broken(&txt, "debian-faq.en.txt.pdf").contains("no %PDF header"));
}

/// A one-font PDF written with lopdf: one page per content stream, resources shared.
fn small_pdf(contents: &[&[u8]], with_image: bool, encrypt: bool) -> Vec<u8> {
    let mut doc = Document::with_version("1.5");
    let pages_id = doc.new_object_id();
    let font_id = doc.add_object(dictionary! {
        "Type" => "Font",
        "Subtype" => "Type1",
        "BaseFont" => "Helvetica",
    });
    let mut resources = dictionary! { "Font" => dictionary! { "F1" => font_id } };
    if with_image {
        let image = Stream::new(
            dictionary! {
                "Type" => "XObject",
                "Subtype" => "Image",
                "Width" => 2,
                "Height" => 2,
                "ColorSpace" => "DeviceGray",
                "BitsPerComponent" => 8,
            },
            vec![0, 255, 255, 0],
        );
        let image_id = doc.add_object(image);
        resources.set("XObject", dictionary! { "Im1" => image_id });
    }
    let resources_id = doc.add_object(resources);
    let mut kids = Vec::new();
    for content in contents {
        let content_id = doc.add_object(Stream::new(dictionary! {}, content.to_vec()));
        let page_id = doc.add_object(dictionary! {
            "Type" => "Page",
            "Parent" => pages_id,
            "Contents" => content_id,
        });
        kids.push(Object::Reference(page_id));
    }
    let count = kids.len() as i64;
    doc.objects.insert(
        pages_id,
        Object::Dictionary(dictionary! {
            "Type" => "Pages",
            "Kids" => kids,
            "Count" => count,
            "Resources" => resources_id,
            "MediaBox" => vec![0.into(), 0.into(), 595.into(), 842.into()],
        }),
    );
    let catalog_id = doc.add_object(dictionary! { "Type" => "Catalog", "Pages" => pages_id });
    doc.trailer.set("Root", catalog_id);
    if encrypt {
        // A standard security handler dictionary (RC4, 40 bits) whose O and U entries no
        // password opens: the file says it is encrypted and nothing decrypts it.
        let encrypt_id = doc.add_object(dictionary! {
            "Filter" => "Standard",
            "V" => 1,
            "R" => 2,
            "O" => Object::String(vec![0x11; 32], StringFormat::Hexadecimal),
            "U" => Object::String(vec![0x22; 32], StringFormat::Hexadecimal),
            "P" => -4,
        });
        doc.trailer.set("Encrypt", encrypt_id);
        doc.trailer.set(
            "ID",
            vec![
                Object::String(vec![1; 16], StringFormat::Hexadecimal),
                Object::String(vec![1; 16], StringFormat::Hexadecimal),
            ],
        );
    }
    let mut out = Vec::new();
    doc.save_to(&mut out).expect("write the PDF");
    out
}

const HELLO: &[u8] = b"BT /F1 24 Tf 72 700 Td (Hello encrypted world) Tj ET";

/// Source: a PDF written here with lopdf. Unencrypted it extracts (the control: the text is
/// read); with an /Encrypt entry in its trailer it is refused as Encrypted.
#[test]
fn encrypted_pdf_is_refused() {
    let plain = extract(&small_pdf(&[HELLO], false, false), "plain.pdf").expect("control");
    assert_eq!(plain.text, "Hello encrypted world");
    assert_eq!(plain.pages, vec![0..plain.text.len()]);
    match extract(&small_pdf(&[HELLO], false, true), "locked.pdf") {
        Err(e @ ExtractError::Encrypted { .. }) => eprintln!("{e}"),
        other => panic!("expected Encrypted, got {other:?}"),
    }
}

/// Source: a PDF written here with lopdf whose two pages only draw an image XObject: NoText,
/// with its page count.
#[test]
fn images_only_pdf_has_no_text() {
    let draw: &[u8] = b"q 100 0 0 100 50 50 cm /Im1 Do Q";
    match extract(&small_pdf(&[draw, draw], true, false), "scan.pdf") {
        Err(ExtractError::NoText { pages, .. }) => assert_eq!(pages, 2),
        other => panic!("expected NoText, got {other:?}"),
    }
    // The control: a text page beside an image page gives text and one empty page.
    let ex = extract(&small_pdf(&[draw, HELLO], true, false), "mixed.pdf").expect("mixed");
    assert_eq!(ex.report.empty_pages, 1);
    assert_eq!(ex.pages, vec![0..0, 0..ex.text.len()]);
}

/// Source: poppler's `pdftotext -f N -l N` again, now for chunk records as `kerf cut` writes
/// them (the check): for 30 chunks spread over the FAQ PDF, the chunk's first words
/// occur on the first page its `pages` names, and `text[bytes]` of `kerf text`'s output is the
/// chunk's text.
#[test]
fn cut_records_name_the_pages_their_words_are_on() {
    common::model_dir();
    let tmp = tempfile::tempdir().unwrap();
    let pdf = common::testdata("debian-faq/debian-faq.en.pdf");
    let profile = common::repo().join("profiles/sentences-128.toml");
    let cut = common::ok(&common::kerf(&[
        "cut",
        "-p",
        profile.to_str().unwrap(),
        pdf.to_str().unwrap(),
    ]));
    let text_file = tmp.path().join("faq.txt");
    common::ok(&common::kerf(&[
        "text",
        pdf.to_str().unwrap(),
        "-o",
        text_file.to_str().unwrap(),
    ]));
    let text = std::fs::read_to_string(&text_file).unwrap();
    let records: Vec<serde_json::Value> = cut
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert!(records.len() > 100, "{}", records.len());
    let step = records.len() / 30;
    let mut checked = 0;
    for r in records.iter().step_by(step).take(30) {
        assert_eq!(r["extracted"], "pdf");
        let (s, e) = (
            r["bytes"][0].as_u64().unwrap() as usize,
            r["bytes"][1].as_u64().unwrap() as usize,
        );
        assert_eq!(&text[s..e], r["text"].as_str().unwrap());
        let page = r["pages"][0].as_u64().unwrap();
        assert!(page <= r["pages"][1].as_u64().unwrap());
        let first: Vec<&str> = r["text"]
            .as_str()
            .unwrap()
            .split_whitespace()
            .take(4)
            .collect();
        let poppler = poppler_page(&pdf, page as usize);
        assert!(
            poppler.contains(&letters(&first.join(" "))),
            "chunk {} names page {page}, but {first:?} is not on it",
            r["chunk"]
        );
        checked += 1;
    }
    assert_eq!(checked, 30);
}

/// Through the binary: a damaged PDF stops the run with the file named and a non-zero exit; a
/// PDF without a text layer is left out with a notice naming it, not embedded as empty.
#[test]
fn the_binary_names_damaged_and_textless_pdfs() {
    common::model_dir();
    let tmp = tempfile::tempdir().unwrap();
    let faq = std::fs::read(common::testdata("debian-faq/debian-faq.en.pdf")).unwrap();
    let half = tmp.path().join("half.pdf");
    std::fs::write(&half, &faq[..faq.len() / 2]).unwrap();
    let err = common::fails(&common::kerf(&["survey", half.to_str().unwrap()]));
    assert!(err.contains("half.pdf: damaged"), "{err}");
    let dir = tmp.path().join("corpus");
    std::fs::create_dir(&dir).unwrap();
    let draw: &[u8] = b"q 100 0 0 100 50 50 cm /Im1 Do Q";
    std::fs::write(dir.join("scan.pdf"), small_pdf(&[draw, draw], true, false)).unwrap();
    std::fs::write(dir.join("note.txt"), "The halt opens at ten.").unwrap();
    let out = common::kerf(&["survey", dir.to_str().unwrap()]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(
        stderr.contains("scan.pdf") && stderr.contains("no text layer on any of its 2 pages"),
        "{stderr}"
    );
    assert!(String::from_utf8_lossy(&out.stdout).contains("corpus: 1 documents"));
}
