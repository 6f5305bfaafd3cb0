//! Every word of the invented demo scenario: the retailer, its products, people, places, carriers, services, teams, failure kinds and the phrases they speak in.
//!
//! The scenario is fictional from end to end: Quillmoss Outfitters is an
//! invented outdoor-gear retailer, and every product, person, town, street,
//! carrier and upstream service below was made up for this demo. E-mail
//! domains use the reserved `.example` and `.test` names, and IP addresses
//! come from the documentation ranges (192.0.2.0/24, 198.51.100.0/24,
//! 203.0.113.0/24) or private space.
//!
//! Nothing outside this file may introduce a name: the other demo modules
//! only pick from these lists and fill `{slot}`s. A test asserts that every
//! capitalised word in generated text is a word of this file, and another
//! that the other demo source files hold no capitalised string literals.
//!
//! Template slots (filled by `compose.rs`): `{product}` `{newp}` `{order}`
//! `{part}` `{tracking}` `{case}` `{carrier}` `{city}` `{address}` `{date}`
//! `{time}` `{amount}` `{n}` `{days}` `{year}` `{size}` `{colour}` `{email}`
//! `{ip}` `{uuid}` `{hex}` `{name}` `{brand}` `{agent}` and, for log lines,
//! `{ms}` `{host}` `{port}` `{up}` `{path}` `{sku}` `{bytes}` `{pct}` `{user}`
//! `{code}`. Inside the *_FORMATS lists, `{dN}` is N random digits, `{hN}`
//! N random hex digits and `{A}` one random capital letter.

/// The invented retailer, long and short.
pub const RETAILER: &str = "Quillmoss Outfitters";
pub const RETAILER_SHORT: &str = "Quillmoss";
pub const SUPPORT_SENDER: &str = "Quillmoss Support <help@quillmoss.example>";

/// The established range (phases 1 to 3).
pub const CORE_PRODUCTS: &[&str] = &[
    "Tarnwhistle 2 tent",
    "Tarnwhistle 3 tent",
    "Screefox 38 pack",
    "Screefox 55 pack",
    "Pyrolark stove",
    "Mossbeck quilt",
    "Glintwick headlamp",
    "Cragmoor trail shoes",
    "Brookvane water filter",
    "Larchpip trekking poles",
    "Fellhaven rain shell",
    "Cindermoth sleeping pad",
];

/// The product line that launches in phase 2: heated clothing with a battery.
pub const NEW_LINE_PRODUCTS: &[&str] = &[
    "Ashvolt heated vest",
    "Ashvolt heated gloves",
    "Ashvolt power cell",
    "Ashvolt heated insoles",
];
pub const NEW_LINE_NAME: &str = "Ashvolt";

pub const CARRIERS: &[&str] = &["Swiftpine Parcel", "Northcairn Freight", "Lanternpost"];
pub const CITIES: &[&str] = &[
    "Wrenfold",
    "Easthollow",
    "Copperlin",
    "Stavebridge",
    "Mirrowdale",
    "Tollhaven",
];
pub const STREETS: &[&str] = &[
    "Sorrel Close",
    "Millrace Walk",
    "Thimble Lane",
    "Gorsebank Road",
    "Kettlewick Row",
];

pub const CUSTOMER_FIRST: &[&str] = &[
    "Maren", "Tobin", "Ilsa", "Corwin", "Nadia", "Bram", "Yusra", "Oona", "Teodor", "Lisbet",
    "Kofi", "Wren",
];
pub const CUSTOMER_LAST: &[&str] = &[
    "Vantrell",
    "Quorne",
    "Pellish",
    "Marrowby",
    "Kestlin",
    "Dunmarrow",
    "Ollerby",
    "Strand-Fyke",
];
/// Support agents who sign the quoted replies.
pub const AGENTS: &[&str] = &["Hedda", "Rafferty", "Soline"];
/// Simulated reviewers who label records; the last one is the lead who issues corrections.
pub const REVIEWER_NAMES: &[&str] = &[
    "Odile Marrowby",
    "Tamsin Quorne",
    "Ivo Pellish",
    "Bexa Lundqvale",
    "Ruthanne Kestlin",
];
pub const MAIL_DOMAINS: &[&str] = &["mailbox.test", "postwick.example", "inbox.test"];

