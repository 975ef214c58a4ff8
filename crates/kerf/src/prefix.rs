//! The text put in front of every chunk: fixed, or a template naming the document's title and
//! the chunk's section path.
//!
//! A fixed prefix (`"passage: "`) costs the same tokens on every chunk and is counted once when
//! a plan is resolved. A template (`"{title} > {section}: "`) renders differently per chunk, so
//! the plan keeps a fixed room for it (`[cut] prefix_limit`, [`DEFAULT_LIMIT`] tokens unless
//! set) and every rendered prefix is shortened to fit that room: the outermost headings go
//! first, then the title, then words from the end of the innermost heading. The room is taken
//! out of the window before any text goes in, so the fit guarantee holds whatever a heading
//! says.
//!
//! Rendering rules, all here and nowhere else:
//! - `{title}` is the document's own title (HTML `<title>`, PDF Title), else its first
//!   heading, else its file name without the extension; `{section}` is the headings the chunk
//!   starts under, outermost first, joined by " > " (without the outermost when the template
//!   names the title and that heading is the title).
//! - A field that renders empty takes the separator before it with it (the one after it when it
//!   is the first field); text before the first field and after the last always stays.
//! - A rendered prefix that does not end in whitespace gets a space, so its tokens never merge
//!   with the chunk's first word.
//! - `{{` and `}}` stand for braces; any other `{name}` is refused when the plan is resolved.
use std::collections::HashMap;
use std::path::Path;

use serde::Serialize;

use crate::corpus::Document;
use crate::extract::sections::SectionIndex;
use crate::extract::Heading;

/// Tokens a template's room holds when the profile does not say.
pub const DEFAULT_LIMIT: usize = 32;

/// Joins the headings of a section path.
pub const SECTION_JOIN: &str = " > ";

/// A field a template can name.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Field {
    /// The document's title.
    Title,
    /// The chunk's section path.
    Section,
}

/// One piece of a template.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Part {
    /// Text as written.
    Text(String),
    /// A field filled in per chunk.
    Field(Field),
}

/// A parsed prefix.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Template {
    parts: Vec<Part>,
}

impl Template {
    /// Parse a prefix as written in a profile.
    pub fn parse(s: &str) -> Result<Self, String> {
        let mut parts = Vec::new();
        let mut text = String::new();
        let mut rest = s;
        while let Some(i) = rest.find(['{', '}']) {
            text.push_str(&rest[..i]);
            let tail = &rest[i..];
            if tail.starts_with("{{") || tail.starts_with("}}") {
                text.push_str(&tail[..1]);
                rest = &tail[2..];
                continue;
            }
            if tail.starts_with('}') {
                return Err(format!(
                    "a lone `}}` at byte {} (write `}}}}` for a brace)",
                    s.len() - tail.len()
                ));
            }
            let Some(close) = tail.find('}') else {
                return Err(format!(
                    "`{{` at byte {} is not closed (write `{{{{` for a brace)",
                    s.len() - tail.len()
                ));
            };
            let field = match &tail[1..close] {
                "title" => Field::Title,
                "section" => Field::Section,
                other => {
                    return Err(format!(
                        "unknown field `{{{other}}}`; a prefix can name {{title}} and {{section}}"
                    ))
                }
            };
            if !text.is_empty() {
                parts.push(Part::Text(std::mem::take(&mut text)));
            }
            parts.push(Part::Field(field));
            rest = &tail[close + 1..];
        }
        text.push_str(rest);
        if !text.is_empty() {
            parts.push(Part::Text(text));
        }
        Ok(Self { parts })
    }

    /// The pieces in order.
    pub fn parts(&self) -> &[Part] {
        &self.parts
    }

    /// The text when the template names no field.
    pub fn fixed(&self) -> Option<String> {
        let mut out = String::new();
        for p in &self.parts {
            match p {
                Part::Text(t) => out.push_str(t),
                Part::Field(_) => return None,
            }
        }
        Some(out)
    }

    /// Whether the template names `f`.
    pub fn names(&self, f: Field) -> bool {
        self.parts.contains(&Part::Field(f))
    }

