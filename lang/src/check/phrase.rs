//! The one reader of a command's phrase: connecting words, each with the value after it
//! (`for 10 ms at 0.4 K`, `with power_law over f from 10 Hz to 1 kHz`).
//!
//! A family reads its subject (the column of `fit`, the mode of `percolation`, the `B` of
//! `quench`) itself, then hands the rest of the phrase here with its [`PhraseRules`] (which
//! words the command takes, which it needs) and its [`PhraseVoice`] (how it words each
//! problem). The walk is the same for every family; the families still differ in wording
//! and in a few reading details (what an unknown word swallows, whether a word may be
//! repeated), which the rules keep as they were.

use super::Checker;
use crate::ast::{Arg, Ident, Span, Value};
use crate::diagnostic::{ErrorKind, Problem};

/// What a connecting word the command does not take swallows after it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum AfterUnknown {
    /// The value after it, if there is one, so it gives no second error.
    ItsValue,
    /// The next item, value or word.
    NextItem,
    /// Nothing: a value after it is then out of place in its own right.
    Nothing,
}

/// Which connecting words a command's phrase takes.
pub(super) struct PhraseRules<'r> {
    /// The connecting words the command takes.
    pub words: &'r [&'r str],
    /// Words that may stand without a value (`percolation ... at p = 0.5`: the value is an
    /// option).
    pub bare: &'r [&'r str],
    /// Every word of `words` must be given; the first one missing is reported, and only in
    /// a phrase with no other problem.
    pub required: bool,
    /// A word may be given again, the later value counting; otherwise it is refused.
    pub repeatable: bool,
    pub after_unknown: AfterUnknown,
}

/// How a family words the problems of its phrase.
pub(super) trait PhraseVoice {
    /// A value with no connecting word before it.
    fn stray_value(&self, value: &Arg) -> Problem;
    /// A connecting word the command does not take.
    fn unknown_word(&self, word: &Ident) -> Problem;
    /// A word of the command given a second time; `has_value`: a value follows it.
    fn given_twice(&self, word: &Ident, _has_value: bool) -> Option<Problem> {
        Some(given_twice_problem(word))
    }
    /// A word with no value after it; `known`: one the command takes.
    fn no_value(&self, word: &Ident, known: bool) -> Option<Problem> {
        known.then(|| no_value_problem(word))
    }
    /// A word the command needs and the phrase leaves out (with `PhraseRules::required`).
    fn missing(&self, _word: &str) -> Option<Problem> {
        None
    }
}

/// Whether `arg` is the connecting word `word` (for phrases of a fixed shape, matched
/// item by item: `anneal T from A to B in N steps`, `structure_factor on plane ...`).
pub(super) fn is_word(arg: Option<&Arg>, word: &str) -> bool {
    arg.and_then(Arg::connective) == Some(word)
}

/// The span of a whole phrase, for the one message a phrase of fixed shape gets when it
/// does not match; `empty` when the phrase is empty.
pub(super) fn phrase_span(args: &[Arg], empty: Span) -> Span {
    args.iter().map(Arg::span).reduce(Span::to).unwrap_or(empty)
}

/// "`w` is given twice".
pub(super) fn given_twice_problem(word: &Ident) -> Problem {
    Problem::new(
        ErrorKind::Value,
        word.span,
        format!("`{}` is given twice", word.name),
    )
}

/// "`w` needs a value after it".
pub(super) fn no_value_problem(word: &Ident) -> Problem {
    Problem::new(
        ErrorKind::Value,
        word.span,
        format!("`{}` needs a value after it", word.name),
    )
}

/// The connecting words of a phrase with the values after them, in the order written.
pub(super) struct Phrase<'a> {
    said: Vec<(&'a Ident, Option<&'a Value>)>,
}

impl<'a> Phrase<'a> {
    /// The word and its value, the last time it is given with one.
    pub fn get(&self, word: &str) -> Option<(&'a Ident, &'a Value)> {
        self.said.iter().rev().find_map(|(w, v)| match v {
            Some(v) if w.name == word => Some((*w, *v)),
            _ => None,
        })
    }
    /// The value after `word`, the last time it is given with one.
    pub fn value(&self, word: &str) -> Option<&'a Value> {
        self.get(word).map(|(_, v)| v)
    }
    /// `word` standing alone (one of `PhraseRules::bare`), the last time.
    pub fn bare(&self, word: &str) -> Option<&'a Ident> {
        self.said
            .iter()
            .rev()
            .find(|(w, v)| w.name == word && v.is_none())
            .map(|(w, _)| *w)
    }
}

impl Checker<'_> {
    /// Reads `WORD VALUE WORD VALUE ...`, reporting every problem in the family's voice.
    /// `None` if it reported any.
    pub(super) fn read_phrase<'a>(
        &mut self,
        args: &'a [Arg],
        rules: &PhraseRules<'_>,
        voice: &dyn PhraseVoice,
    ) -> Option<Phrase<'a>> {
        let before = self.problems.len();
        let mut phrase = Phrase { said: Vec::new() };
        let mut index = 0;
        while let Some(arg) = args.get(index) {
            let Arg::Connective(word) = arg else {
                self.push(voice.stray_value(arg));
                index += 1;
                continue;
            };
            let value = match args.get(index + 1) {
                Some(Arg::Value(value)) => Some(value),
                _ => None,
            };
            if !rules.words.contains(&word.name.as_str()) {
                self.push(voice.unknown_word(word));
                index += match (rules.after_unknown, value) {
                    (AfterUnknown::Nothing, _) => 1,
                    (AfterUnknown::NextItem, _) | (AfterUnknown::ItsValue, Some(_)) => 2,
                    (AfterUnknown::ItsValue, None) => {
                        if let Some(problem) = voice.no_value(word, false) {
                            self.push(problem);
                        }
                        1
                    }
                };
                continue;
            }
            if !rules.repeatable && phrase.get(&word.name).is_some() {
                if let Some(problem) = voice.given_twice(word, value.is_some()) {
                    self.push(problem);
                }
            }
            match value {
                Some(value) => {
                    phrase.said.push((word, Some(value)));
                    index += 2;
                }
                None if rules.bare.contains(&word.name.as_str()) => {
                    phrase.said.push((word, None));
                    index += 1;
                }
                None => {
                    if let Some(problem) = voice.no_value(word, true) {
                        self.push(problem);
                    }
                    index += 1;
                }
            }
        }
        if rules.required && self.problems.len() == before {
            let missing = rules.words.iter().find(|w| phrase.get(w).is_none());
            if let Some(problem) = missing.and_then(|word| voice.missing(word)) {
                self.push(problem);
            }
        }
        (self.problems.len() == before).then_some(phrase)
    }
}
