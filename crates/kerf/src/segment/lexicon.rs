//! Word lists the sentence rules consult (each sorted by bytes, for binary search; a test checks
//! the order).
use super::lang::Language;

/// Words that commonly begin a sentence (as capitalised; contractions are cut at the apostrophe).
#[rustfmt::skip]
pub(super) const STARTERS: &[&str] = &[
    "A", "About", "Above", "According", "Across", "After", "Again", "Against", "Ah", "All",
    "Almost", "Along", "Already", "Also", "Although", "Always", "Among", "An", "And", "Another",
    "Any", "Anyway", "Are", "Aren", "As", "At", "Be", "Because", "Before", "Being", "Below",
    "Beside", "Besides", "Between", "Beyond", "Both", "But", "By", "Can", "Certainly", "Clearly",
    "Could", "Couldn", "Despite", "Did", "Didn", "Do", "Does", "Doesn", "Don", "During", "Each",
    "Either", "Even", "Eventually", "Every", "Everyone", "Everything", "Few", "Finally", "First",
    "For", "Fortunately", "From", "Further", "Furthermore", "Generally", "Given", "Had", "Has",
    "Have", "Having", "He", "Hence", "Her", "Here", "Hers", "Herself", "Him", "Himself", "His",
    "How", "However", "I", "If", "In", "Indeed", "Instead", "Is", "Isn", "It", "Its", "Itself",
    "Just", "Last", "Later", "Let", "Like", "Many", "May", "Maybe", "Meanwhile", "Might",
    "Moreover", "Most", "Much", "Must", "My", "Neither", "Never", "Nevertheless", "Next", "No",
    "None", "Nonetheless", "Nor", "Not", "Nothing", "Now", "Of", "Often", "Oh", "Ok", "Okay", "On",
    "Once", "One", "Only", "Or", "Other", "Others", "Otherwise", "Our", "Out", "Over", "Perhaps",
    "Please", "Rather", "Second", "See", "She", "Should", "Shouldn", "Similarly", "Since", "So",
    "Some", "Someone", "Something", "Sometimes", "Soon", "Still", "Such", "Suddenly", "Sure",
    "Than", "Thank", "Thanks", "That", "The", "Their", "Them", "Then", "There", "Therefore",
    "These", "They", "This", "Those", "Though", "Through", "Throughout", "Thus", "To", "Today",
    "Together", "Tomorrow", "Too", "Under", "Unfortunately", "Unless", "Unlike", "Until", "Upon",
    "Usually", "Very", "Was", "Wasn", "We", "Well", "Were", "Weren", "What", "Whatever", "When",
    "Whenever", "Where", "Whereas", "Whether", "Which", "While", "Who", "Whoever", "Whom", "Whose",
    "Why", "Will", "With", "Within", "Without", "Won", "Would", "Wouldn", "Yes", "Yesterday",
    "Yet", "You", "Your", "Yours",
];
/// Titles before a name: never end a sentence.
pub(super) const TITLES: &[&str] = &[
    "adm", "brig", "capt", "cmdr", "col", "cpl", "det", "dr", "drs", "fr", "gen", "gov", "hon",
    "insp", "lt", "maj", "messrs", "mlle", "mme", "mmes", "mr", "mrs", "ms", "mx", "pres", "prof",
    "profs", "pvt", "rep", "rev", "revd", "sen", "sgt", "sra", "srta", "supt",
];

/// Abbreviations that practically never end a sentence.
pub(super) const INNER: &[&str] = &[
    "a.k.a", "approx", "ca", "cf", "e.g", "esp", "i.e", "incl", "resp", "viz", "vs", "w.r.t",
];

/// Abbreviations that stand before a number (`p. 55`, `Fig. 3`, `Sept. 12`); before anything else they are ambiguous.
pub(super) const NUMBERED: &[&str] = &[
    "apr", "aug", "ch", "chap", "chs", "eq", "eqn", "eqs", "est", "ext", "feb", "fig", "figs",
    "jan", "jul", "nos", "nov", "nr", "n°", "oct", "p", "paras", "pp", "refs", "secs", "sect",
    "sep", "sept", "suppl", "tel", "ver", "vol", "vols",
];

/// Ordinary words that are also abbreviations before a number (`No. 4`, `Art. 12`); before anything else they are plain words.
pub(super) const NUMBERED_WORDS: &[&str] = &[
    "art", "arts", "dec", "ed", "eds", "ex", "jun", "mar", "no", "op", "para", "pt", "pts", "ref",
    "sec", "tab",
];

/// Abbreviations that may end a sentence: they do when a sentence starter follows.
pub(super) const AMBIGUOUS: &[&str] = &[
    "al", "assn", "ave", "blvd", "bros", "co", "corp", "dept", "esq", "ft", "govt", "hr", "hrs",
    "hwy", "inc", "intl", "jr", "lb", "lbs", "llc", "ltd", "mins", "mt", "natl", "oz", "plc", "rd",
    "sq", "sr", "st", "univ", "yd", "yds", "yrs",
];

