//! Encoder families: everything that differs between the encoder architectures kerf reads, in
//! one table.
//!
//! BERT, RoBERTa, XLM-RoBERTa, DistilBERT and MPNet are the same post-LayerNorm transformer encoder
//! (embeddings summed and normalised, then layers of self-attention and a GELU feed-forward, each
//! followed by residual + LayerNorm). What differs is data: the config.json key names, where
//! position ids start, whether a token-type table exists, the tensor names, and config options
//! the packed engine does not run. A [`Family`] holds exactly that; the loader
//! (`embed::bert`), the packed forward pass and the model-folder reader ([`crate::model`])
//! all read it from here.
//!
//! To add a family: add a [`Family`] constant to [`FAMILIES`]. With `weights: None` its folders
//! are read and planned for (position offset included) but refused for embedding; with a
//! [`WeightNames`] map the packed encoder loads and runs it. A family whose forward pass
//! differs needs a field here saying so and the packed engine reading it, as MPNet's relative
//! position bias has ([`WeightNames::relative_bias`]).
//!
//! Sources (transformers, from memory and checked against transformers 5.24 by
//! tests/reference/tiny_families.py): `BertModel`, `RobertaModel`, `XLMRobertaModel`
//! (`create_position_ids_from_input_ids`), `DistilBertModel` (`Embeddings`, `TransformerBlock`,
//! LayerNorm eps fixed at 1e-12).
use serde_json::Value;

use super::packed::Dims;

/// How a family numbers the positions of an input's tokens.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Positions {
    /// Token `i` takes position row `i` (BERT, DistilBERT).
    FromZero,
    /// transformers' `create_position_ids_from_input_ids`: tokens other than padding count up
    /// from `padding_idx + 1`; a padding token takes `padding_idx`. `padding_idx` is config.json
    /// `pad_token_id` (the given default when absent) unless the family fixes it.
    AfterPadding {
        /// The family's fixed padding index, or `None` to read `pad_token_id`.
        fixed: Option<usize>,
        /// `pad_token_id` when config.json has none.
        default: usize,
    },
}

/// Names of a family's config.json keys.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConfigKeys {
    /// Width of the hidden states (`hidden_size`; DistilBERT `dim`).
    pub hidden: &'static str,
    /// Attention heads (`num_attention_heads`; `n_heads`).
    pub heads: &'static str,
    /// Feed-forward width (`intermediate_size`; `hidden_dim`).
    pub intermediate: &'static str,
    /// Layers (`num_hidden_layers`; `n_layers`).
    pub layers: &'static str,
    /// Activation of the feed-forward (`hidden_act`; `activation`).
    pub activation: &'static str,
    /// LayerNorm epsilon key, or `None` when the family fixes it.
    pub eps: Option<&'static str>,
    /// LayerNorm epsilon when the key is absent (or fixed).
    pub default_eps: f64,
    /// Token-type table size key, for families that have one.
    pub type_vocab: Option<&'static str>,
}

/// Tensor names of a family's checkpoint. Layer names are relative to `{layers}.{index}.`;
/// names of dense layers and LayerNorms leave out `.weight` / `.bias`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct WeightNames {
    /// Prefixes a checkpoint may put before every name (the first is tried after none).
    pub prefixes: &'static [&'static str],
    /// Word embeddings, `[vocab, hidden]`.
    pub word: &'static str,
    /// Position embeddings, `[positions, hidden]`.
    pub position: &'static str,
    /// Token-type embeddings (`None`: the family has none).
    pub token_type: Option<&'static str>,
    /// LayerNorm after the embedding sum.
    pub embed_norm: &'static str,
    /// The layers' common prefix (`encoder.layer`).
    pub layers: &'static str,
    /// Query projection.
    pub query: &'static str,
    /// Key projection.
    pub key: &'static str,
    /// Value projection.
    pub value: &'static str,
    /// Attention output projection.
    pub attn_out: &'static str,
    /// LayerNorm after attention.
    pub attn_norm: &'static str,
    /// Feed-forward up projection.
    pub up: &'static str,
    /// Feed-forward down projection.
    pub down: &'static str,
    /// LayerNorm after the feed-forward.
    pub out_norm: &'static str,
    /// The relative position bias table shared by the layers, `[buckets, heads]` (MPNet,
    /// [`super::mpnet`]); `None`: the family has none.
    pub relative_bias: Option<&'static str>,
}

impl WeightNames {
    /// Full name (no prefix) of tensor `part` (e.g. [`Self::query`]) of layer `layer`.
    pub fn layer(&self, layer: usize, part: &str) -> String {
        format!("{}.{layer}.{part}", self.layers)
    }
}