    /// The prefix for a title and a section path (see the module's rendering rules).
    pub fn render(&self, title: &str, section: &[String]) -> String {
        let section = section.join(SECTION_JOIN);
        fn text_of<'a>(p: &'a Part, title: &'a str, section: &'a str) -> &'a str {
            match p {
                Part::Text(t) => t,
                Part::Field(Field::Title) => title,
                Part::Field(Field::Section) => section,
            }
        }
        let value = |p| text_of(p, title, &section);
        let fields: Vec<usize> = (0..self.parts.len())
            .filter(|&i| matches!(self.parts[i], Part::Field(_)))
            .collect();
        // An empty field takes the separator before it (between it and the previous field),
        // else, as the first field, the one after it (between it and the next).
        let mut dropped = vec![false; self.parts.len()];
        for (k, &i) in fields.iter().enumerate() {
            if !value(&self.parts[i]).is_empty() {
                continue;
            }
            if k > 0 && matches!(self.parts[i - 1], Part::Text(_)) {
                dropped[i - 1] = true;
            } else if k + 1 < fields.len() && matches!(self.parts[i + 1], Part::Text(_)) {
                dropped[i + 1] = true;
            }
        }
        let mut out: String = self
            .parts
            .iter()
            .zip(&dropped)
            .filter(|(_, &d)| !d)
            .map(|(p, _)| value(p))
            .collect();
        if !fields.is_empty() && !out.is_empty() && !out.ends_with(char::is_whitespace) {
            out.push(' ');
        }
        out
    }
}

/// Give each chunk of a document its own prefix when the plan's is a template (`headings`: the
/// document's, see `sections::of_document`); a fixed prefix leaves the chunks as they are.
pub fn attach(
    plan: &crate::plan::ResolvedPlan,
    doc: &Document,
    headings: &[Heading],
    chunks: &mut [crate::split::Chunk],
    count: &dyn Fn(&str) -> usize,
) {
    if !plan.templated() {
        return;
    }
    let prefixes = of_chunks(
        &plan.prefix,
        doc,
        headings,
        chunks.iter().map(|c| c.byte_range.start),
        plan.prefix_tokens,
        count,
    );
    for (c, p) in chunks.iter_mut().zip(prefixes) {
        c.prefix = Some(p);
    }
}

/// The prefix of one chunk and its tokens.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ChunkPrefix {
    /// The text put before the chunk.
    pub text: String,
    /// Its content tokens (at most the plan's room).
    pub tokens: usize,
}

/// A document's title for `{title}`: its own, else its first heading, else its file name
/// without the extension.
pub fn title_of(doc: &Document, headings: &[Heading]) -> String {
    if let Some(t) = doc.layout.as_ref().and_then(|l| l.title.as_deref()) {
        let t = t.trim();
        if !t.is_empty() {
            return t.to_string();
        }
    }
    if let Some(h) = headings.iter().find(|h| !h.title.trim().is_empty()) {
        return h.title.trim().to_string();
    }
    let id = doc.id.rsplit(['/', '\\']).next().unwrap_or(&doc.id);
    Path::new(id)
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or(id)
        .to_string()
}

/// `template` rendered for `title` and `section`, shortened until its tokens (by `count`) fit
/// `room`: outermost headings first, then the title, then the innermost heading's last words.
/// An empty prefix when nothing fits.
pub fn fitted(
    template: &Template,
    title: &str,
    section: &[String],
    room: usize,
    count: &dyn Fn(&str) -> usize,
) -> ChunkPrefix {
    let try_one = |title: &str, section: &[String]| -> Option<ChunkPrefix> {
        let text = template.render(title, section);
        let tokens = if text.is_empty() { 0 } else { count(&text) };
        (tokens <= room).then_some(ChunkPrefix { text, tokens })
    };
    // Candidates in the order the module's doc gives, the first that fits taken.
    let inner: &[String] = match section.last() {
        Some(last) if template.names(Field::Section) => std::slice::from_ref(last),
        _ => &[],
    };
    let mut candidates: Vec<(&str, Vec<String>)> = (0..section.len().max(1))
        .map(|k| (title, section[k.min(section.len())..].to_vec()))
        .collect();
    candidates.push(("", inner.to_vec()));
    if let Some(last) = inner.first() {
        let words: Vec<&str> = last.split_whitespace().collect();
        candidates.extend(
            (1..words.len())
                .rev()
                .map(|n| ("", vec![words[..n].join(" ")])),
        );
        candidates.push(("", Vec::new()));
    }
    candidates
        .into_iter()
        .find_map(|(t, s)| try_one(t, &s))
        .unwrap_or(ChunkPrefix {
            text: String::new(),
            tokens: 0,
        })
}

