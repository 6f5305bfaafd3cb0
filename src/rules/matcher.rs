//! Matching on the hot path: one index lookup per record token and one regex-set pass per field, then only the rules those hits touched are checked.
//!
//! Cost is linear in the record's terms plus the postings they hit; rules that
//! no term of the record mentions are never looked at. Per-record state lives
//! in a reusable `MatchScratch` and is reset by bumping an epoch, not by
//! clearing arrays sized by the rule set.

use super::record::{FieldText, RecordTerms};
use super::ruleset::{CondKind, RuleSet, ANY_FIELD};

/// Reusable per-worker buffers for `RuleSet::matches`.
#[derive(Debug, Default, Clone)]
pub struct MatchScratch {
    epoch: u32,
    item_mark: Vec<u32>,
    cond_mark: Vec<u32>,
    cond_hits: Vec<u32>,
    rule_mark: Vec<u32>,
    candidates: Vec<u32>,
    words: Vec<u32>,
    /// The rules that fired on the last record, in precedence order.
    pub fired: Vec<u32>,
}

impl MatchScratch {
    fn begin(&mut self, set: &RuleSet) {
        let (ni, nc, nr) = (set.items.len(), set.conds.len(), set.rules.len());
        if self.item_mark.len() < ni {
            self.item_mark.resize(ni, 0);
        }
        if self.cond_mark.len() < nc {
            self.cond_mark.resize(nc, 0);
            self.cond_hits.resize(nc, 0);
        }
        if self.rule_mark.len() < nr {
            self.rule_mark.resize(nr, 0);
        }
        if self.epoch == u32::MAX {
            self.item_mark.fill(0);
            self.cond_mark.fill(0);
            self.rule_mark.fill(0);
            self.epoch = 0;
        }
        // Marks only ever hold past epochs, so a larger epoch clears them all
        // at once, whatever rule set they were written for.
        self.epoch += 1;
        self.candidates.clear();
        self.fired.clear();
    }

    #[inline]
    fn hit(&mut self, cond: u32, rule: u32, by: u32) {
        let c = cond as usize;
        if self.cond_mark[c] != self.epoch {
            self.cond_mark[c] = self.epoch;
            self.cond_hits[c] = 0;
        }
        self.cond_hits[c] += by;
        let r = rule as usize;
        if self.rule_mark[r] != self.epoch {
            self.rule_mark[r] = self.epoch;
            self.candidates.push(rule);
        }
    }

    #[inline]
    fn hits(&self, cond: u32) -> u32 {
        let c = cond as usize;
        if self.cond_mark[c] == self.epoch {
            self.cond_hits[c]
        } else {
            0
        }
    }
}

impl RuleSet {
    /// The rules that fire on a record, in precedence order (guards first, then
    /// higher priority, then review before assign before boost, then file order).
    /// `terms` must come from the same fields as `texts`, analyzed with the
    /// analyzer this set was compiled with.
    pub fn matches<'s>(&self, terms: &RecordTerms, texts: &[FieldText<'_>], s: &'s mut MatchScratch) -> &'s [u32] {
        s.begin(self);
        for span in &terms.spans {
            s.words.clear();
            for i in span.start..span.end {
                if !terms.bag.get(i).0.contains(' ') {
                    s.words.push(i as u32);
                }
            }
            let field = span.field as u32;
            for p in 0..s.words.len() {
                let term = terms.bag.get(s.words[p] as usize).0;
                let Some(&(a, b)) = self.index.get(term) else { continue };
                for post in &self.postings[a as usize..b as usize] {
                    if post.field != ANY_FIELD && post.field != field {
                        continue;
                    }
                    if s.item_mark[post.item as usize] == s.epoch {
                        continue;
                    }
                    if post.len > 1 && !self.phrase_at(post.item, terms, &s.words, p) {
                        continue;
                    }
                    s.item_mark[post.item as usize] = s.epoch;
                    s.hit(post.cond, post.rule, 1);
                }
            }
        }
        if let Some(set) = &self.regex_set {
            for f in texts {
                let m = set.matches(f.text);
                if !m.matched_any() {
                    continue;
                }
                for si in m.iter() {
                    let ci = self.regex_conds[si];
                    let c = &self.conds[ci as usize];
                    if c.field.is_some_and(|x| x != f.field) {
                        continue;
                    }
                    let re = &self.regexes[c.regex.expect("regex condition") as usize];
                    let n = if c.at_least > 1 { re.find_iter(f.text).count() as u32 } else { 1 };
                    s.hit(ci, c.rule, n);
                }
            }
        }
        for k in 0..s.candidates.len() {
            let r = s.candidates[k];
            let rule = &self.rules[r as usize];
            let ok = (rule.conds.start..rule.conds.end).all(|ci| {
                let c = &self.conds[ci as usize];
                if self.deferred[ci as usize] {
                    return true;
                }
                let h = s.hits(ci);
                match c.kind {
                    CondKind::None => h == 0,
                    _ => h >= c.at_least,
                }
            }) && (rule.conds.start..rule.conds.end)
                .filter(|&ci| self.deferred[ci as usize])
                .all(|ci| self.regex_holds(&self.conds[ci as usize], texts));
            if ok {
                s.fired.push(r);
            }
        }
        let rank = &self.rank;
        s.fired.sort_unstable_by_key(|&r| rank[r as usize]);
        &s.fired
    }

    /// A deferred regex condition, checked on the fields in its scope.
    fn regex_holds(&self, c: &super::ruleset::Cond, texts: &[FieldText<'_>]) -> bool {
        let re = &self.regexes[c.regex.expect("regex condition") as usize];
        let in_scope = texts.iter().filter(|t| c.field.is_none_or(|f| f == t.field));
        if c.at_least <= 1 {
            return in_scope.into_iter().any(|t| re.is_match(t.text));
        }
        let mut n = 0u32;
        for t in in_scope {
            n += re.find_iter(t.text).count() as u32;
            if n >= c.at_least {
                return true;
            }
        }
        false
    }

    fn phrase_at(&self, item: u32, terms: &RecordTerms, words: &[u32], p: usize) -> bool {
        let toks = &self.items[item as usize].tokens;
        if p + toks.len() > words.len() {
            return false;
        }
        toks[1..].iter().zip(&words[p + 1..]).all(|(t, &w)| terms.bag.get(w as usize).0 == &**t)
    }
}
