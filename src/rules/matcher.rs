//! Matching on the hot path: one index lookup per record token and one regex-set pass per field; each hit updates its condition's count, and a rule becomes a candidate only once all its term and regex-set conditions hold.
//!
//! Cost is linear in the record's terms plus the postings they hit; rules that
//! no term of the record mentions are never looked at, and rules that are only
//! partly met are never looked at either: each rule counts its conditions as
//! they reach their `at_least`, and lands on the candidate list when the count
//! reaches the rule's number of such conditions. Candidates are then checked
//! for `none` conditions (a hit marks the rule as blocked) and deferred
//! regexes. Per-record state lives in a reusable `MatchScratch` and is reset by
//! bumping an epoch, not by clearing arrays sized by the rule set.

use super::record::{FieldText, RecordTerms};
use super::ruleset::{Cond, RuleMeta, RuleSet, ANY_FIELD};

/// Rule sets up to this size order fired rules with a bitmap by rank (read
/// whole per record); larger ones sort the few fired rules instead.
const RANK_BITS_MAX: usize = 4096;

/// Per-record state of one rule.
#[derive(Debug, Default, Clone, Copy)]
struct RuleState {
    /// Epoch in which `met` was last written.
    mark: u32,
    /// Counted conditions that hold so far (this epoch).
    met: u32,
    /// Epoch in which a `none` condition of the rule was hit.
    blocked: u32,
}

/// Reusable per-worker buffers for `RuleSet::matches`.
#[derive(Debug, Default, Clone)]
pub struct MatchScratch {
    epoch: u32,
    /// Per posting (one per item): the epoch in which its item was found.
    post_mark: Vec<u32>,
    /// Per condition: (epoch of `hits`, hits this record).
    conds: Vec<(u32, u32)>,
    /// Per rule, in one record so a hit touches one place.
    rules: Vec<RuleState>,
    /// Rules whose counted conditions all hold.
    complete: Vec<u32>,
    words: Vec<u32>,
    /// Fired rules as `rank << 32 | rule`, sorted into precedence order (large sets).
    keyed: Vec<u64>,
    /// Fired rules as bits by precedence rank, read in order (sets up to
    /// `RANK_BITS_MAX` rules); all zero between records.
    ranked: Vec<u64>,
    /// The rules that fired on the last record, in precedence order.
    pub fired: Vec<u32>,
}

impl MatchScratch {
    fn begin(&mut self, set: &RuleSet) {
        let (np, nc, nr) = (set.postings.len(), set.conds.len(), set.rules.len());
        if self.post_mark.len() < np {
            self.post_mark.resize(np, 0);
        }
        if self.conds.len() < nc {
            self.conds.resize(nc, (0, 0));
        }
        if self.ranked.len() < nr.div_ceil(64) {
            self.ranked.resize(nr.div_ceil(64), 0);
        }
        if self.rules.len() < nr {
            self.rules.resize(nr, RuleState::default());
        }
        if self.epoch == u32::MAX {
            self.post_mark.fill(0);
            self.conds.fill((0, 0));
            self.rules.fill(RuleState::default());
            self.epoch = 0;
        }
        // Marks only ever hold past epochs, so a larger epoch clears them all
        // at once, whatever rule set they were written for.
        self.epoch += 1;
        self.complete.clear();
        self.fired.clear();
    }

