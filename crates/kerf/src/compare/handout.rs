//! The handout: one self-contained HTML file that a team reads to approve a chunking plan.
//!
//! It holds the plan table, the chart (inline SVG), each reference's ranking under each plan
//! with the best chunk's text and lines and how rank and cosine moved from the truncation
//! baseline, the corpus census, the recommended plan's profile as TOML, the model and its
//! limits, and a caution that the file quotes the documents. Nothing is fetched: no scripts,
//! styles, fonts or images from elsewhere. A short inline script sorts tables and opens or
//! closes the chunk viewers; without it the tables read in their given order and each chunk
//! still opens as a `<details>` element.
//!
//! [`Handout`] is plain data; [`ref_sections`] and [`census`] build parts of it from the
//! evaluation's own types, and [`Handout::to_html`] writes it. All text from documents,
//! references and names goes through [`escape`].
use std::fmt::Write as _;
use std::path::Path;

use super::chart::{escape, thousands};
use super::engine::{self, Corpus, PlanEval};
use super::metrics::Summary;
use super::refs::Reference;
use crate::model::ModelInfo;
use crate::plan::ResolvedPlan;
use crate::segment::LineIndex;
use crate::store::StoreError;
use crate::survey::{self, CorpusStats, DocStats};

/// One plan's row in the plan table.
#[derive(Debug, Clone, PartialEq)]
pub struct HandoutPlan {
    /// Plan name.
    pub name: String,
    /// Quality on the handout's metric.
    pub quality: f64,
    /// All ranking metrics.
    pub summary: Summary,
    /// Chunks over the corpus.
    pub chunks: usize,
    /// Encoder-input tokens over the corpus.
    pub input_tokens: usize,
    /// Estimated seconds to embed, where measured.
    pub seconds: Option<f64>,
    /// On the Pareto front.
    pub pareto: bool,
    /// The recommended plan.
    pub recommended: bool,
    /// The truncation baseline.
    pub baseline: bool,
}

/// One document in a reference's ranking under one plan.
#[derive(Debug, Clone, PartialEq)]
pub struct RankRow {
    /// 1-based rank.
    pub rank: usize,
    /// Document id.
    pub doc: String,
    /// Score under the plan.
    pub score: f32,
    /// Whether the reference expects this document.
    pub expected: bool,
    /// Rank under the baseline.
    pub baseline_rank: Option<usize>,
    /// Score minus the baseline's score for the same document.
    pub score_change: Option<f32>,
    /// Index of the best chunk in the document.
    pub chunk: usize,
    /// First and last line (1-based) of the best chunk.
    pub lines: [usize; 2],
    /// The best chunk's text.
    pub text: String,
}

/// A reference's ranking under one plan.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanRanking {
    /// Plan name.
    pub plan: String,
    /// Top documents, best first.
    pub rows: Vec<RankRow>,
}

/// One reference and its rankings.
#[derive(Debug, Clone, PartialEq)]
pub struct RefSection {
    /// Reference id.
    pub id: String,
    /// Reference text.
    pub text: String,
    /// Documents it expects.
    pub expected: Vec<String>,
    /// One ranking per plan, in plan order.
    pub rankings: Vec<PlanRanking>,
}

/// The census part: the corpus against the model's window.
#[derive(Debug, Clone, PartialEq)]
pub struct Census {
    /// Window the census measures against (the baseline's).
    pub window: usize,
    /// Tokens of text a window holds after specials and prefix.
    pub budget: usize,
    /// Corpus figures and histogram.
    pub stats: CorpusStats,
    /// One row per document.
    pub documents: Vec<DocStats>,
}

/// Everything the handout shows.
#[derive(Debug, Clone)]
pub struct Handout {
    /// Heading.
    pub title: String,
    /// How it was made (the command, in words).
    pub made_by: String,
    /// Name of the quality metric.
    pub metric: String,
    /// The plans, in table order.
    pub plans: Vec<HandoutPlan>,
    /// Why the recommended plan was picked.
    pub recommendation: Option<String>,
    /// The chart as SVG.
    pub chart_svg: Option<String>,
    /// Per reference, the rankings.
    pub references: Vec<RefSection>,
    /// The census.
    pub census: Option<Census>,
    /// The recommended plan's profile as TOML.
    pub profile_toml: Option<String>,
    /// The model.
    pub model: ModelInfo,
}