pub const MONTHS: &[&str] = &["January", "February", "March"];
pub const WEEKDAYS: &[&str] = &[
    "Monday",
    "Tuesday",
    "Wednesday",
    "Thursday",
    "Friday",
    "Saturday",
    "Sunday",
];
pub const SIZES: &[&str] = &["S", "M", "L", "XL", "41", "43", "45"];
pub const COLOURS: &[&str] = &["moss green", "slate", "ember orange", "fog grey", "navy"];

pub const ORDER_FORMATS: &[&str] = &["QM{d6}", "#{d7}", "QM-{d6}", "{d8}"];
pub const PART_FORMATS: &[&str] = &["PX-{d4}{A}", "TW{d2}-POLE-{d2}", "SPR-{d3}", "part {d5}"];
pub const TRACKING_FORMATS: &[&str] = &["SP{d10}QX", "NC{d9}", "LP{d8}{A}{A}"];
pub const CASE_FORMATS: &[&str] = &["QM-CASE-{d5}", "case {d6}", "#C{d5}"];
pub const ADDRESS_FORMATS: &[&str] = &[
    "{n} {street}, {city} {d5}",
    "flat {n}, {n} {street}, {city}",
];
pub const DATE_FORMATS: &[&str] = &[
    "{iso}",
    "{month} {day}",
    "{day} {month}",
    "{day}/{mm}",
    "last {weekday}",
];
pub const AMOUNT_FORMATS: &[&str] = &["${d2}.{d2}", "${d3}.95", "{d3}.{d2} dollars"];
pub const EMAIL_FORMATS: &[&str] = &[
    "{first}.{last}@{maildomain}",
    "{first}{d2}@{maildomain}",
    "{last}.{first}{d4}@{maildomain}",
];
pub const IP_PREFIXES: &[&str] = &["192.0.2.", "198.51.100.", "203.0.113."];

/// A support team: one class of ticket.
#[derive(Debug)]
pub struct Team {
    pub class: &'static str,
    pub subjects: &'static [&'static str],
    pub lines: &'static [&'static str],
    /// Lines about the new product line (phase 2 onwards).
    pub new_line_lines: &'static [&'static str],
    pub new_line_subjects: &'static [&'static str],
    /// Safety-relevant lines (product defects only).
    pub hazard_lines: &'static [&'static str],
    pub new_line_hazard_lines: &'static [&'static str],
    /// Lines written during the checkout outage (phase 3).
    pub outage_lines: &'static [&'static str],
    /// Teams whose vocabulary overlaps most; used for cross-talk and for reviewers' mistakes.
    pub neighbours: &'static [&'static str],
}

