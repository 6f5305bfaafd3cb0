//! Application log lines of the shop's services, tagged by failure kind; the phase decides the mix, the new device service and the payment outage.
//!
//! How one line is built:
//! 1. with the phase's `ambiguous_log_share`, a message that fits several
//!    kinds (the class is drawn among them); otherwise the kind by the phase's
//!    log shares;
//! 2. for a timeout in the outage phase, with `outage_log_share`, an outage
//!    message from an outage service; else with `new_service_share` a message
//!    of the new device service; else one of the kind's messages, from a
//!    service that emits it;
//! 3. with chance [`TAIL`], a retry tail shared by all kinds;
//! 4. one of the layouts (plain, key=value, bracketed), with the record's
//!    timestamp, a level (fatal for memory, warn for rate limits sometimes),
//!    a pid, and request or trace ids.

use super::compose::{chance, fill, fill_one, pick, weighted, Context};
use super::script::Phase;
use super::vocabulary::{self as v, FailureKind};
use crate::eval::folds::SplitMix64;

pub const TAIL: f64 = 0.3;

#[derive(Debug, Clone)]
pub struct LogLine {
    pub class: &'static str,
    pub service: &'static str,
    pub text: String,
    pub outage: bool,
    pub new_service: bool,
    pub ambiguous: bool,
}

fn kind(class: &str) -> &'static FailureKind {
    v::FAILURE_KINDS
        .iter()
        .find(|k| k.class == class)
        .unwrap_or_else(|| panic!("no failure kind {class}"))
}

fn service_for(rng: &mut SplitMix64, emitters: &'static str) -> &'static str {
    if emitters == "*" {
        return pick(rng, v::SERVICES);
    }
    let names: Vec<&str> = emitters.split(' ').collect();
    let name = pick(rng, &names);
    // Return the vocabulary's own &'static str.
    v::SERVICES
        .iter()
        .find(|s| **s == name)
        .unwrap_or_else(|| panic!("unknown service {name}"))
}

/// One log line for a record of `phase` at `unix_secs` + `millis`.
pub fn log_line(rng: &mut SplitMix64, phase: &Phase, unix_secs: i64, millis: u64) -> LogLine {
    let cx = Context {
        new_line: false,
        unix_secs,
        millis,
        date_spread_days: 1,
    };
    let (class, service, msg, outage, new_service, ambiguous);
    if chance(rng, phase.ambiguous_log_share) {
        let (m, kinds) = pick(rng, v::AMBIGUOUS_MESSAGES);
        class = pick(rng, kinds);
        service = pick(rng, v::SERVICES);
        msg = fill(rng, m, &cx);
        (outage, new_service, ambiguous) = (false, false, true);
    } else {
        let weights: Vec<f64> = phase.log_shares.iter().map(|(_, w)| *w).collect();
        class = phase.log_shares[weighted(rng, &weights)].0;
        let k = kind(class);
        ambiguous = false;
        if !k.outage_messages.is_empty() && chance(rng, phase.outage_log_share) {
            service = pick(rng, v::OUTAGE_SERVICES);
            msg = fill_one(rng, k.outage_messages, &cx);
            (outage, new_service) = (true, false);
        } else if chance(rng, phase.new_service_share) {
            service = v::NEW_SERVICE;
            msg = fill_one(rng, k.new_service_messages, &cx);
            (outage, new_service) = (false, true);
        } else {
            let (emitters, m) = pick(rng, k.messages);
            service = service_for(rng, emitters);
            msg = fill(rng, m, &cx);
            (outage, new_service) = (false, false);
        }
    }
    let mut msg = msg;
    if chance(rng, TAIL) {
        msg.push_str(", ");
        msg.push_str(&fill_one(rng, v::LOG_TAILS, &cx));
    }
    let level = match class {
        "out_of_memory" if chance(rng, 0.5) => pick(rng, v::LEVELS_FATAL),
        "rate_limited" | "timeout" if chance(rng, 0.4) => pick(rng, v::LEVELS_WARN),
        _ => pick(rng, v::LEVELS_ERROR),
    };
    let layout = pick(rng, v::LOG_LAYOUTS);
    let text = fill(
        rng,
        &layout
            .replace("{level}", level)
            .replace("{service}", service)
            .replace("{msg}", &msg.replace('{', "(").replace('}', ")")),
        &cx,
    );
    LogLine {
        class,
        service,
        text,
        outage,
        new_service,
        ambiguous,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::demo::script::PHASES;

    #[test]
    fn lines_name_their_service_and_carry_the_timestamp() {
        let mut rng = SplitMix64::new(21);
        for _ in 0..300 {
            let l = log_line(&mut rng, &PHASES[0], 1_772_438_400, 250);
            assert!(l.text.contains(l.service), "{l:?}");
            assert!(l.text.contains("2026-03-02T08:00:00.250Z"), "{l:?}");
            assert!(!l.outage && !l.new_service && l.service != v::NEW_SERVICE);
        }
    }

    #[test]
    fn the_outage_phase_floods_timeouts_from_outage_services() {
        let mut rng = SplitMix64::new(22);
        let lines: Vec<LogLine> = (0..4000)
            .map(|_| log_line(&mut rng, &PHASES[2], 1_772_438_400, 0))
            .collect();
        let timeouts = lines.iter().filter(|l| l.class == "timeout").count() as f64 / 4000.0;
        assert!(timeouts > 0.55, "{timeouts}");
        for l in lines.iter().filter(|l| l.outage) {
            assert_eq!(l.class, "timeout");
            assert!(v::OUTAGE_SERVICES.contains(&l.service));
            assert!(l.text.contains("fernpay-gw"), "{l:?}");
        }
        assert!(lines.iter().filter(|l| l.outage).count() > 1500);
    }
}
