//! A profile checked against a model: the token budget each chunk really has.
//!
//! The window in a profile counts every token of an encoder input; special tokens and the prefix
//! come out of it before any text goes in. Resolving is where a window larger than the model's
//! architecture, or an overlap that leaves no room for new text, is refused.
use crate::model::ModelInfo;
use crate::prefix::{self, Template};
use crate::profile::{Boundary, Profile};
use crate::split::Chunk;
use crate::tokens::TokenCounter;

/// A resolved cutting plan, in content tokens (specials and prefix already taken off).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CutPlan {
    /// Where boundaries may fall.
    pub boundary: Boundary,
    /// Content tokens one chunk may hold.
    pub budget_tokens: usize,
    /// Tokens a chunk should share with the one before (at most).
    pub overlap_tokens: usize,
    /// A last chunk adding fewer tokens than this is merged back; a section shorter than this
    /// may share a chunk with the next one.
    pub min_chunk_tokens: usize,
    /// Headings of this level and above start a new chunk (0: none do).
    pub heading_breaks: u8,
}

/// A profile whose numbers have been checked against a model.
#[derive(Debug, Clone, PartialEq)]
pub struct ResolvedPlan {
    /// The profile as written.
    pub profile: Profile,
    /// Tokens per encoder input, specials and prefix included.
    pub window: usize,
    /// Special tokens per input.
    pub specials: usize,
    /// Tokens the prefix takes (a template's room: every rendered prefix fits it).
    pub prefix_tokens: usize,
    /// The prefix, parsed.
    pub prefix: Template,
    /// The text before every chunk when the prefix names no field (empty for a template).
    pub fixed_prefix: String,
    /// What the splitter works with.
    pub cut: CutPlan,
}

impl ResolvedPlan {
    /// Content tokens a chunk may hold.
    pub fn budget(&self) -> usize {
        self.cut.budget_tokens
    }
    /// Whether the prefix names a field, so each chunk carries its own.
    pub fn templated(&self) -> bool {
        self.prefix.fixed().is_none()
    }
    /// The prefix put before a chunk: its own when the plan's is a template, else the plan's.
    pub fn prefix_of<'a>(&'a self, chunk: &'a Chunk) -> &'a str {
        match &chunk.prefix {
            Some(p) => &p.text,
            None => &self.fixed_prefix,
        }
    }
    /// Tokens the encoder input of a chunk costs, specials and its own prefix included.
    pub fn chunk_input_tokens(&self, chunk: &Chunk) -> usize {
        let prefix = chunk
            .prefix
            .as_ref()
            .map_or(self.prefix_tokens, |p| p.tokens);
        chunk.content_tokens + self.specials + prefix
    }
}

/// Why a profile does not fit a model.
#[derive(Debug, thiserror::Error)]
#[error("{origin}: {message}")]
pub struct PlanError {
    /// The profile's name or file.
    pub origin: String,
    /// What does not fit.
    pub message: String,
}

/// Check a profile against a model and compute the content budget.
pub fn resolve(
    profile: &Profile,
    info: &ModelInfo,
    counter: &TokenCounter,
    origin: &str,
) -> Result<ResolvedPlan, PlanError> {
    let err = |message: String| {
        Err(PlanError {
            origin: origin.to_string(),
            message,
        })
    };
    let c = &profile.cut;
    if c.window > info.usable_positions() {
        return err(format!(
            "[cut] window {} exceeds the model's limit of {} positions ({})",
            c.window,
            info.usable_positions(),
            info.limit_origin()
        ));
    }
    let context = profile.pool.context;
    if context > info.usable_positions() {
        return err(format!(
            "[pool] context {context} exceeds the model's limit of {} positions ({})",
            info.usable_positions(),
            info.limit_origin()
        ));
    }
    let template = match Template::parse(&c.prefix) {
        Ok(t) => t,
        Err(e) => return err(format!("[cut] prefix {:?}: {e}", c.prefix)),
    };
    let prefix_tokens = match (template.fixed(), c.prefix_limit) {
        (Some(fixed), _) if fixed.is_empty() => 0,
        (Some(fixed), _) => counter.count_content(&fixed).map_err(|e| PlanError {
            origin: origin.into(),
            message: e.to_string(),
        })?,
        (None, limit) => limit.unwrap_or(prefix::DEFAULT_LIMIT),
    };
    if template.fixed().is_some() && c.prefix_limit.is_some() {
        return err(
            "[cut] prefix_limit applies to a prefix that names {title} or {section}; this prefix names neither (its own tokens count against the window)".into(),
        );
    }
    if template.fixed().is_none() {
        // The template's own text, every field empty, must fit: shortening cannot go below it.
        let bare = template.render("", &[]);
        let bare_tokens = counter.count_content(&bare).map_err(|e| PlanError {
            origin: origin.into(),
            message: e.to_string(),
        })?;
        if bare_tokens > prefix_tokens {
            return err(format!(
                "[cut] prefix {:?}: its own text takes {bare_tokens} tokens, more than the {prefix_tokens} kept for it (raise prefix_limit)",
                c.prefix
            ));
        }
    }
    let specials = counter.specials_per_input();
    // A tokenizer that marks an input's first word may add a token to a chunk's start.
    let fixed = specials + prefix_tokens + counter.start_slack_tokens();
    if c.window <= fixed {
        return err(format!(
            "[cut] window {} leaves no room for text: {specials} special tokens and {prefix_tokens} prefix tokens take {fixed}",
            c.window
        ));
    }
    let budget = c.window - fixed;
    let floor = counter.piece_floor();
    if c.boundary != Boundary::Head && budget < floor {
        return err(format!(
            "[cut] window {} leaves a content budget of {budget} tokens; this tokenizer needs at least {floor} (a piece cut from inside a long word can re-tokenize to {floor} tokens on its own), so use a window of at least {}",
            c.window,
            fixed + floor
        ));
    }
    if c.boundary != Boundary::Head && c.overlap >= budget {
        return err(format!(
            "[cut] overlap {} must be smaller than the content budget of {budget} tokens (window {} - {specials} specials - {prefix_tokens} prefix)",
            c.overlap, c.window
        ));
    }
    if c.min_chunk >= budget {
        return err(format!(
            "[cut] min_chunk {} must be smaller than the content budget of {budget} tokens",
            c.min_chunk
        ));
    }
    Ok(ResolvedPlan {
        profile: profile.clone(),
        window: c.window,
        specials,
        prefix_tokens,
        fixed_prefix: template.fixed().unwrap_or_default(),
        prefix: template,
        cut: CutPlan {
            boundary: c.boundary,
            budget_tokens: budget,
            overlap_tokens: c.overlap,
            min_chunk_tokens: c.min_chunk,
            heading_breaks: c.heading_breaks,
        },
    })
}