/// Function words for the Latin-script language vote (see `lang`): frequent in their language
/// and rare in the others, lower case, sorted by bytes. Written from general knowledge of these
/// languages; words shared by several of them ("de", "la", "en", "que", "il") are left out.
#[rustfmt::skip]
pub(super) const FUNCTION_WORDS: &[(Language, &[&str])] = &[
    (Language::English, &[
        "and", "are", "be", "been", "but", "for", "from", "has", "have", "not", "of", "that", "the",
    "their", "there", "they", "this", "to", "was", "were", "what", "when", "which", "with",
    "would",
    ]),
    (Language::German, &[
        "auch", "auf", "aus", "bei", "bis", "das", "dass", "dem", "den", "der", "die", "durch",
    "ein", "eine", "einen", "einer", "eines", "für", "hat", "ich", "im", "ist", "kann", "keine",
    "mit", "nach", "nicht", "noch", "nur", "oder", "sich", "sie", "sind", "und", "unter", "von",
    "war", "werden", "wie", "wir", "wird", "wurde", "wurden", "zu", "zum", "zur", "über",
    ]),
    (Language::French, &[
        "au", "aux", "avec", "ce", "cette", "comme", "dans", "des", "du", "elle", "est", "et", "ils",
    "le", "les", "leur", "mais", "ne", "nous", "ont", "où", "par", "pas", "plus", "pour", "qu",
    "qui", "ses", "sont", "sur", "une", "vous", "était", "été",
    ]),
    (Language::Spanish, &[
        "al", "como", "desde", "el", "entre", "es", "esta", "este", "está", "fue", "fueron", "hay",
    "las", "lo", "los", "muy", "más", "para", "pero", "por", "se", "sobre", "son", "su", "sus",
    "también", "una", "y",
    ]),
    (Language::Italian, &[
        "alla", "anche", "che", "dal", "dalla", "degli", "dei", "della", "delle", "di", "essere",
    "gli", "ha", "il", "ma", "nel", "nella", "non", "per", "più", "questa", "questo", "sono",
    "stato", "sul", "sulla", "è",
    ]),
    (Language::Dutch, &[
        "aan", "bij", "deze", "dit", "een", "er", "hebt", "heeft", "het", "je", "kunt", "maar", "naar",
    "niet", "om", "ook", "op", "u", "uw", "van", "voor", "wat", "worden", "wordt", "zijn",
    ]),
];

/// German abbreviations that practically never end a sentence (lower case, without the final
/// period, sorted by bytes; written from general knowledge of the language).
#[rustfmt::skip]
pub(super) const DE_INNER: &[&str] = &[
    "abb", "abs", "abt", "allg", "anm", "bd", "bspw", "bzgl", "bzw", "ca", "chr", "d.h", "dgl",
    "ebd", "evtl", "fa", "frl", "geb", "gebr", "gegr", "gest", "ggf", "hr", "hrsg", "inkl", "jh",
    "jhd", "kap", "mio", "mrd", "nr", "o.a", "o.g", "prof", "sog", "std", "str", "tel", "u.a",
    "u.u", "usf", "v.a", "vgl", "z.b", "z.t", "ziff", "zit", "zzgl",
];

/// French abbreviations that practically never end a sentence (lower case, without the final
/// period, sorted by bytes; written from general knowledge of the language).
#[rustfmt::skip]
pub(super) const FR_INNER: &[&str] = &[
    "apr", "av", "boul", "c.-à-d", "cf", "chap", "env", "févr", "hab", "ibid", "janv", "mgr",
    "mlle", "mm", "mme", "n°", "p.ex", "réf", "s.d", "sq", "ste", "suiv", "tél", "vol", "éd",
];

/// Spanish abbreviations that practically never end a sentence (lower case, without the final
/// period, sorted by bytes; written from general knowledge of the language).
#[rustfmt::skip]
pub(super) const ES_INNER: &[&str] = &[
    "a.c", "aprox", "art", "avda", "cap", "cía", "d.c", "dcha", "dr", "dra", "dto", "ej", "gral",
    "izq", "izqda", "lic", "ntra", "núm", "p.ej", "pral", "prof", "pza", "pág", "págs", "sr",
    "sra", "sres", "srta", "sta", "sto", "tel", "ud", "uds", "vd", "vds", "vol",
];

/// Italian abbreviations that practically never end a sentence (lower case, without the final
/// period, sorted by bytes; written from general knowledge of the language).
#[rustfmt::skip]
pub(super) const IT_INNER: &[&str] = &[
    "all", "art", "avv", "c.a", "cap", "cfr", "dott", "dr", "fig", "ing", "lett", "p.es", "pag",
    "pagg", "prof", "rag", "sig", "sigg", "tab", "tel", "vol",
];

/// Dutch abbreviations that practically never end a sentence (lower case, without the final
/// period, sorted by bytes; written from general knowledge of the language).
#[rustfmt::skip]
pub(super) const NL_INNER: &[&str] = &[
    "a.u.b", "bijv", "blz", "bv", "ca", "d.w.z", "dhr", "dr", "e.a", "e.d", "evt", "fig", "i.p.v",
    "ing", "ir", "jl", "jr", "m.a.w", "mevr", "mr", "mw", "nr", "o.a", "prof", "red", "resp",
    "t.a.v", "t.o.v", "v.chr", "vgl", "zgn",
];

/// Abbreviations for "and so on" in the languages above: like "etc.", they end a sentence
/// before a capitalised word.
pub(super) const ETC: &[&str] = &["ecc", "enz", "etc", "usw"];