/// Per reference, the top `top` documents under each plan, with the best chunk's text and
/// lines, and rank and score moves against `baseline`.
pub fn ref_sections(
    corpus: &Corpus,
    refs: &[Reference],
    plans: &[&PlanEval],
    baseline: Option<&PlanEval>,
    top: usize,
) -> Vec<RefSection> {
    let mut line_index: Vec<Option<LineIndex>> = vec![None; corpus.docs.len()];
    refs.iter()
        .enumerate()
        .map(|(ri, r)| {
            let mut expected: Vec<String> = r
                .expect
                .iter()
                .filter(|(_, &g)| g > 0)
                .map(|(d, _)| d.clone())
                .collect();
            expected.sort();
            let rankings = plans
                .iter()
                .map(|e| PlanRanking {
                    plan: e.plan.profile.name.clone(),
                    rows: e.scores[ri]
                        .iter()
                        .take(top)
                        .enumerate()
                        .map(|(i, d)| {
                            let doc = &corpus.docs[d.doc];
                            let chunk = &e.chunks[d.doc][d.best_chunk];
                            let li =
                                line_index[d.doc].get_or_insert_with(|| LineIndex::new(&doc.text));
                            let b = baseline.map(|b| &b.scores[ri]);
                            RankRow {
                                rank: i + 1,
                                doc: doc.id.clone(),
                                score: d.score,
                                expected: r.expect.get(&doc.id).is_some_and(|&g| g > 0),
                                baseline_rank: b.and_then(|b| engine::rank_of(b, d.doc)),
                                score_change: b
                                    .and_then(|b| b.iter().find(|x| x.doc == d.doc))
                                    .map(|x| d.score - x.score),
                                chunk: d.best_chunk,
                                lines: [
                                    li.line_of(chunk.byte_range.start),
                                    li.line_of(chunk.byte_range.end.saturating_sub(1)),
                                ],
                                text: doc.text[chunk.byte_range.clone()].to_string(),
                            }
                        })
                        .collect(),
                })
                .collect();
            RefSection {
                id: r.id.clone(),
                text: r.text.clone(),
                expected,
                rankings,
            }
        })
        .collect()
}

/// The census of an analysed corpus against a plan's window.
pub fn census(corpus: &Corpus, plan: &ResolvedPlan) -> Census {
    let documents: Vec<DocStats> = corpus
        .docs
        .iter()
        .zip(&corpus.analyses)
        .map(|(d, a)| survey::doc_stats(d, a, plan))
        .collect();
    Census {
        window: plan.window,
        budget: plan.budget(),
        stats: survey::summarize(&documents, plan),
        documents,
    }
}

