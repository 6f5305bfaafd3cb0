//! Support-desk tickets: one subject and body per record, composed from a team's phrases, cross-talk from neighbouring teams, filler, quoted replies and typos.
//!
//! How one ticket is built (all draws from one seeded generator, in order):
//! 1. the team, by the phase's ticket shares;
//! 2. what it is about: the new product line, a safety hazard (defects), the
//!    outage (teams with outage phrases), each by the phase's chances;
//! 3. the subject: the team's (80%) or a generic one; `Re: ` when quoting;
//! 4. the body: a greeting, one to three team lines (new-line tickets use
//!    only new-line lines), with chance [`CROSS_TALK`] one line of a
//!    neighbouring team, zero to two filler lines, a closing and a name; with
//!    chance [`QUOTE`] a quoted earlier exchange (support replies, sometimes
//!    the customer's earlier words). With chance [`AMBIGUOUS`] the ticket is
//!    mostly about a neighbouring team's matter: one deciding team line and
//!    two of the neighbour's (tagged `ambiguous` in the ground truth);
//! 5. typos at [`TYPO_RATE`] per plain word; some customers write all in
//!    lower case, a few shout the subject.

use super::compose::{between, chance, fill_one, pick, typos, weighted, Context};
use super::script::Phase;
use super::vocabulary::{self as v, Team};
use crate::eval::folds::SplitMix64;

pub const CROSS_TALK: f64 = 0.35;
pub const AMBIGUOUS: f64 = 0.1;
pub const QUOTE: f64 = 0.25;
pub const TYPO_RATE: f64 = 0.04;
pub const TEAM_SUBJECT: f64 = 0.7;
pub const LOWERCASE_WRITER: f64 = 0.08;
pub const SHOUTED_SUBJECT: f64 = 0.03;

/// A generated ticket with what the generator knows about it.
#[derive(Debug, Clone)]
pub struct Ticket {
    pub class: &'static str,
    pub subject: String,
    pub body: String,
    pub new_line: bool,
    pub hazard: bool,
    pub outage: bool,
    pub ambiguous: bool,
}

fn team(class: &str) -> &'static Team {
    v::TEAMS
        .iter()
        .find(|t| t.class == class)
        .unwrap_or_else(|| panic!("no team {class}"))
}