/// A config.json option the packed engine runs only with certain values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Requirement {
    /// The key.
    pub key: &'static str,
    /// The values it runs (the first is the key's meaning when absent).
    pub runs: &'static [ConfigValue],
}

/// A JSON scalar a [`Requirement`] accepts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ConfigValue {
    /// A string.
    Str(&'static str),
    /// A boolean.
    Bool(bool),
}

impl ConfigValue {
    fn matches(self, v: &Value) -> bool {
        match self {
            Self::Str(s) => v.as_str() == Some(s),
            Self::Bool(b) => v.as_bool() == Some(b),
        }
    }

    fn show(self) -> String {
        match self {
            Self::Str(s) => format!("\"{s}\""),
            Self::Bool(b) => b.to_string(),
        }
    }
}

/// One encoder architecture, as config.json `model_type` names it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Family {
    /// config.json `model_type` values of the family.
    pub model_types: &'static [&'static str],
    /// config.json key names.
    pub keys: ConfigKeys,
    /// Where position ids start.
    pub positions: Positions,
    /// Tensor names, or `None` when kerf reads and plans for the family's folders but does not
    /// run its encoder.
    pub weights: Option<WeightNames>,
    /// Options the packed engine runs only with certain values.
    pub requirements: &'static [Requirement],
}

const BERT_KEYS: ConfigKeys = ConfigKeys {
    hidden: "hidden_size",
    heads: "num_attention_heads",
    intermediate: "intermediate_size",
    layers: "num_hidden_layers",
    activation: "hidden_act",
    eps: Some("layer_norm_eps"),
    default_eps: 1e-12,
    type_vocab: Some("type_vocab_size"),
};

const fn bert_names(prefixes: &'static [&'static str]) -> WeightNames {
    WeightNames {
        prefixes,
        word: "embeddings.word_embeddings",
        position: "embeddings.position_embeddings",
        token_type: Some("embeddings.token_type_embeddings"),
        embed_norm: "embeddings.LayerNorm",
        layers: "encoder.layer",
        query: "attention.self.query",
        key: "attention.self.key",
        value: "attention.self.value",
        attn_out: "attention.output.dense",
        attn_norm: "attention.output.LayerNorm",
        up: "intermediate.dense",
        down: "output.dense",
        out_norm: "output.LayerNorm",
        relative_bias: None,
    }
}

/// The erf GELU is what the packed engine's feed-forward applies; positions must be absolute
/// rows of the table.
const BERT_REQUIREMENTS: &[Requirement] = &[
    Requirement {
        key: "hidden_act",
        runs: &[ConfigValue::Str("gelu")],
    },
    Requirement {
        key: "position_embedding_type",
        runs: &[ConfigValue::Str("absolute")],
    },
];

/// BERT (MiniLM, BGE, E5, GTE): tensors with or without `bert.`.
pub const BERT: Family = Family {
    model_types: &["bert"],
    keys: BERT_KEYS,
    positions: Positions::FromZero,
    weights: Some(bert_names(&["bert."])),
    requirements: BERT_REQUIREMENTS,
};

/// RoBERTa and XLM-RoBERTa: BERT's layers and names (under `roberta.`), positions after the
/// padding index, one token type.
pub const ROBERTA: Family = Family {
    model_types: &["roberta", "xlm-roberta"],
    keys: BERT_KEYS,
    positions: Positions::AfterPadding {
        fixed: None,
        default: 1,
    },
    weights: Some(bert_names(&["roberta."])),
    requirements: BERT_REQUIREMENTS,
};

/// CamemBERT: RoBERTa's layout, read and planned for but not run (no reference checked).
pub const CAMEMBERT: Family = Family {
    model_types: &["camembert"],
    keys: BERT_KEYS,
    positions: Positions::AfterPadding {
        fixed: None,
        default: 1,
    },
    weights: None,
    requirements: BERT_REQUIREMENTS,
};

/// DistilBERT: its own key and tensor names, no token types, LayerNorm eps fixed at 1e-12.
pub const DISTILBERT: Family = Family {
    model_types: &["distilbert"],
    keys: ConfigKeys {
        hidden: "dim",
        heads: "n_heads",
        intermediate: "hidden_dim",
        layers: "n_layers",
        activation: "activation",
        eps: None,
        default_eps: 1e-12,
        type_vocab: None,
    },
    positions: Positions::FromZero,
    weights: Some(WeightNames {
        prefixes: &["distilbert."],
        word: "embeddings.word_embeddings",
        position: "embeddings.position_embeddings",
        token_type: None,
        embed_norm: "embeddings.LayerNorm",
        layers: "transformer.layer",
        query: "attention.q_lin",
        key: "attention.k_lin",
        value: "attention.v_lin",
        attn_out: "attention.out_lin",
        attn_norm: "sa_layer_norm",
        up: "ffn.lin1",
        down: "ffn.lin2",
        out_norm: "output_layer_norm",
        relative_bias: None,
    }),
    requirements: &[
        Requirement {
            key: "activation",
            runs: &[ConfigValue::Str("gelu")],
        },
        // Sinusoidal tables are computed, not trained; kerf has no reference for them.
        Requirement {
            key: "sinusoidal_pos_embds",
            runs: &[ConfigValue::Bool(false)],
        },
    ],
};

