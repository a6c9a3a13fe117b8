//! Extraction throughput on short text messages and on ~2 KB bodies.
//!
//! Run: `cargo bench -p chaffgate-text --bench extract -- --warm-up-time 1 --measurement-time 3`.
//! Each iteration extracts a whole batch; messages per second are the
//! batch size divided by the time per iteration. All texts are invented.
//!
//! The first two batches are small and extracted again and again, so after
//! the first iteration the extractor's feature cache knows every word: they
//! show the cost of everything but hashing words. The third batch is made
//! of random words that do not come back before the cache has forgotten
//! them, the worst case for the cache.

use std::hint::black_box;

use chaffgate_text::{Extractor, FeatureSettings, Features, HashKey, Message};
use criterion::{Criterion, Throughput, criterion_group, criterion_main};

/// Short messages of roughly 80 bytes, in the style of phone text messages.
const SHORT: &[&str] = &[
    "Hey, are we still on for lunch tomorrow at 12? I can book the table by the window.",
    "URGENT! You have won a 1000 GBP voucher. Text CLAIM to 80123 now to collect!!!",
    "Running 10 min late, the bus broke down near the bridge. Save me a seat please :)",
    "Your parcel could not be delivered. Reschedule at parcel-help.example/r/8f3k2 today",
    "Mum says dinner is at 7, bring the salad bowl back if you still have it. Love, J",
    "FREE entry to win a new phone! Reply YES to 61234. Std msg rates apply. Stop=STOP",
    "Can you send me the slides from this morning? Want to check the numbers before Fri",
    "Congratulations, you were selected for a \u{00A3}500 reward. Call 0800 123 4567 now.",
];

/// Sentences from which ~2 KB bodies are put together.
const SENTENCES: &[&str] = &[
    "Thank you for your message about the quarterly report.",
    "The team reviewed the figures on Tuesday and agreed that the second section needs a clearer summary.",
    "Please move the regional numbers into a table so that readers can compare them at a glance.",
    "You can find the updated draft at https://docs.example.org/reports/q3-draft and leave comments there.",
    "If anything is unclear, reply here or call me on 020 7946 0018.",
    "Our supplier confirmed that the delivery of 240 units will arrive before the end of the month.",
    "Remember that the office is closed on Monday for maintenance of the heating system.",
    "The budget for the spring campaign was approved, but the travel costs are still under review.",
    "Maria will present the customer survey results at the next all-hands meeting.",
    "I attached the minutes from yesterday; corrections are welcome until Thursday noon.",
    "We noticed a spike in support tickets after the last release, mostly about password resets.",
    "The new onboarding guide is shorter and links to the video walkthrough.",
    "Could you check whether the invoice numbers match the purchase orders from March?",
    "Facilities asked everyone to label their food in the shared fridge by Friday.",
    "The security team recommends turning on two-step sign-in for all shared accounts.",
    "Several customers asked for an export to spreadsheet format, which is now on the roadmap.",
    "Training for the booking tool runs every Wednesday at 10:30 in room 4B.",
    "Please do not forward this thread outside the company until the announcement is public.",
    "Our partner in Lyon sent revised prices; the changes affect roughly 15% of the catalogue.",
    "Let me know which of the three dates suits you best for the planning workshop.",
    "The printer on the second floor is fixed, thanks to everyone for their patience.",
    "Draft contracts go to legal first, then to the account manager for signature.",
    "Sales in the northern region grew by 4.2 percent, slightly ahead of the forecast.",
    "Kind regards, and have a good weekend.",
    "The warehouse inventory count starts at 7 on Saturday morning, so please park behind building C.",
    "Feedback from the pilot group was mostly positive, although two teams found the search too slow.",
    "Our annual subscription to the design library renews next week unless someone objects.",
    "The customer from Rotterdam asked whether we can ship spare parts directly to their site.",
    "Please update your emergency contact details in the staff portal before the audit.",
    "The quarterly newsletter needs three short articles; volunteers get a coffee voucher.",
    "Network maintenance on Sunday night may interrupt the VPN between 01:00 and 03:00.",
    "A reminder that expense claims older than ninety days cannot be reimbursed.",
    "The interns will shadow the support desk for their first two weeks.",
    "We are still waiting on the translated manuals for the Spanish and Portuguese markets.",
    "The board meeting moved to the larger room because of the number of guests.",
    "Thanks again to Priya for organising the charity run; we raised 3,150 euros.",
    "Please review the attached risk register and flag anything that looks out of date.",
    "The mobile app release is delayed by one sprint while we fix the login crash on older phones.",
    "Lunch on Thursday is catered, so let the front desk know about dietary needs.",
    "Our landlord will inspect the fire doors on every floor next Tuesday afternoon.",
];

/// Eight bodies of 2048 bytes, each a different pseudo-random order of the
/// sentences (a fixed linear congruential sequence, so runs are comparable).
fn long_bodies() -> Vec<Message> {
    let mut state = 0x2545_f491_u64;
    let mut next = move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 33) as usize
    };
    (0..8)
        .map(|_| {
            let mut body = String::from("Hello, ");
            while body.len() < 2048 {
                body.push_str(SENTENCES[next() % SENTENCES.len()]);
                body.push(' ');
            }
            // The sentences are ASCII, so any byte offset is a character boundary.
            body.truncate(2048);
            Message {
                subject: Some("Re: quarterly report draft".into()),
                body: Some(body),
                sender: Some("Sam Example <sam@mail.corp.example>".into()),
                channel: Some("mail".into()),
                ..Message::default()
            }
        })
        .collect()
}

/// 1024 bodies of 2048 bytes of random lowercase words of 3 to 9 letters,
/// about 350 000 words, from a fixed linear congruential sequence.
fn unique_word_bodies() -> Vec<Message> {
    let mut state = 0x9e37_79b9_u64;
    let mut next = move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 33) as usize
    };
    (0..1024)
        .map(|_| {
            let mut body = String::new();
            while body.len() < 2048 {
                for _ in 0..3 + next() % 7 {
                    body.push(char::from(b'a' + (next() % 26) as u8));
                }
                body.push(' ');
            }
            body.truncate(2048);
            Message {
                body: Some(body),
                ..Message::default()
            }
        })
        .collect()
}

fn short_messages() -> Vec<Message> {
    SHORT
        .iter()
        .map(|text| Message {
            body: Some((*text).into()),
            sender: Some("+447700900123".into()),
            channel: Some("sms".into()),
            ..Message::default()
        })
        .collect()
}

fn text_bytes(messages: &[Message]) -> u64 {
    let bytes: usize = messages
        .iter()
        .map(|msg| {
            msg.subject.as_deref().map_or(0, str::len) + msg.body.as_deref().map_or(0, str::len)
        })
        .sum();
    bytes as u64
}

fn bench_batch(c: &mut Criterion, name: &str, messages: &[Message]) {
    let mut extractor = Extractor::new(FeatureSettings::default(), HashKey::from_bytes([0x5a; 16]));
    let mut out = Features::default();
    let mut group = c.benchmark_group("extract");
    group.throughput(Throughput::Bytes(text_bytes(messages)));
    group.bench_function(name, |b| {
        b.iter(|| {
            for msg in messages {
                extractor.extract(black_box(msg), &mut out);
                black_box(out.len());
            }
        });
    });
    group.finish();
}

fn extraction(c: &mut Criterion) {
    bench_batch(c, "short_8_messages", &short_messages());
    bench_batch(c, "long_8_messages_2kb", &long_bodies());
    bench_batch(c, "long_1024_unique_words_2kb", &unique_word_bodies());
}

criterion_group!(benches, extraction);
criterion_main!(benches);
