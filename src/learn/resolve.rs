//! Resolving an id-only label into a complete label event: join it against the recent-record cache by id, and check its class before it reaches the learned-label log.

use std::time::Instant;

use super::event::{IdOnlyLabel, LabelEvent, LabelReject};
use super::recent::RecentCache;

/// Join `label` with the cached terms of its record.
///
/// `known_class` says whether a class exists in the served model; with
/// `allow_new_classes` off, a label for any other class is refused here, so
/// it never reaches the learned-label log (where every replica would refuse
/// it again). A miss (never scored here, evicted, expired, or scored before
/// a restart) is `unknown id`.
pub fn resolve(
    label: &IdOnlyLabel,
    cache: &mut RecentCache,
    now: Instant,
    known_class: impl Fn(&str) -> bool,
    allow_new_classes: bool,
) -> Result<LabelEvent, LabelReject> {
    if !allow_new_classes && !known_class(&label.class) {
        return Err(LabelReject::UnknownClass(label.class.clone()));
    }
    if let Some(old) = &label.replaces {
        if !known_class(old) {
            return Err(LabelReject::NotLearned(old.clone()));
        }
    }
    let rec = cache.get(&label.id, now).ok_or_else(|| LabelReject::UnknownId(label.id.clone()))?;
    Ok(LabelEvent {
        id: label.id.clone(),
        class: label.class.clone(),
        fields: None,
        features: Some(rec.terms.features()),
        replaces: label.replaces.clone(),
        weight: label.weight,
        scored_ms: Some(rec.scored_ms),
    })
}

#[cfg(test)]
mod tests {
    use std::time::Duration;

    use super::*;
    use crate::learn::recent::{CachedRecord, PackedTerms};
    use crate::text::TermBag;

    fn cache() -> RecentCache {
        let mut c = RecentCache::new(4, Duration::from_secs(60));
        let terms = TermBag::from_pairs([("refund", 2.0), ("boots", 1.0), ("refund", 1.0)]);
        c.insert("t1", CachedRecord { terms: PackedTerms::pack(&terms), class: "billing".into(), partition: 2, scored_ms: 1_000 }, Instant::now());
        c
    }

    fn known(c: &str) -> bool {
        c == "billing" || c == "returns"
    }

    #[test]
    fn a_hit_becomes_a_complete_event_with_aggregated_features() {
        let mut c = cache();
        let l = IdOnlyLabel::parse(br#"{"id":"t1","class":"returns"}"#).unwrap();
        let e = resolve(&l, &mut c, Instant::now(), known, false).unwrap();
        assert_eq!(e.class, "returns");
        assert_eq!(e.features.as_ref().unwrap().0, vec![("boots".to_string(), 1.0), ("refund".to_string(), 3.0)]);
        assert_eq!(e.scored_ms, Some(1_000));
        // What is published parses back as a complete event that learns the same terms.
        let back = LabelEvent::parse(&e.to_json()).unwrap();
        assert_eq!(back, e);
    }

    #[test]
    fn misses_and_unknown_classes_are_refused_with_their_reason() {
        let mut c = cache();
        let miss = IdOnlyLabel::parse(br#"{"id":"nope","class":"returns"}"#).unwrap();
        assert_eq!(resolve(&miss, &mut c, Instant::now(), known, false).unwrap_err().reason(), "unknown id");
        let new_class = IdOnlyLabel::parse(br#"{"id":"t1","class":"warranty"}"#).unwrap();
        assert_eq!(resolve(&new_class, &mut c, Instant::now(), known, false).unwrap_err().reason(), "unknown class");
        assert!(resolve(&new_class, &mut c, Instant::now(), known, true).is_ok(), "allowed when new classes are added");
        let later = Instant::now() + Duration::from_secs(61);
        let l = IdOnlyLabel::parse(br#"{"id":"t1","class":"returns"}"#).unwrap();
        assert_eq!(resolve(&l, &mut c, later, known, false).unwrap_err().reason(), "unknown id", "expired");
        assert_eq!(c.stats().misses, 2);
    }
}