/// One ticket for a record of `phase` at time `unix_secs`.
pub fn ticket(rng: &mut SplitMix64, phase: &Phase, unix_secs: i64) -> Ticket {
    let weights: Vec<f64> = phase.ticket_shares.iter().map(|(_, w)| *w).collect();
    let class = phase.ticket_shares[weighted(rng, &weights)].0;
    let t = team(class);
    let new_line_p = if class == "product_defect" {
        phase.new_line_defect_share
    } else {
        phase.new_line_share
    };
    let new_line = !t.new_line_lines.is_empty() && chance(rng, new_line_p);
    let hazard = !t.hazard_lines.is_empty() && chance(rng, phase.hazard_share);
    let outage = !t.outage_lines.is_empty() && chance(rng, phase.outage_ticket_share);
    let cx = Context {
        new_line,
        unix_secs,
        millis: 0,
        date_spread_days: 40,
    };

    // The team's own lines: the first says what the ticket is about.
    let mut lines: Vec<String> = Vec::new();
    let first: &[&str] = match (hazard, new_line, outage) {
        (true, true, _) => t.new_line_hazard_lines,
        (true, false, _) => t.hazard_lines,
        (false, true, _) => t.new_line_lines,
        (false, false, true) => t.outage_lines,
        _ => t.lines,
    };
    lines.push(fill_one(rng, first, &cx));
    let ambiguous = chance(rng, AMBIGUOUS);
    if ambiguous {
        let other = team(pick(rng, t.neighbours));
        for _ in 0..2 {
            let line = fill_one(
                rng,
                other.lines,
                &Context {
                    new_line: false,
                    ..cx
                },
            );
            lines.push(line);
        }
        rng.shuffle(&mut lines);
    } else {
        for _ in 0..between(rng, 0, 2) {
            let pool = if new_line { t.new_line_lines } else { t.lines };
            lines.push(fill_one(rng, pool, &cx));
        }
    }
    if !ambiguous && chance(rng, CROSS_TALK) {
        let other = team(pick(rng, t.neighbours));
        let line = fill_one(
            rng,
            other.lines,
            &Context {
                new_line: false,
                ..cx
            },
        );
        let at = between(rng, 1, lines.len() as u64) as usize;
        lines.insert(at, line);
    }
    for _ in 0..between(rng, 0, 2) {
        let filler = fill_one(rng, v::FILLER_LINES, &cx);
        let at = between(rng, 0, lines.len() as u64) as usize;
        lines.insert(at, filler);
    }

    let quoted = chance(rng, QUOTE);
    let mut subject = if chance(rng, TEAM_SUBJECT) {
        let pool = if new_line && !t.new_line_subjects.is_empty() && chance(rng, 0.7) {
            t.new_line_subjects
        } else {
            t.subjects
        };
        fill_one(rng, pool, &cx)
    } else {
        fill_one(rng, v::GENERIC_SUBJECTS, &cx)
    };
    if quoted {
        subject = format!("{}{subject}", v::REPLY_PREFIX);
    }

    let mut body = String::new();
    if chance(rng, 0.85) {
        body.push_str(&fill_one(rng, v::GREETINGS, &cx));
        body.push_str("\n\n");
    }
    // Paragraphs of one or two sentences.
    let mut i = 0;
    while i < lines.len() {
        let take = if chance(rng, 0.5) { 2 } else { 1 }.min(lines.len() - i);
        body.push_str(&lines[i..i + take].join(" "));
        body.push_str("\n\n");
        i += take;
    }
    body.push_str(pick(rng, v::CLOSINGS));
    body.push('\n');
    body.push_str(pick(rng, v::CUSTOMER_FIRST));
    if quoted {
        body.push_str("\n\n");
        body.push_str(&fill_one(rng, v::QUOTE_HEADERS, &cx));
        let mut q: Vec<String> = (0..between(rng, 1, 3))
            .map(|_| fill_one(rng, v::SUPPORT_REPLIES, &cx))
            .collect();
        if chance(rng, 0.5) {
            // The customer's first message, quoted twice deep.
            q.push(format!(
                "> {}",
                fill_one(
                    rng,
                    t.lines,
                    &Context {
                        new_line: false,
                        ..cx
                    }
                )
            ));
        }
        for l in q {
            body.push_str("\n> ");
            body.push_str(&l);
        }
    }

    // Case habits first, so typos (which touch only lowercase words) never make a capitalised word the vocabulary lacks.
    if chance(rng, LOWERCASE_WRITER) {
        body = body.to_lowercase();
        subject = subject.to_lowercase();
    } else if chance(rng, SHOUTED_SUBJECT) {
        subject = subject.to_uppercase();
    }
    let body = typos(rng, &body, TYPO_RATE);
    let subject = typos(rng, &subject, TYPO_RATE / 2.0);
    Ticket {
        class,
        subject,
        body,
        new_line,
        hazard,
        outage,
        ambiguous,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::demo::script::PHASES;

    #[test]
    fn tickets_have_a_subject_and_a_body_and_follow_the_phase() {
        let mut rng = SplitMix64::new(11);
        let (mut new_line, mut marked) = (0, 0);
        for _ in 0..500 {
            let t = ticket(&mut rng, &PHASES[0], 1_772_438_400);
            assert!(!t.subject.is_empty() && t.body.len() > 20, "{t:?}");
            assert!(
                !t.new_line && !t.outage,
                "phase 1 has neither the new line nor the outage"
            );
            assert!(!t.hazard || t.class == "product_defect");
            assert!(
                !t.body.to_lowercase().contains("ashvolt"),
                "no new-line product before the launch: {t:?}"
            );
        }
        let markers = [
            "ashvolt",
            "power cell",
            "heat",
            "glow",
            "charg",
            "app",
            "firmware",
            "pre-order",
            "plane",
            "battery",
        ];
        for _ in 0..500 {
            let t = ticket(&mut rng, &PHASES[1], 1_772_438_400);
            if t.new_line {
                new_line += 1;
                let text = format!("{} {}", t.subject, t.body).to_lowercase();
                marked += markers.iter().any(|m| text.contains(m)) as u32;
            }
        }
        // Typos may hit a marker word now and then.
        assert!(
            marked as f64 >= 0.9 * new_line as f64,
            "{marked} of {new_line} new-line tickets name the new line"
        );
        assert!(new_line > 50, "phase 2 brings new-line tickets: {new_line}");
    }

    #[test]
    fn hazard_tickets_carry_a_hazard_phrase() {
        let mut rng = SplitMix64::new(12);
        let mut seen = 0;
        for _ in 0..2000 {
            let t = ticket(&mut rng, &PHASES[1], 1_772_438_400);
            if t.hazard {
                seen += 1;
                let hazards = if t.new_line {
                    v::TEAMS[4].new_line_hazard_lines
                } else {
                    v::TEAMS[4].hazard_lines
                };
                let body = t.body.to_lowercase();
                // Typos may hit the phrase; at least its long words mostly survive.
                let hit = hazards.iter().any(|h| {
                    let words: Vec<String> = h
                        .split(' ')
                        .filter(|w| w.len() > 5)
                        .map(|w| {
                            w.trim_matches(|c: char| !c.is_alphanumeric())
                                .to_lowercase()
                        })
                        .collect();
                    words.iter().filter(|w| body.contains(w.as_str())).count() * 2 >= words.len()
                });
                assert!(hit, "{t:?}");
            }
        }
        assert!(seen > 50, "{seen}");
    }
}
