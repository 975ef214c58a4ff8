//! Word lists the sentence rules consult (each sorted by bytes, for binary search; a test checks
//! the order).

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
