"""Writes a JSONL corpus of invented ~2 KB messages for throughput runs.

The messages are stitched from invented sentences of a fictional craft
co-operative's shop mailbox (customer mail, supplier mail and junk), so the
text has realistic word lengths and variety. Invented for benchmarks only;
the figures say nothing about accuracy.

    python3 scripts/make_long_corpus.py 5000 > /tmp/long.jsonl
    ./target/release/chaffgate eval --corpus /tmp/long.jsonl
"""

import json
import random
import sys

SEED = 2026
FINE = [
    "I ordered a set of four stoneware bowls on the {n}th and the parcel has not arrived yet.",
    "Could you tell me whether the linen aprons come in a larger size?",
    "The teapot lid arrived chipped; I have attached two photos of the damage.",
    "Our wool delivery for next week will be {n} bales of undyed fleece, as agreed.",
    "Please confirm the invoice number {n} for the birch wood order from the sawmill.",
    "My daughter loved the weaving workshop, and we would like to book another place in spring.",
    "Is it possible to collect the order from the studio instead of having it posted?",
    "Thank you for the quick reply yesterday, the replacement plates fit perfectly.",
    "The glaze on the green mugs is slightly different from the photo on the website.",
    "We are planning the autumn market stall and need {n} extra display crates.",
    "Kind regards from the pottery team, and see you at the co-operative meeting on Thursday.",
    "The tracking page says the parcel was left with a neighbour, but nobody has it.",
]
JUNK = [
    "Your account has been limited; verify your payment details within {n} hours to avoid closure.",
    "Congratulations, your address was selected to receive a reward of {n} euros today.",
    "We guarantee first page ranking for your shop, reply now for our cheapest package.",
    "Send any amount of coins to our wallet and receive double back, offer ends tonight.",
    "Invoice {n} is overdue and legal action will follow unless you pay through the link below.",
    "Designer watches and handbags at ninety percent off, genuine quality, free shipping.",
    "Click the secure link to confirm your mailbox password or lose access to your messages.",
    "Limited giveaway for loyal customers only, claim your prize before midnight.",
]


def message(rng, is_junk):
    pool = JUNK if is_junk else FINE
    parts = []
    while sum(len(p) + 1 for p in parts) < 2000:
        parts.append(rng.choice(pool).format(n=rng.randint(2, 99999)))
    subject = rng.choice(pool).format(n=rng.randint(2, 999))[:60]
    host = "offers.example.net" if is_junk else "customer.example.org"
    return {
        "subject": subject,
        "body": " ".join(parts),
        "sender": f"person{rng.randint(1, 500)}@{host}",
        "label": "junk" if is_junk else "fine",
    }


def main():
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 5000
    rng = random.Random(SEED)
    for _ in range(count):
        print(json.dumps(message(rng, rng.random() < 0.2)))


if __name__ == "__main__":
    main()