pub const TEAMS: &[Team] = &[
    Team {
        class: "returns",
        subjects: &[
            "Return request for order {order}",
            "How do I return the {product}?",
            "return label not working",
            "Want to send back my {product}",
            "Refund for returned item?",
            "exchange for a different size",
            "return window question",
        ],
        lines: &[
            "I'd like to return the {product} I bought on {date}, it doesn't fit.",
            "Can you send me a prepaid return label for order {order}?",
            "The return label you emailed will not scan at the drop-off point.",
            "I shipped the {product} back {days} days ago and still no refund.",
            "It's unused and still in the original packaging with the tags on.",
            "Could I exchange it for a size larger instead of a refund?",
            "Is the return window {days} days, or {n} weeks for sale items?",
            "The colour looks nothing like the photos, I want to send it back.",
            "My partner bought the same {product} so we don't need this one.",
            "Please confirm you received my return, tracking {tracking}.",
            "Do I have to pay for return shipping if I simply changed my mind?",
            "I dropped the parcel at the {carrier} counter in {city} on {date}.",
            "Where do I print the return form? The link https://quillmoss.example/returns/{h8} opens a blank page.",
            "The refund only covered part of the price although I sent everything back.",
        ],
        new_line_lines: &[
            "The {newp} runs far too warm for me, I'd like to send it back.",
            "The heated vest is bulkier than I expected, can I still return it after charging it once?",
        ],
        new_line_subjects: &["Returning my {newp}"],
        hazard_lines: &[],
        new_line_hazard_lines: &[],
        outage_lines: &[],
        neighbours: &["warranty", "billing", "order_changes"],
    },
    Team {
        class: "shipping",
        subjects: &[
            "Where is my order {order}?",
            "parcel not delivered",
            "Tracking hasn't updated",
            "Delivery delayed",
            "package marked delivered but not here",
            "Stuck at the depot",
        ],
        lines: &[
            "My order {order} was supposed to arrive on {date} but nothing came.",
            "Tracking number {tracking} hasn't moved for {days} days.",
            "The {carrier} app says delivered but there is no parcel at {address}.",
            "The box arrived crushed and the {product} inside is dented.",
            "Can the courier leave it with a neighbour? I'm away until {date}.",
            "It has been stuck at the depot in {city} since {date}.",
            "Only half of my order arrived, the {product} is missing from the box.",
            "Why was it sent with {carrier}? They never deliver to my street.",
            "Is there any way to speed up delivery? I leave for a trip on {date}.",
            "The driver left a card but the depot has no record of the parcel.",
            "I paid for express shipping and it still took {days} days.",
            "The customs form is holding my parcel, what do I need to send?",
            "Please resend, the parcel went back to the sender by mistake.",
        ],
        new_line_lines: &["My pre-order of the {newp} still shows as processing, when will it ship?"],
        new_line_subjects: &["{newp} pre-order not shipped"],
        hazard_lines: &[],
        new_line_hazard_lines: &[],
        outage_lines: &[],
        neighbours: &["order_changes", "returns"],
    },
    Team {
        class: "billing",
        subjects: &[
            "Charged twice",
            "Invoice for order {order}",
            "refund not on my card",
            "Wrong amount charged",
            "promo code didn't apply",
            "Payment declined but money taken",
        ],
        lines: &[
            "I was charged {amount} twice for the same order {order}.",
            "My card statement shows {amount} but the checkout total was lower.",
            "The refund you confirmed on {date} still hasn't reached my card.",
            "The promo code wasn't applied at checkout, can you adjust the price?",
            "Please send a VAT invoice with my company name for order {order}.",
            "Payment was declined but the money left my bank account anyway.",
            "I was billed for express shipping that I didn't choose.",
            "Can I split the payment between a gift card and my credit card?",
            "My gift card balance shows zero although I never used it.",
            "There's a pending charge of {amount} from {date} that I don't recognise.",
            "The price dropped {n} days after I bought the {product}, do you price match?",
            "The instalment plan took this month's payment early.",
        ],
        new_line_lines: &["I was charged for the {newp} pre-order before it even shipped."],
        new_line_subjects: &["Charged early for {newp}"],
        hazard_lines: &[],
        new_line_hazard_lines: &[],
        outage_lines: &[
            "Checkout froze on the payment step, but I was charged {amount} anyway.",
            "The payment page showed an error {n} times and now I see {n} charges on my card.",
            "The site said payment failed, yet my bank shows the money gone.",
            "During the checkout problems today I was charged without getting an order confirmation.",
        ],
        neighbours: &["returns", "account_access", "order_changes"],
    },
    Team {
        class: "account_access",
        subjects: &[
            "Can't log in",
            "Password reset email never arrives",
            "account locked",
            "Verification code not working",
            "Change the email on my account",
            "Someone logged into my account?",
        ],
        lines: &[
            "I can't log in to my account, it keeps saying the password is wrong.",
            "The password reset email never arrives at {email}.",
            "My account got locked after {n} attempts, please unlock it.",
            "The verification code from the app is always rejected.",
            "I got a login alert from {ip} and it wasn't me.",
            "Please change the email on my account to {email}.",
            "The reset link expires before I can even open it.",
            "I can't see my order history since I logged in with the new email.",
            "Session {uuid} keeps logging me out every few minutes.",
            "Please delete my account and all the data you hold about me.",
            "I signed up twice by accident, can you merge the two accounts?",
            "My loyalty points disappeared after I changed my password.",
        ],
        new_line_lines: &["The heating app won't let me sign in with my shop account."],
        new_line_subjects: &["Can't sign in to the {newp} app"],
        hazard_lines: &[],
        new_line_hazard_lines: &[],
        outage_lines: &["I couldn't log in all afternoon, is the site down?"],
        neighbours: &["billing", "order_changes"],
    },
    Team {
        class: "product_defect",
        subjects: &[
            "{product} broke after {n} uses",
            "Defective {product}",
            "faulty zip",
            "seam came apart",
            "{product} not working",
            "Problem with my {product}",
        ],
        lines: &[
            "The zip on my {product} split after {n} trips.",
            "A seam on the {product} started to come apart on the first night.",
            "The pole section cracked when I pitched the tent in light wind.",
            "The buckle on the hip belt snapped off.",
            "Water leaks through the floor even though it's sold as waterproof.",
            "The headlamp flickers and switches itself off.",
            "The sole of the shoe is peeling away at the toe.",
            "The filter cartridge clogged after only {n} litres.",
            "The stitching on the shoulder strap is fraying already.",
            "The ignition button on the stove doesn't spark any more.",
            "The quilt is losing down through the baffles.",
            "One trekking pole won't lock at any length.",
            "Part {part} came out of the box bent.",
            "It stopped working after {n} days of normal use.",
        ],
        new_line_lines: &[
            "Since it arrived last week the heating panel in my {newp} stays cold on every setting.",
            "The glow ring blinks amber and the heat never comes on, I want my money back.",
            "The power cell drops from full to empty in about {n} minutes although I charged it overnight.",
            "After the firmware update in the app the vest only heats on the left side.",
            "The charging port is loose and the cable falls out as soon as I move.",
            "The heat setting jumps back to low by itself, can I exchange it for one that works?",
            "I can log in to the app fine but the controls do nothing on the {newp}.",
            "The {newp} I ordered on {date} will not switch on at all.",
        ],
        new_line_subjects: &["{newp} won't heat", "glow ring blinking", "power cell not holding charge"],
        hazard_lines: &[
            "The stove leaks fuel around the canister valve and I could smell gas.",
            "The stove flared up and singed my hand, it could easily have started a fire.",
            "The harness buckle snapped while I was hanging on it, I could have fallen.",
            "A trekking pole collapsed on a steep descent and I fell and hurt my knee.",
            "The headlamp battery got so hot it burned my forehead.",
            "The fuel line on the stove cracked and fuel sprayed out while it was lit.",
        ],
        new_line_hazard_lines: &[
            "The power cell swelled up and got too hot to hold while charging.",
            "I smelled burning plastic from the heating panel and there is a scorch mark.",
            "The battery pocket melted a little and the lining is scorched.",
            "The gloves got so hot they burned the back of my hand.",
        ],
        outage_lines: &[],
        neighbours: &["warranty", "returns", "product_questions"],
    },
    Team {
        class: "warranty",
        subjects: &[
            "Warranty claim",
            "Is this covered by warranty?",
            "warranty repair for {product}",
            "Lifetime guarantee question",
            "Replacement under warranty",
            "Warranty claim {case}",
        ],
        lines: &[
            "I'd like to make a warranty claim for my {product}, bought in {year}.",
            "Is wear on the {product} after {n} years covered by your guarantee?",
            "I lost the receipt, can you find the purchase under {email}?",
            "Do you repair the {product} or only replace it under warranty?",
            "The warranty form asks for a serial number, where is it on the {product}?",
            "My warranty case {case} has had no update for {days} days.",
            "Can I send it to the repair centre in {city} directly?",
            "The replacement you sent under warranty has the same fault.",
            "It was a gift, does the warranty still apply?",
            "I've attached photos of the damage for the warranty team.",
            "How long does a warranty repair usually take?",
            "The lifetime guarantee was one of the reasons I bought it.",
        ],
        new_line_lines: &[
            "Is the power cell covered by the same warranty as the {newp}?",
            "How many charge cycles does the warranty on the power cell cover?",
        ],
        new_line_subjects: &["{newp} warranty"],
        hazard_lines: &[],
        new_line_hazard_lines: &[],
        outage_lines: &[],
        neighbours: &["product_defect", "returns"],
    },
    Team {
        class: "order_changes",
        subjects: &[
            "Change my order {order}",
            "Cancel order",
            "Add an item to my order",
            "Change delivery address",
            "Wrong size ordered",
            "Modify order before it ships",
        ],
        lines: &[
            "Can I cancel order {order}? I ordered the wrong colour.",
            "Please change the delivery address to {address} before it ships.",
            "I'd like to add the {product} to order {order} if it hasn't shipped yet.",
            "I ordered size {size} by mistake, can you change it to {size}?",
            "Please combine my two orders into one shipment.",
            "Can you hold the order until {date}? I'm away.",
            "I placed the same order twice, please cancel one of them.",
            "Can I switch the {product} in my order to the {colour} one?",
            "The order confirmation shows the wrong name, it should be {name}.",
            "Is it too late to remove the {product} from order {order}?",
            "Could you swap standard delivery for pickup at the {city} store?",
        ],
        new_line_lines: &["Can I swap my {newp} pre-order for the heated gloves instead?"],
        new_line_subjects: &["Change my {newp} pre-order"],
        hazard_lines: &[],
        new_line_hazard_lines: &[],
        outage_lines: &[
            "I'm not sure my order went through during the outage, please check.",
            "The checkout crashed, did order {order} get placed twice?",
        ],
        neighbours: &["shipping", "billing", "returns"],
    },
    Team {
        class: "product_questions",
        subjects: &[
            "Question about the {product}",
            "Which size should I get?",
            "Is the {product} waterproof?",
            "Compatibility question",
            "Back in stock?",
            "Before I buy",
        ],
        lines: &[
            "Is the {product} warm enough for nights around freezing?",
            "What is the packed weight of the {product}?",
            "Will the {product} fit in a {n} litre pack?",
            "Which fuel canisters work with the stove?",
            "Do you know when the {colour} version is back in stock?",
            "Is the {product} suitable for a beginner on a first trip?",
            "Can the filter be used with water from glacier streams?",
            "How do I choose between the {product} and the {product}?",
            "Are the trail shoes true to size or should I size up?",
            "Does the tent come with a footprint or is that sold separately?",
            "Can I wash the quilt at home, and at what temperature?",
            "Is there a store in {city} where I can try the {product}?",
        ],
        new_line_lines: &[
            "Can I take the power cell on a plane in my hand luggage?",
            "How long does the {newp} heat on the highest setting?",
            "Is a charger included or do I need my own usb-c brick?",
            "Does the {newp} still heat when it gets wet?",
        ],
        new_line_subjects: &["Question about the {newp}", "Battery life of the {newp}?"],
        hazard_lines: &[],
        new_line_hazard_lines: &[],
        outage_lines: &[],
        neighbours: &["product_defect", "order_changes"],
    },
];