/// MPNet: positions after a padding index fixed at 1 (`MPNetEmbeddings`), no token types, its
/// own tensor names (`MPNetSelfAttention` q/k/v/o, `MPNetAttention.LayerNorm`) and a relative
/// position bias added to every layer's attention scores ([`super::mpnet`]). config.json has
/// BERT's keys; transformers' MPNetConfig defaults eps to 1e-12 (all-mpnet-base-v2 sets 1e-5).
pub const MPNET: Family = Family {
    model_types: &["mpnet"],
    keys: ConfigKeys {
        type_vocab: None,
        ..BERT_KEYS
    },
    positions: Positions::AfterPadding {
        fixed: Some(1),
        default: 1,
    },
    weights: Some(WeightNames {
        prefixes: &["mpnet."],
        word: "embeddings.word_embeddings",
        position: "embeddings.position_embeddings",
        token_type: None,
        embed_norm: "embeddings.LayerNorm",
        layers: "encoder.layer",
        query: "attention.attn.q",
        key: "attention.attn.k",
        value: "attention.attn.v",
        attn_out: "attention.attn.o",
        attn_norm: "attention.LayerNorm",
        up: "intermediate.dense",
        down: "output.dense",
        out_norm: "output.LayerNorm",
        relative_bias: Some("encoder.relative_attention_bias"),
    }),
    requirements: &[Requirement {
        key: "hidden_act",
        runs: &[ConfigValue::Str("gelu")],
    }],
};

/// Every family kerf knows, run or only read.
pub const FAMILIES: &[Family] = &[BERT, ROBERTA, DISTILBERT, MPNET, CAMEMBERT];

/// The family of a config.json `model_type`.
pub fn family_of(model_type: &str) -> Option<&'static Family> {
    FAMILIES
        .iter()
        .find(|f| f.model_types.contains(&model_type))
}

/// `model_type` values whose encoder kerf runs, in table order.
pub fn runnable_model_types() -> Vec<&'static str> {
    FAMILIES
        .iter()
        .filter(|f| f.weights.is_some())
        .flat_map(|f| f.model_types.iter().copied())
        .collect()
}

impl Family {
    /// The padding index position ids count from, if the family numbers them so.
    pub fn padding_idx(&self, pad_token_id: Option<usize>) -> Option<usize> {
        match self.positions {
            Positions::FromZero => None,
            Positions::AfterPadding { fixed, default } => {
                Some(fixed.unwrap_or(pad_token_id.unwrap_or(default)))
            }
        }
    }

    /// Position rows before the first token's (0 for BERT; `padding_idx + 1` for RoBERTa).
    pub fn position_offset(&self, pad_token_id: Option<usize>) -> usize {
        self.padding_idx(pad_token_id).map_or(0, |p| p + 1)
    }

    /// Read the sizes from config.json; an error names the key and what is wrong. (Whether the
    /// heads divide the width is checked after the weights' shapes, so a config that disagrees
    /// with its weights is reported as such: [`Self::check_heads`].)
    pub fn dims(&self, config: &Value) -> Result<Dims, String> {
        let get = |key: &str| -> Result<usize, String> {
            match config.get(key) {
                Some(v) => v
                    .as_u64()
                    .filter(|&n| n > 0)
                    .map(|n| n as usize)
                    .ok_or_else(|| format!("`{key}` must be a positive integer, found {v}")),
                None => Err(format!("missing key `{key}`")),
            }
        };
        let k = &self.keys;
        let eps = match k.eps.and_then(|key| config.get(key).map(|v| (key, v))) {
            Some((key, v)) => v
                .as_f64()
                .filter(|e| *e > 0.0)
                .ok_or_else(|| format!("`{key}` must be a positive number, found {v}"))?,
            None => k.default_eps,
        };
        let dims = Dims {
            hidden: get(k.hidden)?,
            heads: get(k.heads)?,
            intermediate: get(k.intermediate)?,
            layers: get(k.layers)?,
            positions: get("max_position_embeddings")?,
            vocab: get("vocab_size")?,
            type_vocab: k.type_vocab.map(get).transpose()?.unwrap_or(0),
            eps: eps as f32,
        };
        Ok(dims)
    }