/// The prefixes of a document's chunks, one per chunk start (`starts`, byte offsets), rendered
/// from the document's title and the section each chunk starts under and fitted to `room`
/// (tokens by `count`).
pub fn of_chunks(
    template: &Template,
    doc: &Document,
    headings: &[Heading],
    starts: impl IntoIterator<Item = usize>,
    room: usize,
    count: &dyn Fn(&str) -> usize,
) -> Vec<ChunkPrefix> {
    let title = if template.names(Field::Title) {
        title_of(doc, headings)
    } else {
        String::new()
    };
    let index = if template.names(Field::Section) {
        SectionIndex::new(headings)
    } else {
        SectionIndex::default()
    };
    let mut seen: HashMap<Vec<String>, ChunkPrefix> = HashMap::new();
    starts
        .into_iter()
        .map(|at| {
            let mut path = index.path_at(at);
            if !title.is_empty() && path.first().is_some_and(|h| h.trim() == title) {
                path.remove(0); // the title is the outermost heading: said once
            }
            if let Some(p) = seen.get(&path) {
                return p.clone();
            }
            let p = fitted(template, &title, &path, room, count);
            seen.insert(path, p.clone());
            p
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn s(v: &[&str]) -> Vec<String> {
        v.iter().map(|x| x.to_string()).collect()
    }

    #[test]
    fn parse_reads_fields_braces_and_refuses_unknown_names() {
        let t = Template::parse("{title} > {section}: ").unwrap();
        assert_eq!(
            t.parts(),
            &[
                Part::Field(Field::Title),
                Part::Text(" > ".into()),
                Part::Field(Field::Section),
                Part::Text(": ".into())
            ]
        );
        assert_eq!(t.fixed(), None);
        let t = Template::parse("passage: {{x}} ").unwrap();
        assert_eq!(t.fixed().as_deref(), Some("passage: {x} "));
        assert!(Template::parse("{author}: ")
            .unwrap_err()
            .contains("unknown field `{author}`"));
        assert!(Template::parse("{title")
            .unwrap_err()
            .contains("not closed"));
        assert!(Template::parse("a } b").unwrap_err().contains("lone"));
        assert_eq!(Template::parse("").unwrap().fixed().as_deref(), Some(""));
    }

    #[test]
    fn render_drops_the_separator_of_an_empty_field_and_ends_in_a_space() {
        let t = Template::parse("{title} > {section}: ").unwrap();
        assert_eq!(
            t.render("Pump manual", &s(&["3 Valves", "3.2 Seals"])),
            "Pump manual > 3 Valves > 3.2 Seals: "
        );
        assert_eq!(t.render("Pump manual", &[]), "Pump manual: ");
        assert_eq!(t.render("", &s(&["Seals"])), "Seals: ");
        assert_eq!(t.render("", &[]), ": ");
        let t = Template::parse("{section}").unwrap();
        assert_eq!(t.render("x", &s(&["Seals"])), "Seals ");
        assert_eq!(t.render("x", &[]), "");
        let t = Template::parse("passage: [{title}] ").unwrap();
        assert_eq!(t.render("", &[]), "passage: [] ");
    }

    /// Tokens as words, for checking the shortening order without a tokenizer.
    fn words(t: &str) -> usize {
        t.split_whitespace().count()
    }

    #[test]
    fn fitting_drops_outer_headings_then_the_title_then_inner_words() {
        let t = Template::parse("{title} > {section}: ").unwrap();
        let path = s(&["Part two", "Pumps and valves", "Seal wear limits"]);
        let fit = |room| fitted(&t, "Plant manual", &path, room, &words).text;
        assert_eq!(
            fit(20),
            "Plant manual > Part two > Pumps and valves > Seal wear limits: "
        );
        assert_eq!(
            fit(11),
            "Plant manual > Pumps and valves > Seal wear limits: "
        );
        assert_eq!(fit(7), "Plant manual > Seal wear limits: ");
        assert_eq!(fit(5), "Seal wear limits: ");
        assert_eq!(fit(2), "Seal wear: ");
        assert_eq!(fit(1), "Seal: ");
        assert_eq!(fit(0), "");
        for room in 0..20 {
            let p = fitted(&t, "Plant manual", &path, room, &words);
            assert!(
                p.tokens <= room && p.tokens == words(&p.text),
                "{room}: {p:?}"
            );
        }
    }

    #[test]
    fn the_title_falls_back_to_the_first_heading_then_the_file_name() {
        let doc = Document::plain("reports/2031/pump-audit.md", "x", "text");
        assert_eq!(title_of(&doc, &[]), "pump-audit");
        let h = Heading {
            level: 1,
            title: "Pump audit".into(),
            bytes: 0..10,
        };
        assert_eq!(title_of(&doc, &[h]), "Pump audit");
    }
}