/// Subjects that say nothing about the team.
pub const GENERIC_SUBJECTS: &[&str] = &[
    "Help",
    "question",
    "urgent!!",
    "Order {order}",
    "(no subject)",
    "Please read",
    "Follow up",
    "my order",
];
pub const REPLY_PREFIX: &str = "Re: ";
pub const GREETINGS: &[&str] = &[
    "Hi,",
    "Hello,",
    "Hi there,",
    "Dear Quillmoss team,",
    "Hey,",
    "Good morning,",
    "Hello {brand},",
];
pub const CLOSINGS: &[&str] = &[
    "Thanks,",
    "Thank you,",
    "Best,",
    "Cheers,",
    "Regards,",
    "Kind regards,",
    "thx",
];
/// Sentences that could appear in any ticket.
pub const FILLER_LINES: &[&str] = &[
    "I've been a customer for years.",
    "This is the second time I'm writing about this.",
    "Please help as soon as possible.",
    "Sorry for the long message.",
    "My order number is {order}.",
    "You can reach me at {email}.",
    "Sent from my phone",
    "I'm quite disappointed to be honest.",
    "The {product} was a birthday present.",
    "I bought it at the {city} store on {date}.",
    "I need it for a trip next week.",
    "Thanks in advance for your help.",
];
/// The header of a quoted earlier message: `{date}`, `{time}` and the sender.
pub const QUOTE_HEADERS: &[&str] = &[
    "On {iso} at {time}, {sender} wrote:",
    "-----Original message----- From: {sender} Sent: {iso} {time}",
];
/// What the support desk wrote earlier, quoted back in replies; each leans a little towards some team.
pub const SUPPORT_REPLIES: &[&str] = &[
    "Thank you for contacting {brand}. A member of our team will reply within {n} working days.",
    "Your case number is {case}. Please keep it in the subject line of any reply.",
    "We have issued a refund of {amount} to your original payment method.",
    "Could you send us a photo of the item and your order number?",
    "Your parcel is with {carrier} and should arrive within {n} days.",
    "We have reset your account, please try to log in again.",
    "Our warranty team is reviewing your claim.",
    "Best wishes, {agent} at {brand}",
];