const STYLE: &str = r#"
body{font:16px/1.5 Georgia,"DejaVu Serif",serif;color:#1a1a1a;background:#fff;max-width:62rem;margin:0 auto;padding:1rem 1.25rem 4rem}
h1{font-size:1.6rem;margin:.5rem 0 .25rem}h2{font-size:1.25rem;border-bottom:1px solid #999;margin-top:2.2rem}h3{font-size:1.05rem;margin:1.6rem 0 .3rem}
.made{color:#555;margin-top:0}
.caution{border:2px solid #1a1a1a;padding:.6rem .9rem;margin:1rem 0;background:#f7f5ef}
.caution strong{display:block}
nav ol{columns:2;margin:.3rem 0}
table{border-collapse:collapse;margin:.6rem 0;font-size:.92rem}
th,td{border-bottom:1px solid #ccc;padding:.25rem .55rem;text-align:left;vertical-align:top}
th{border-bottom:2px solid #555}
td.n,th.n{text-align:right;font-variant-numeric:tabular-nums}
#plan-table td:first-child,#census-table td:first-child,table.ranking td:nth-child(2){white-space:nowrap}
th button{font:inherit;font-weight:bold;background:none;border:0;padding:0;cursor:pointer;text-decoration:underline dotted}
th[aria-sort=ascending] button::after{content:" (ascending)";font-weight:normal}
th[aria-sort=descending] button::after{content:" (descending)";font-weight:normal}
tr.recommended td{background:#f2efe4;font-weight:bold}
figure{margin:1rem 0}figure svg{max-width:100%;height:auto}
blockquote{margin:.3rem 0 .6rem;padding-left:.8rem;border-left:3px solid #999}
details.plan{margin:.4rem 0}details.plan>summary{cursor:pointer}
details.chunk summary{cursor:pointer;color:#333}
details.chunk pre,pre.toml{white-space:pre-wrap;font:13px/1.45 "DejaVu Sans Mono",monospace;background:#f6f6f6;border:1px solid #ddd;padding:.5rem;max-height:22rem;overflow:auto}
.bar{display:inline-block;height:.8em;background:#555;vertical-align:middle}
.tools{display:none}.scripted .tools{display:inline}
.tools button{font:inherit;font-size:.85rem;margin-left:.4rem}
"#;

const SCRIPT: &str = r#"
(function(){
  document.documentElement.classList.add('scripted');
  function key(td){var v=td.getAttribute('data-key');if(v===null)v=td.textContent.trim();var n=Number(v);return v!==''&&!isNaN(n)?n:v.toLowerCase();}
  document.querySelectorAll('table.sortable').forEach(function(t){
    var heads=t.tHead.rows[0].cells;
    Array.prototype.forEach.call(heads,function(th,col){
      var b=document.createElement('button');b.type='button';b.textContent=th.textContent;th.textContent='';th.appendChild(b);
      b.addEventListener('click',function(){
        var asc=th.getAttribute('aria-sort')!=='ascending';
        Array.prototype.forEach.call(heads,function(o){o.removeAttribute('aria-sort');});
        th.setAttribute('aria-sort',asc?'ascending':'descending');
        var body=t.tBodies[0],rows=Array.prototype.slice.call(body.rows);
        rows.sort(function(r1,r2){var a=key(r1.cells[col]),z=key(r2.cells[col]);var c=(typeof a==='number'&&typeof z==='number')?a-z:String(a).localeCompare(String(z));return asc?c:-c;});
        rows.forEach(function(r){body.appendChild(r);});
      });
    });
  });
  document.querySelectorAll('section.reference').forEach(function(s){
    var tools=s.querySelector('.tools');if(!tools)return;
    [['open all chunks',true],['close all chunks',false]].forEach(function(p){
      var b=document.createElement('button');b.type='button';b.textContent=p[0];
      b.addEventListener('click',function(){s.querySelectorAll('details').forEach(function(d){d.open=p[1];});});
      tools.appendChild(b);
    });
  });
  var copy=document.getElementById('copy-profile');
  if(copy){copy.hidden=false;copy.addEventListener('click',function(){
    var text=document.getElementById('profile-toml').textContent;
    var done=function(){copy.textContent='copied';};
    if(navigator.clipboard){navigator.clipboard.writeText(text).then(done,function(){});}
    else{var r=document.createRange();r.selectNodeContents(document.getElementById('profile-toml'));var sel=getSelection();sel.removeAllRanges();sel.addRange(r);document.execCommand('copy');done();}
  });}
})();
"#;

/// Reads one metric from a summary.
type Metric = fn(&Summary) -> f64;

/// A fragment id from arbitrary text: letters, digits and dashes.
fn slug(text: &str) -> String {
    let s: String = text
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_lowercase()
            } else {
                '-'
            }
        })
        .collect();
    s.trim_matches('-').to_string()
}

fn rank_move(r: &RankRow) -> String {
    match r.baseline_rank {
        None => "not ranked by the baseline".into(),
        Some(b) if b == r.rank => format!("same as baseline (#{b})"),
        Some(b) if b > r.rank => format!("up {} (baseline #{b})", b - r.rank),
        Some(b) => format!("down {} (baseline #{b})", r.rank - b),
    }
}

impl Handout {
    /// The whole HTML document.
    pub fn to_html(&self) -> String {
        let mut h = String::with_capacity(64 * 1024);
        let _ = write!(
            h,
            "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
             <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
             <meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; img-src data:\">\
             <title>{}</title><style>{STYLE}</style></head><body>\n",
            escape(&self.title)
        );
        let _ = write!(
            h,
            "<h1>{}</h1><p class=\"made\">{}</p>",
            escape(&self.title),
            escape(&self.made_by)
        );
        h.push_str(
            "<aside class=\"caution\" id=\"privacy\" role=\"note\"><strong>This file quotes the documents.</strong> \
             The rankings below include passages of text from the corpus, and the names of its files. \
             If the documents are private, this file is too: share it only with people who may read them. \
             The same holds for any vectors made from them, since text can be partly recovered from \
             embeddings.</aside>\n",
        );
        h.push_str(
            "<nav><ol><li><a href=\"#plans\">Plans</a></li><li><a href=\"#chart\">Quality against cost</a></li>\
             <li><a href=\"#references\">Rankings per reference</a></li><li><a href=\"#census\">Corpus census</a></li>\
             <li><a href=\"#profile\">Recommended profile</a></li><li><a href=\"#model\">Model and limits</a></li></ol></nav>\n",
        );
        self.plans_html(&mut h);
        if let Some(svg) = &self.chart_svg {
            // Inline SVG needs no namespace declaration; leaving it out keeps the file free of
            // any address at all.
            let svg = svg.replacen(" xmlns=\"http://www.w3.org/2000/svg\"", "", 1);
            let _ = write!(
                h,
                "<section id=\"chart\"><h2>Quality against cost</h2><figure>{svg}<figcaption>Each mark is a plan; \
                 filled circles are on the front (no other plan is both better and cheaper) and are joined; \
                 the ringed one is recommended; the dashed line is the truncation baseline.</figcaption></figure></section>"
            );
        }
        self.references_html(&mut h);
        self.census_html(&mut h);
        self.profile_html(&mut h);
        self.model_html(&mut h);
        let _ = write!(h, "<script>{SCRIPT}</script>\n</body></html>\n");
        h
    }

    fn plans_html(&self, h: &mut String) {
        let _ = write!(
            h,
            "<section id=\"plans\"><h2>Plans</h2><p>Quality is {} over the references that name \
             expected documents; cost is the encoder-input tokens to embed the corpus once. \
             Click a column heading to sort.</p>",
            escape(&self.metric)
        );
        if let Some(why) = &self.recommendation {
            let _ = write!(h, "<p><strong>Recommended:</strong> {}</p>", escape(why));
        }
        // The quality column, then the other metrics (the one already shown is not repeated).
        let others: Vec<(&str, Metric)> = [
            ("MRR@10", (|s: &Summary| s.mrr_at_10) as Metric),
            ("nDCG@10", |s: &Summary| s.ndcg_at_10),
            ("Recall@10", |s: &Summary| s.recall_at_10),
        ]
        .into_iter()
        .filter(|(n, _)| *n != self.metric)
        .collect();
        let _ = write!(
            h,
            "<table class=\"sortable\" id=\"plan-table\"><thead><tr><th>plan</th><th class=\"n\">quality ({})</th>",
            escape(&self.metric)
        );
        for (n, _) in &others {
            let _ = write!(h, "<th class=\"n\">{n}</th>");
        }
        h.push_str(
            "<th class=\"n\">chunks</th><th class=\"n\">input tokens</th><th class=\"n\">est. seconds</th>\
             <th>on the front</th><th>note</th></tr></thead><tbody>",
        );
        for p in &self.plans {
            let s = &p.summary;
            let secs = p.seconds.filter(|x| x.is_finite());
            let note = if p.recommended {
                "recommended"
            } else if p.baseline {
                "truncation baseline"
            } else {
                ""
            };
            let _ = write!(
                h,
                "<tr{}><td>{}</td><td class=\"n\" data-key=\"{:.6}\">{:.3}</td>",
                if p.recommended {
                    " class=\"recommended\""
                } else {
                    ""
                },
                escape(&p.name),
                p.quality,
                p.quality,
            );
            for (_, f) in &others {
                let v = f(s);
                let _ = write!(h, "<td class=\"n\" data-key=\"{v:.6}\">{v:.3}</td>");
            }
            let _ = write!(
                h,
                "<td class=\"n\" data-key=\"{}\">{}</td><td class=\"n\" data-key=\"{}\">{}</td>\
                 <td class=\"n\" data-key=\"{}\">{}</td><td>{}</td><td>{note}</td></tr>",
                p.chunks,
                thousands(p.chunks as i64),
                p.input_tokens,
                thousands(p.input_tokens as i64),
                secs.map_or("-1".into(), |x| format!("{x:.3}")),
                secs.map_or("unmeasured".into(), |x| format!("{x:.1}")),
                if p.pareto { "yes" } else { "" },
            );
        }
        h.push_str("</tbody></table></section>\n");
    }

    fn references_html(&self, h: &mut String) {
        h.push_str(
            "<section id=\"references\"><h2>Rankings per reference</h2><p>For each reference text, the \
             documents each plan ranks highest, with the passage (chunk) that matched best. \
             \u{201c}expected\u{201d} marks documents the reference names. Moves are against the \
             truncation baseline: rank and cosine of the same document there.</p>\n",
        );
        for (k, r) in self.references.iter().enumerate() {
            let _ = write!(
                h,
                "<section class=\"reference\" id=\"ref-{k}-{}\" data-reference=\"{}\"><h3>{}</h3>\
                 <blockquote>{}</blockquote><p>Expected: {}<span class=\"tools\"></span></p>",
                slug(&r.id),
                escape(&r.id),
                escape(&r.id),
                escape(&r.text),
                if r.expected.is_empty() {
                    "none named".into()
                } else {
                    r.expected
                        .iter()
                        .map(|d| escape(d))
                        .collect::<Vec<_>>()
                        .join(", ")
                }
            );
            for (pi, pr) in r.rankings.iter().enumerate() {
                let open = self
                    .plans
                    .iter()
                    .any(|p| p.name == pr.plan && p.recommended)
                    || (pi == 0 && !self.plans.iter().any(|p| p.recommended));
                let _ = write!(
                    h,
                    "<details class=\"plan\"{}><summary>under <b>{}</b></summary>\
                     <table class=\"sortable ranking\"><thead><tr><th class=\"n\">rank</th><th>document</th>\
                     <th class=\"n\">cosine</th><th class=\"n\">change</th><th>rank move</th><th>best chunk</th></tr></thead><tbody>",
                    if open { " open" } else { "" },
                    escape(&pr.plan)
                );
                for row in &pr.rows {
                    let _ = write!(
                        h,
                        "<tr><td class=\"n\" data-key=\"{}\">{}</td><td>{}{}</td><td class=\"n\" data-key=\"{:.6}\">{:.3}</td>\
                         <td class=\"n\" data-key=\"{}\">{}</td><td data-key=\"{}\">{}</td>\
                         <td><details class=\"chunk\"><summary>chunk {} · lines {}–{}</summary><pre>{}</pre></details></td></tr>",
                        row.rank,
                        row.rank,
                        escape(&row.doc),
                        if row.expected { " <em>(expected)</em>" } else { "" },
                        row.score,
                        row.score,
                        row.score_change.map_or("0".into(), |c| format!("{c:.6}")),
                        row.score_change.map_or("—".into(), |c| format!("{c:+.3}")),
                        row.baseline_rank.map_or(0, |b| b as i64 - row.rank as i64),
                        escape(&rank_move(row)),
                        row.chunk,
                        row.lines[0],
                        row.lines[1],
                        escape(&row.text)
                    );
                }
                h.push_str("</tbody></table></details>\n");
            }
            h.push_str("</section>\n");
        }
        h.push_str("</section>\n");
    }

    fn census_html(&self, h: &mut String) {
        let Some(c) = &self.census else { return };
        let s = &c.stats;
        let _ = write!(
            h,
            "<section id=\"census\"><h2>Corpus census</h2><p>Against a window of {} tokens ({} for text): \
             {} documents, {} content tokens; {} documents overflow one window; a truncating embed \
             never sees {} tokens, {:.1}% of the corpus. Document length: median {}, 90th percentile \
             {}, longest {} tokens.</p>",
            c.window,
            c.budget,
            s.documents,
            thousands(s.content_tokens as i64),
            s.overflowing_documents,
            thousands(s.unseen_tokens as i64),
            100.0 * s.unseen_share,
            thousands(s.p50 as i64),
            thousands(s.p90 as i64),
            thousands(s.max as i64)
        );
        let top = s
            .histogram
            .iter()
            .map(|b| b.documents)
            .max()
            .unwrap_or(1)
            .max(1);
        h.push_str(
            "<table id=\"histogram\"><caption>Documents by length in tokens</caption><thead><tr><th>tokens</th>\
             <th class=\"n\">documents</th><th></th></tr></thead><tbody>",
        );
        for b in &s.histogram {
            let _ = write!(
                h,
                "<tr><td>{} – {}</td><td class=\"n\">{}</td><td><span class=\"bar\" style=\"width:{:.0}px\"></span></td></tr>",
                thousands(b.low as i64),
                thousands(b.high as i64),
                b.documents,
                240.0 * b.documents as f64 / top as f64
            );
        }
        h.push_str(
            "</tbody></table><table class=\"sortable\" id=\"census-table\"><thead><tr><th>document</th>\
             <th class=\"n\">tokens</th><th class=\"n\">windows</th><th class=\"n\">unseen</th>\
             <th class=\"n\">unseen share</th><th class=\"n\">longest sentence</th></tr></thead><tbody>",
        );
        for d in &c.documents {
            let _ = write!(
                h,
                "<tr><td>{}</td><td class=\"n\" data-key=\"{}\">{}</td><td class=\"n\">{}</td>\
                 <td class=\"n\" data-key=\"{}\">{}</td><td class=\"n\" data-key=\"{:.6}\">{:.1}%</td><td class=\"n\">{}</td></tr>",
                escape(&d.id),
                d.content_tokens,
                thousands(d.content_tokens as i64),
                d.windows,
                d.unseen_tokens,
                thousands(d.unseen_tokens as i64),
                d.unseen_share,
                100.0 * d.unseen_share,
                d.longest_sentence_tokens
            );
        }
        h.push_str("</tbody></table></section>\n");
    }

    fn profile_html(&self, h: &mut String) {
        h.push_str("<section id=\"profile\"><h2>Recommended profile</h2>");
        match &self.profile_toml {
            Some(t) => {
                let _ = write!(
                    h,
                    "<p>Save this as a <code>.toml</code> file and pass it to <code>kerf embed -p</code> \
                     or <code>kerf cut -p</code>. <button type=\"button\" id=\"copy-profile\" hidden>copy</button></p>\
                     <pre class=\"toml\" id=\"profile-toml\">{}</pre>",
                    escape(t)
                );
            }
            None => h.push_str("<p>No plan was recommended.</p>"),
        }
        h.push_str("</section>\n");
    }

    fn model_html(&self, h: &mut String) {
        let m = &self.model;
        let name = m.dir.file_name().map_or_else(
            || m.dir.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        );
        let rows: Vec<(&str, String)> = vec![
            ("model", name),
            ("architecture", m.model_type.clone()),
            (
                "configured input length",
                m.configured_max_tokens
                    .map_or("not stated".into(), |t| format!("{t} tokens")),
            ),
            ("position limit", format!("{} tokens", m.usable_positions())),
            (
                "window an encoder applies by default",
                format!("{} tokens", m.default_window()),
            ),
            ("special tokens per input", m.specials_per_input.to_string()),
            ("vector width", m.hidden_size.to_string()),
            (
                "declared pooling",
                m.pooling
                    .as_ref()
                    .map_or("none declared".into(), |p| p.mode.clone()),
            ),
            (
                "normalised vectors",
                if m.normalize { "yes" } else { "no" }.into(),
            ),
        ];
        h.push_str(
            "<section id=\"model\"><h2>Model and limits</h2><table id=\"model-table\"><tbody>",
        );
        for (k, v) in rows {
            let _ = write!(
                h,
                "<tr><th scope=\"row\">{k}</th><td>{}</td></tr>",
                escape(&v)
            );
        }
        h.push_str("</tbody></table></section>\n");
    }

    /// Write the handout to `path` in full or not at all (an interrupted or failed write leaves
    /// no file that looks complete).
    pub fn write(&self, path: &Path) -> Result<(), StoreError> {
        crate::store::write_atomic(path, self.to_html().as_bytes(), true)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slugs_and_moves() {
        assert_eq!(slug("q-boiler <test> & more"), "q-boiler--test----more");
        let mut r = RankRow {
            rank: 1,
            doc: "d".into(),
            score: 0.5,
            expected: true,
            baseline_rank: Some(3),
            score_change: Some(0.1),
            chunk: 0,
            lines: [1, 2],
            text: String::new(),
        };
        assert_eq!(rank_move(&r), "up 2 (baseline #3)");
        r.baseline_rank = Some(1);
        assert_eq!(rank_move(&r), "same as baseline (#1)");
        r.rank = 4;
        assert_eq!(rank_move(&r), "down 3 (baseline #1)");
    }
}