    /// The hidden width must split evenly into the heads; the error names both keys.
    pub fn check_heads(&self, dims: &Dims) -> Result<(), String> {
        if dims.hidden.is_multiple_of(dims.heads) {
            return Ok(());
        }
        Err(format!(
            "`{}` {} is not a multiple of `{}` {}",
            self.keys.hidden, dims.hidden, self.keys.heads, dims.heads
        ))
    }

    /// Options in config.json the packed engine does not run, each naming its key.
    pub fn unsupported_options(&self, config: &Value) -> Vec<String> {
        self.requirements
            .iter()
            .filter_map(|r| {
                let v = config.get(r.key).filter(|v| !v.is_null())?;
                if r.runs.iter().any(|ok| ok.matches(v)) {
                    return None;
                }
                let runs: Vec<String> = r.runs.iter().map(|ok| ok.show()).collect();
                Some(format!(
                    "`{}` is {v}; kerf's encoder runs {}",
                    r.key,
                    runs.join(" or ")
                ))
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn every_model_type_belongs_to_one_family() {
        let mut seen = std::collections::HashSet::new();
        for f in FAMILIES {
            for t in f.model_types {
                assert!(seen.insert(*t), "{t} listed twice");
            }
        }
        assert_eq!(
            runnable_model_types(),
            ["bert", "roberta", "xlm-roberta", "distilbert", "mpnet"]
        );
    }

    #[test]
    fn position_offsets_follow_transformers() {
        // transformers: RobertaEmbeddings padding_idx = config.pad_token_id (1 in every
        // published RoBERTa / XLM-R config), MPNetEmbeddings padding_idx = 1 whatever the
        // config says; BERT and DistilBERT count from 0 (from memory).
        assert_eq!(BERT.position_offset(Some(0)), 0);
        assert_eq!(ROBERTA.position_offset(Some(1)), 2);
        assert_eq!(ROBERTA.position_offset(None), 2);
        assert_eq!(ROBERTA.position_offset(Some(3)), 4);
        assert_eq!(MPNET.position_offset(Some(0)), 2);
        assert_eq!(DISTILBERT.position_offset(Some(0)), 0);
    }

    #[test]
    fn distilbert_sizes_come_from_its_own_keys() {
        // DistilBertConfig's keys (transformers; distilbert-base-uncased's config.json).
        let c = json!({"dim": 768, "n_heads": 12, "hidden_dim": 3072, "n_layers": 6,
            "max_position_embeddings": 512, "vocab_size": 30522, "activation": "gelu",
            "sinusoidal_pos_embds": false});
        let d = DISTILBERT.dims(&c).unwrap();
        assert_eq!(
            (d.hidden, d.heads, d.intermediate, d.layers, d.type_vocab),
            (768, 12, 3072, 6, 0)
        );
        assert_eq!(d.eps, 1e-12_f32);
        assert!(DISTILBERT.unsupported_options(&c).is_empty());
        let e = BERT.dims(&c).unwrap_err();
        assert!(e.contains("`hidden_size`"), "{e}");
    }

    #[test]
    fn options_the_engine_does_not_run_are_named() {
        let c = json!({"activation": "relu", "sinusoidal_pos_embds": true});
        let why = DISTILBERT.unsupported_options(&c).join("\n");
        assert!(why.contains("`activation` is \"relu\""), "{why}");
        assert!(why.contains("`sinusoidal_pos_embds` is true"), "{why}");
        let c = json!({"hidden_act": "gelu_new", "position_embedding_type": "relative_key"});
        let why = BERT.unsupported_options(&c).join("\n");
        assert!(why.contains("`hidden_act` is \"gelu_new\""), "{why}");
        assert!(why.contains("`position_embedding_type`"), "{why}");
        assert!(BERT
            .unsupported_options(&json!({"hidden_act": "gelu"}))
            .is_empty());
    }

    #[test]
    fn sizes_that_do_not_divide_are_refused() {
        let c = json!({"hidden_size": 30, "num_attention_heads": 4, "intermediate_size": 8,
            "num_hidden_layers": 1, "max_position_embeddings": 8, "vocab_size": 8,
            "type_vocab_size": 2});
        let e = BERT.check_heads(&BERT.dims(&c).unwrap()).unwrap_err();
        assert!(
            e.contains("`hidden_size` 30 is not a multiple of `num_attention_heads` 4"),
            "{e}"
        );
    }
}