/// A failure kind in the application logs: one class of log line.
#[derive(Debug)]
pub struct FailureKind {
    pub class: &'static str,
    /// (services that emit it, space-separated or `*` for any; message template).
    pub messages: &'static [(&'static str, &'static str)],
    /// Messages of the device service that comes with the new product line (phase 2 onwards).
    pub new_service_messages: &'static [&'static str],
    /// Messages of the payment outage (phase 3).
    pub outage_messages: &'static [&'static str],
    pub neighbours: &'static [&'static str],
}

/// The fictional services behind the shop.
pub const SERVICES: &[&str] = &[
    "checkout",
    "inventory-sync",
    "mail-relay",
    "pay-bridge",
    "search-indexer",
    "label-printer",
];
/// The service added with the new product line: it talks to the heated garments' app.
pub const NEW_SERVICE: &str = "heat-link";
/// The services hit by the payment outage.
pub const OUTAGE_SERVICES: &[&str] = &["checkout", "pay-bridge"];
/// Internal upstreams the services call (all invented).
pub const UPSTREAMS: &[&str] = &[
    "fernpay-gw",
    "stockdb",
    "smtp-out",
    "carrier-api",
    "search-core",
    "label-queue",
];
pub const SERVICE_ACCOUNTS: &[&str] =
    &["svc-inventory", "svc-labels", "svc-mailer", "svc-checkout"];