    /// `by` more hits for condition `cond` of `rule`, which needs `need` of
    /// them (0 for a `none` condition); `meta` says how many the rule counts.
    #[inline(always)]
    fn hit(&mut self, cond: u32, rule: u32, by: u32, need: u32, meta: &[RuleMeta]) {
        let epoch = self.epoch;
        let c = &mut self.conds[cond as usize];
        let before = if c.0 == epoch { c.1 } else { 0 };
        *c = (epoch, before + by);
        let r = &mut self.rules[rule as usize];
        if need == 0 {
            r.blocked = epoch;
        } else if before < need && before + by >= need {
            let met = if r.mark == epoch { r.met + 1 } else { 1 };
            r.mark = epoch;
            r.met = met;
            if met == meta[rule as usize].need {
                self.complete.push(rule);
            }
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
        let bag = &terms.bag;
        for span in &terms.spans {
            let field = span.field as u32;
            if terms.words_only {
                // Every entry is a word: the span itself is the word sequence.
                for i in span.start..span.end {
                    self.term_hits(bag.get(i).0, field, s, |j| (i + j < span.end).then(|| bag.get(i + j).0));
                }
            } else {
                let mut words = std::mem::take(&mut s.words);
                words.clear();
                words.extend((span.start..span.end).filter(|&i| !bag.get(i).0.contains(' ')).map(|i| i as u32));
                for p in 0..words.len() {
                    let next = |j: usize| words.get(p + j).map(|&w| bag.get(w as usize).0);
                    self.term_hits(bag.get(words[p] as usize).0, field, s, next);
                }
                s.words = words;
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
                    s.hit(ci, c.rule, n, c.at_least, &self.meta);
                }
            }
        }
        // Candidates: every counted condition holds. Left to check: no `none`
        // condition was hit, and deferred regexes. Fired rules are put in
        // precedence order by their rank: as bits of a bitmap read in order,
        // or, for large sets, by one sort of integer keys.
        let bitmap = self.rules.len() <= RANK_BITS_MAX;
        s.keyed.clear();
        for k in 0..s.complete.len() {
            let r = s.complete[k];
            if s.rules[r as usize].blocked == s.epoch {
                continue;
            }
            let meta = &self.meta[r as usize];
            let rule = &self.rules[r as usize];
            let range = rule.conds.start as usize..rule.conds.end as usize;
            let ok = !meta.has_deferred
                || self.conds[range.clone()]
                    .iter()
                    .zip(&self.deferred[range])
                    .filter(|(_, &d)| d)
                    .all(|(c, _)| self.regex_holds(c, texts));
            if ok {
                let rank = meta.rank;
                if bitmap {
                    s.ranked[rank as usize / 64] |= 1 << (rank % 64);
                } else {
                    s.keyed.push(u64::from(rank) << 32 | u64::from(r));
                }
            }
        }
        if bitmap {
            for (wi, word) in s.ranked[..self.rules.len().div_ceil(64)].iter_mut().enumerate() {
                let mut w = std::mem::take(word);
                while w != 0 {
                    s.fired.push(self.by_rank[wi * 64 + w.trailing_zeros() as usize]);
                    w &= w - 1;
                }
            }
        } else {
            s.keyed.sort_unstable();
            s.fired.extend(s.keyed.iter().map(|&k| k as u32));
        }
        &s.fired
    }

    /// Postings of one record word: mark the items it starts (phrases checked
    /// against the following words, `next(j)` being the j-th word after it).
    #[inline]
    fn term_hits<'t>(&self, term: &str, field: u32, s: &mut MatchScratch, next: impl Fn(usize) -> Option<&'t str>) {
        let Some((a, b)) = self.index.get(term) else { return };
        let (a, b) = (a as usize, b as usize);
        for (p, post) in self.postings[a..b].iter().enumerate().map(|(k, post)| (a + k, post)) {
            let scope = post.field();
            if scope != ANY_FIELD && scope != field {
                continue;
            }
            if s.post_mark[p] == s.epoch {
                continue;
            }
            if post.is_phrase() {
                let item = &self.items[self.posting_items[p] as usize];
                if !item.tokens[1..].iter().enumerate().all(|(j, t)| next(j + 1) == Some(&**t)) {
                    continue;
                }
            }
            s.post_mark[p] = s.epoch;
            s.hit(post.cond, post.rule, 1, post.need, &self.meta);
        }
    }

    /// A deferred regex condition, checked on the fields in its scope.
    fn regex_holds(&self, c: &Cond, texts: &[FieldText<'_>]) -> bool {
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
}