pub const HOST_FORMATS: &[&str] = &["10.{d1}.{d1}.{d2}", "{ip}", "{up}-{d1}.internal"];
pub const PATH_FORMATS: &[&str] = &[
    "/var/spool/relay/{h8}.msg",
    "/srv/labels/batch-{d4}.pdf",
    "/data/index/shard-{d2}/seg_{h6}",
    "/var/log/qm/{up}.log",
];
pub const SKU_FORMATS: &[&str] = &["QM-{A}{A}{d4}", "SKU{d6}", "AV-{d3}-{A}"];
pub const CODE_FORMATS: &[&str] = &["QM{d6}", "PO{d5}"];
pub const LEVELS_ERROR: &[&str] = &["ERROR", "error", "ERR"];
pub const LEVELS_WARN: &[&str] = &["WARN", "warning"];
pub const LEVELS_FATAL: &[&str] = &["FATAL", "CRIT"];
/// Layouts of a log line: `{ts}`, `{level}`, `{service}`, `{pid}`, `{msg}`, `{hex}`, `{uuid}`.
pub const LOG_LAYOUTS: &[&str] = &[
    "{ts} {level} {service}[{pid}]: {msg}",
    "level={level} ts={ts} svc={service} msg=\"{msg}\" trace={uuid}",
    "[{ts}] {service} {level} {msg} (req {hex})",
];
/// Tails that several failure kinds append.
pub const LOG_TAILS: &[&str] = &[
    "retrying in {n}s (attempt {n}/5)",
    "will retry",
    "request {hex} failed",
    "giving up after {n} attempts",
];

pub const FAILURE_KINDS: &[FailureKind] = &[
    FailureKind {
        class: "timeout",
        messages: &[
            ("*", "request to {up} timed out after {ms}ms"),
            ("*", "read timeout on {host}:{port} after {ms} ms"),
            (
                "*",
                "context deadline exceeded while waiting for {up} response",
            ),
            (
                "inventory-sync search-indexer label-printer",
                "job {hex} exceeded its {n}s time limit, aborting",
            ),
            ("*", "no reply from {up} within {ms}ms"),
            ("*", "slow upstream {up}: p99 {ms}ms over budget"),
            ("mail-relay", "SMTP session to {host} timed out during DATA"),
        ],
        new_service_messages: &["device telemetry upload from {hex} timed out after {ms}ms"],
        outage_messages: &[
            "deadline exceeded calling fernpay-gw /v2/authorize after {ms}ms",
            "circuit breaker open for fernpay-gw, failing fast",
            "retry budget exhausted for fernpay-gw after {n} attempts",
            "fernpay-gw did not answer within {ms}ms, order {code} left pending",
            "authorize call {uuid} to fernpay-gw abandoned after {ms}ms",
        ],
        neighbours: &["connection_refused", "rate_limited"],
    },
    FailureKind {
        class: "connection_refused",
        messages: &[
            ("*", "connect to {host}:{port} failed: connection refused"),
            ("*", "dial tcp {host}:{port}: connect: connection refused"),
            ("*", "upstream {up} refused connection (ECONNREFUSED)"),
            (
                "*",
                "could not open pool connection to {up} at {host}:{port}",
            ),
            ("*", "no route to host {host}, marking {up} down"),
            ("*", "broken pipe writing to {up}"),
        ],
        new_service_messages: &["push gateway refused connection for device {hex}"],
        outage_messages: &[],
        neighbours: &["timeout"],
    },
    FailureKind {
        class: "auth_failure",
        messages: &[
            ("*", "401 Unauthorized from {up}: token expired"),
            ("*", "invalid api key for {up} (key id {hex})"),
            (
                "mail-relay",
                "SMTP AUTH rejected for {email}: 535 authentication failed",
            ),
            (
                "checkout pay-bridge",
                "signature mismatch verifying webhook {uuid}",
            ),
            (
                "inventory-sync label-printer",
                "service account {user} denied: missing scope inventory.write",
            ),
            ("*", "TLS client certificate rejected by {host}"),
            ("*", "login failed for user {user} from {host}"),
        ],
        new_service_messages: &["device {hex} presented an expired pairing token"],
        outage_messages: &[],
        neighbours: &["rate_limited", "malformed_payload"],
    },
    FailureKind {
        class: "disk_full",
        messages: &[
            ("*", "write {path} failed: no space left on device"),
            ("*", "disk usage at {pct}% on /var, refusing new files"),
            ("*", "could not rotate log {path}: ENOSPC"),
            ("mail-relay", "spool volume full, {n} messages deferred"),
            (
                "label-printer",
                "quota exceeded writing label batch {hex} to {path}",
            ),
            ("search-indexer", "index segment merge failed: disk full"),
        ],
        new_service_messages: &["firmware image store full at {path}"],
        outage_messages: &[],
        neighbours: &["out_of_memory"],
    },
    FailureKind {
        class: "out_of_memory",
        messages: &[
            ("*", "heap exhausted allocating {bytes} bytes"),
            ("*", "worker {n} killed by oom killer (rss {bytes} kB)"),
            ("*", "memory limit {n}Mi exceeded, container restarted"),
            ("*", "failed to allocate {bytes} bytes for batch {hex}"),
            ("*", "cache eviction could not keep up, heap at {pct}%"),
            (
                "search-indexer",
                "out of memory while building index shard {n}",
            ),
        ],
        new_service_messages: &["pairing session cache ran out of memory"],
        outage_messages: &[],
        neighbours: &["disk_full"],
    },
    FailureKind {
        class: "rate_limited",
        messages: &[
            ("*", "429 Too Many Requests from {up}, retry after {n}s"),
            (
                "*",
                "rate limit exceeded for client {hex}: {n} req/s over quota",
            ),
            ("*", "throttled by {up}, backing off {ms}ms"),
            ("label-printer", "carrier api quota exhausted for this hour"),
            ("*", "dropping request {uuid}: token bucket empty"),
            (
                "mail-relay",
                "{n} sends deferred, provider rate cap reached",
            ),
        ],
        new_service_messages: &["telemetry burst from device {hex} throttled"],
        outage_messages: &[],
        neighbours: &["timeout", "auth_failure"],
    },
    FailureKind {
        class: "malformed_payload",
        messages: &[
            (
                "*",
                "failed to parse json body at byte {n}: unexpected token",
            ),
            (
                "inventory-sync",
                "invalid sku {sku} in feed row {n}, skipping",
            ),
            (
                "checkout pay-bridge",
                "schema validation failed for order {code}: missing field quantity",
            ),
            ("*", "cannot decode message {uuid}: invalid utf-8 sequence"),
            ("*", "unexpected end of input reading {path}"),
            ("mail-relay", "bad address header in message to {email}"),
            ("inventory-sync", "negative quantity {n} for {sku} rejected"),
        ],
        new_service_messages: &["firmware report from device {hex} has a bad checksum"],
        outage_messages: &[],
        neighbours: &["auth_failure"],
    },
];

/// Messages that genuinely fit more than one failure kind: (message, the kinds it may belong to).
pub const AMBIGUOUS_MESSAGES: &[(&str, &[&str])] = &[
    (
        "connection reset by peer {host}:{port}",
        &["timeout", "connection_refused"],
    ),
    (
        "upstream {up} unavailable",
        &["timeout", "connection_refused", "rate_limited"],
    ),
    (
        "request {uuid} failed with status 503 from {up}",
        &["rate_limited", "connection_refused", "timeout"],
    ),
    (
        "worker crashed unexpectedly, restarting",
        &["out_of_memory", "disk_full"],
    ),
    (
        "request rejected by {up} with status 403",
        &["auth_failure", "rate_limited"],
    ),
];

/// Every vocabulary string, for the originality lint and the slot check.
pub fn all_strings() -> Vec<&'static str> {
    let mut v: Vec<&'static str> = vec![
        RETAILER,
        RETAILER_SHORT,
        SUPPORT_SENDER,
        NEW_LINE_NAME,
        REPLY_PREFIX,
        NEW_SERVICE,
    ];
    for list in [
        CORE_PRODUCTS,
        NEW_LINE_PRODUCTS,
        CARRIERS,
        CITIES,
        STREETS,
        CUSTOMER_FIRST,
        CUSTOMER_LAST,
        AGENTS,
        REVIEWER_NAMES,
        MAIL_DOMAINS,
        MONTHS,
        WEEKDAYS,
        SIZES,
        COLOURS,
        ORDER_FORMATS,
        PART_FORMATS,
        TRACKING_FORMATS,
        CASE_FORMATS,
        ADDRESS_FORMATS,
        DATE_FORMATS,
        AMOUNT_FORMATS,
        EMAIL_FORMATS,
        IP_PREFIXES,
        GENERIC_SUBJECTS,
        GREETINGS,
        CLOSINGS,
        FILLER_LINES,
        QUOTE_HEADERS,
        SUPPORT_REPLIES,
        SERVICES,
        OUTAGE_SERVICES,
        UPSTREAMS,
        SERVICE_ACCOUNTS,
        HOST_FORMATS,
        PATH_FORMATS,
        SKU_FORMATS,
        CODE_FORMATS,
        LEVELS_ERROR,
        LEVELS_WARN,
        LEVELS_FATAL,
        LOG_LAYOUTS,
        LOG_TAILS,
    ] {
        v.extend_from_slice(list);
    }
    for t in TEAMS {
        v.push(t.class);
        for list in [
            t.subjects,
            t.lines,
            t.new_line_lines,
            t.new_line_subjects,
            t.hazard_lines,
            t.new_line_hazard_lines,
            t.outage_lines,
        ] {
            v.extend_from_slice(list);
        }
    }
    for k in FAILURE_KINDS {
        v.push(k.class);
        v.extend(k.messages.iter().flat_map(|(s, m)| [*s, *m]));
        v.extend_from_slice(k.new_service_messages);
        v.extend_from_slice(k.outage_messages);
    }
    v.extend(AMBIGUOUS_MESSAGES.iter().map(|(m, _)| *m));
    v
}

/// The invented proper names of the scenario (brand, products, people, places, carriers).
pub fn proper_names() -> Vec<&'static str> {
    let mut v = vec![RETAILER, RETAILER_SHORT, NEW_LINE_NAME];
    for list in [
        CORE_PRODUCTS,
        NEW_LINE_PRODUCTS,
        CARRIERS,
        CITIES,
        STREETS,
        CUSTOMER_FIRST,
        CUSTOMER_LAST,
        AGENTS,
        REVIEWER_NAMES,
    ] {
        v.extend_from_slice(list);
    }
    v
}

/// Ticket classes in table order.
pub fn ticket_classes() -> Vec<&'static str> {
    TEAMS.iter().map(|t| t.class).collect()
}

/// Log classes in table order.
pub fn log_classes() -> Vec<&'static str> {
    FAILURE_KINDS.iter().map(|k| k.class).collect()
}
