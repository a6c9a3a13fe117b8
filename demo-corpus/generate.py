#!/usr/bin/env python3
"""Invented demo corpus: eight weeks of the Brackenfold Makers shop's mail and help desk.

Usage (from the repository root, Python 3.11 or later, standard library only):

    python3 demo-corpus/generate.py > demo-corpus/messages.jsonl   # the corpus
    python3 demo-corpus/generate.py --stats                         # counts, as in the README

The output is a pure function of the seed (``--seed``, default ``SEED``
below): every random choice is drawn from one ``random.Random(seed)`` in a
fixed order, nothing depends on set or hash order, the clock or the
locale, and the file is written as UTF-8 with ``\\n`` line ends. Running
the first command again reproduces the committed file byte for byte.

Every shop, person, address and message here is invented for the demo.
The corpus shows the pipeline working; it is not training data for a real
deployment. Only reserved names are used for hosts: example.com,
example.org, example.net and their subdomains, and the .test and .example
top-level domains (RFC 2606); IP addresses come from the documentation
ranges of RFC 5737. ``check_hosts`` refuses to print anything else.

Each line is one JSON object: ``id``, ``at`` (RFC 3339, UTC), ``week``
(1..8), ``channel`` (``mail`` or ``tickets``), ``label`` (``junk`` or
``fine``), ``campaign`` (the template family), then either the message
fields ``subject``, ``body``, ``sender`` (and ``meta`` on tickets) or
``raw``, a whole RFC 5322 mail.
"""

import argparse
import base64
import json
import math
import quopri
import random
import re
import sys
from datetime import datetime, timedelta, timezone

SEED = 20260302
START = datetime(2026, 3, 2, tzinfo=timezone.utc)  # a Monday
WEEKS = 8
DAYS = WEEKS * 7

# --------------------------------------------------------------------------
# The invented world
# --------------------------------------------------------------------------

SHOP = "Brackenfold Makers"
COOP = "Brackenfold Makers' Co-operative"
TOWN = "Harrowmere"
SHOP_DOMAIN = "brackenfold.example.com"
HELP_ADDR = "help@brackenfold.example.com"
CONTACT_ADDR = "hello@brackenfold.example.com"
SHOP_URL = "https://shop.brackenfold.example.com"
FILES_URL = "https://files.brackenfold.example.com"
ADMIN_URL = "https://admin.brackenfold.example.com"

# (first name, surname, local part, craft or job)
MEMBERS = [
    ("Wren", "Ashdown", "wren", "ceramics"),
    ("Idris", "Pellow", "idris", "wooden toys"),
    ("Sunniva", "Marsh", "sunniva", "weaving"),
    ("Tobiah", "Lanyard", "tobiah", "candles"),
    ("Rosalind", "Quay", "rosalind", "help desk"),
    ("Halvard", "Penn", "halvard", "packing and shipping"),
    ("Maud", "Oakhollow", "maud", "bookkeeping"),
]

# (category, product, price in EUR)
PRODUCTS = [
    ("ceramics", "speckled stoneware mug", 24),
    ("ceramics", "sea-green glazed bowl", 32),
    ("ceramics", "set of four dinner plates", 96),
    ("ceramics", "ash-glaze teapot", 68),
    ("ceramics", "small bud vase", 18),
    ("ceramics", "oval serving platter", 55),
    ("woven", "indigo table runner", 45),
    ("woven", "wool throw in oat", 120),
    ("woven", "hand-woven tea towel", 16),
    ("woven", "small rag rug", 70),
    ("woven", "herringbone cushion cover", 38),
    ("candles", "beeswax pillar candle", 14),
    ("candles", "set of six dinner candles", 22),
    ("candles", "soy candle in a ceramic pot", 28),
    ("candles", "lavender tin candle", 12),
    ("toys", "oak stacking rainbow", 48),
    ("toys", "pull-along duck", 26),
    ("toys", "wooden train set", 64),
    ("toys", "beech building blocks (30 pieces)", 39),
    ("toys", "carved animal set", 34),
]

FIRST_NAMES = [
    "Ines", "Marta", "Olu", "Kim", "Priya", "Tomasz", "Aoife", "Jonas", "Leila",
    "Mateo", "Hannah", "Yusuf", "Freya", "Chen", "Sofia", "Emeka", "Greta", "Ravi",
    "Niamh", "Lukas", "Amara", "Dmitri", "Elif", "Bram", "Keiko", "Rosa", "Callum",
    "Noor", "Pietro", "Zanele", "Oskar", "Isla", "Farid", "Maren", "Tariq",
    "Beatriz", "Anouk", "Declan", "Mira", "Joost", "Zoë", "Agnès", "Søren", "Ana",
]
SURNAMES = [
    "Quillan", "Marrowby", "Thistlecombe", "Oakenfold", "Pennyrigg", "Hollowell",
    "Brindlecroft", "Larkmoor", "Wetherby-Nash", "Sandmere", "Cobbleway", "Fernwick",
    "Dunmarrow", "Elderholt", "Grisedale-Vane", "Harrowgate", "Inchcombe", "Kestrow",
    "Lindqvist-Moor", "Mossgiel", "Nettlebank", "Orrin", "Pelham-Strand", "Rookwell",
    "Saltmarsh", "Tamberlin", "Underhay", "Vellacott", "Wintersett", "Yarrowby",
]
CUSTOMER_DOMAINS = [
    "mail.example.org", "post.example.net", "inbox.example.com", "home.example.org",
    "example.net", "webmail.example.com", "customer.example.org", "post.example.org",
    "mailbox.test", "letters.example",
]
# Small businesses whose mail accounts junk senders have taken over.
HIJACKED_DOMAINS = ["dentist-lindenway.example.com", "harbourview-hotel.example.org",
                    "oldmill-garage.example.net", "allotment-society.test",
                    "riverside-yoga.example"]
STREETS = ["Lantern Row", "Mill Lane", "Orchard Close", "Kiln Street", "Weavers Yard",
           "Beacon Terrace", "Copper Walk", "Station Road"]
TOWNS = ["Quellbridge", "Ashby Fold", "Marrowford", "Tidewell", "Hollin Cross", "Stanmere"]

SUPPLIERS = [
    # (company, person, address, what they sell)
    ("Tallowmere Wax Supply", "Petra Gorse", "orders@tallowmere-wax.example.net", "wax"),
    ("Greyling Clay Co.", "Anselm Brook", "sales@greyling-clay.example.com", "clay"),
    ("Fellhollow Fibre Mill", "Tomas Reede", "tomas@fellhollow-fibre.example.org", "wool"),
    ("Larchgate Timber", "Bettany Cole", "yard@larchgate-timber.example.com", "timber"),
    ("Boxwright Packaging", "Ozzie Lamb", "orders@boxwright.example.net", "boxes"),
]
SUPPLY_ITEMS = {
    "wax": ["10 kg beeswax pellets", "cotton wicks, size 4 (500)", "soy wax flakes, 20 kg",
            "lavender oil, 1 litre"],
    "clay": ["stoneware clay, 20 bags", "ash glaze base, 10 kg", "kiln shelves (2)",
             "sea-green glaze, 5 kg"],
    "wool": ["undyed merino, 12 bales", "indigo-dyed warp yarn, 8 cones", "oat wool weft, 20 kg",
             "linen tea-towel yarn, 10 cones"],
    "timber": ["oak boards, 2 m (15)", "beech offcuts, 3 sacks", "ash dowel, 40 lengths",
               "food-safe oil, 5 litres"],
    "boxes": ["mailer boxes, medium (400)", "paper void fill, 6 rolls", "tissue paper, 2 reams",
              "fragile tape, 24 rolls"],
}
CARRIER = "Swiftcrate Parcels"
CARRIER_ADDR = "updates@swiftcrate.example.net"
TRACK_URL = "https://track.swiftcrate.example.net/p/"
PAYMENTS = "Tillbridge Payments"
PAYMENTS_ADDR = "payouts@tillbridge-pay.example.net"

NEWSLETTERS = [
    # (name, sender name, address, list host, weekday, hour, every n weeks, first week)
    ("Makers' Market Bulletin", "Harrowmere Craft Fair Association",
     "news@craftfair.harrowmere.example.org", "craftfair.harrowmere.example.org", 3, 7, 1, 1),
    ("Kiln & Glaze Notes", "Greyling Clay Co.", "notes@greyling-clay.example.com",
     "greyling-clay.example.com", 1, 9, 2, 1),
    ("Loom Circle", "Loom Circle Weaving Guild", "news@loomcircle.example.org",
     "loomcircle.example.org", 5, 10, 2, 2),
    ("Regional Makers' Fund bulletin", "Harrowmere Arts Office",
     "funding@arts.harrowmere.example.org", "arts.harrowmere.example.org", 2, 8, 2, 2),
    ("Swiftcrate service update", CARRIER, "service@swiftcrate.example.net",
     "swiftcrate.example.net", 0, 6, 1, 1),
]

JUNK_DOMAINS = {
    "fake-invoice": ["billing-desk.test", "invoice-centre.example", "accounts.payreminder.test",
                     "ledger-notice.example.net"],
    "account-phishing": ["account-check.example.net", "secure-login.test",
                         "seller-verify.example", "mailbox-admin.test"],
    "seo-offer": ["rank-boost.example", "toppage-seo.test", "trafficlift.example.net",
                  "linkfarm.test"],
    "prize-notice": ["lucky-draw.test", "winners-desk.example", "reward-centre.example.net"],
    "crypto-giveaway": ["coin-double.example", "token-drop.test", "wallet-bonus.example.net"],
    "counterfeit-goods": ["replica-outlet.test", "brandhouse-deals.example",
                          "factory-direct.example.net"],
    "fake-order-notice": ["swiftcrate-parcels.test", "parcel-redelivery.example",
                          "order-notify.example.net", "photo-drop.test", "pics-share.example",
                          "imgbox.example.net", "shared-album.test", "photo-link.example.org"],
}
# The grant scam's look-alike hosts, each group next to the real host it copies.
GRANT_HOSTS = {
    # the Regional Makers' Fund writes from arts.harrowmere.example.org
    "fund": ["arts-harrowmere.example.org", "harrowmere-arts.example.org",
             "makersfund-harrowmere.example.org", "arts.harrowmere-council.example.net",
             "regional-makers-fund.example.org", "rmf-harrowmere.example.com"],
    # payouts come from tillbridge-pay.example.net
    "payments": ["tillbridge-payments.example.net", "tillbridge-pay.example.org",
                 "tillbridgepay.example.com"],
    # suppliers' own hosts, spelt a little differently
    "supplier": ["tallowmere-wax.example.com", "tallowmerewax.example.net",
                 "greyling-clay.example.org", "greylingclay.example.com",
                 "fellhollow-fibre.example.net", "fellhollowfibre.example.org",
                 "larchgate-timber.example.org", "larchgatetimber.example.net",
                 "boxwright.example.com", "box-wright.example.net"],
}

RESERVED_SUFFIXES = ("example.com", "example.org", "example.net", ".test", ".example")

# --------------------------------------------------------------------------
# Schedule: who writes how often, and when
# --------------------------------------------------------------------------

CUSTOMER_HOURS = [1, .6, .4, .3, .3, .5, 1, 2, 4, 6, 7, 7, 7, 6.5, 6, 6, 5.5, 5, 5.5, 6.5, 7, 6, 4, 2]
WORK_HOURS = [0, 0, 0, 0, 0, 0, .5, 2, 6, 8, 8, 7, 5, 7, 8, 7, 6, 3, 1, .5, .3, .2, 0, 0]
CUSTOMER_WEEKDAY = [1.15, 1.05, 1.0, 1.0, 0.95, 0.55, 0.45]
WORK_WEEKDAY = [1.0, 1.0, 1.0, 1.0, 0.9, 0.15, 0.05]
# Easter Sunday 2026 is 5 April (week 5): gift orders rise before it and dip after.
CUSTOMER_SEASON = [1.0, 1.0, 1.05, 1.15, 1.25, 0.95, 1.05, 1.1]

# Fine families from customers: (campaign, mails per day, tickets per day), before the
# weekday and season factors.
CUSTOMER_FAMILIES = [
    ("order-question", 4.0, 5.0),
    ("shipping-delay", 2.0, 3.0),
    ("return-request", 1.6, 2.4),
    ("damaged-item", 0.8, 2.0),
    ("product-enquiry", 3.2, 2.0),
    ("custom-order", 1.4, 0.5),
    ("workshop-booking", 1.2, 0.7),
    ("account-help", 0.3, 1.0),
    ("address-change", 0.5, 1.0),
    ("thanks-note", 1.2, 0.6),
    ("wholesale-enquiry", 0.5, 0.0),
]
# A regional carrier backlog in week 3 brings a wave of "where is my parcel".
SHIPPING_DELAY_WEEKS = [1.0, 1.0, 3.0, 1.6, 1.0, 1.0, 1.0, 1.0]

# Fine mail from the trade, the fund and the co-op itself: (campaign, channel,
# per working day in each week).
WORK_FAMILIES = [
    ("supplier-mail", "mail", [2.6] * WEEKS),
    ("supplier-offer", "mail", [0.6] * WEEKS),
    # The Regional Makers' Fund writes about the co-op's spring round
    # application all along, a little more while the round is busiest.
    ("fund-mail", "mail", [0.5, 0.8, 1.0, 1.2, 1.5, 1.5, 1.2, 1.0]),
    ("member-note", "mail", [2.4] * WEEKS),
    ("member-note", "tickets", [3.0] * WEEKS),
]

# Junk campaigns: (campaign, first week, last week, mails per day, tickets per day),
# scaled by JUNK_TREND[campaign][week - 1].
JUNK_CAMPAIGNS = [
    ("fake-invoice", 1, 8, 3.0, 0.3),
    ("account-phishing", 1, 8, 2.6, 0.5),
    ("seo-offer", 1, 8, 2.0, 1.4),
    ("prize-notice", 1, 6, 2.0, 0.5),
    ("crypto-giveaway", 3, 8, 2.0, 0.7),
    ("counterfeit-goods", 1, 8, 2.0, 0.8),
    ("fake-order-notice", 1, 8, 1.2, 0.4),
    ("overpayment-order", 1, 8, 0.5, 0.3),
    ("grant-scam", 5, 8, 19.0, 3.0),
]
JUNK_TREND = {
    "prize-notice": [1.0, 1.0, 0.9, 0.8, 0.6, 0.4, 0, 0],
    "crypto-giveaway": [0, 0, 0.7, 1.0, 1.1, 1.2, 1.2, 1.3],
    # A launch in week 5, then the senders slow down as it stops paying.
    "grant-scam": [0, 0, 0, 0, 1.0, 0.6, 0.45, 0.4],
}
# The grant scam's launch week: a blast on Monday, tapering off.
GRANT_LAUNCH_DAYS = [1.8, 1.4, 1.0, 0.7, 0.6, 1.0, 1.0]
# Campaigns that send in office hours, like the mail they copy.
OFFICE_HOURS_CAMPAIGNS = ("grant-scam",)
# Share of grant-scam keywords that are disguised, by week (the campaign adapts).
GRANT_DISGUISE = [0, 0, 0, 0, 0.7, 0.7, 0.75, 0.75]

# Share of mail-channel messages sent as a whole raw mail, by campaign.
RAW_SHARE = {
    "newsletter": 0.85,
    "service-notice": 0.5,
    "supplier-mail": 0.3,
    "supplier-offer": 0.6,
    "fund-mail": 0.4,
    "fake-invoice": 0.35,
    "grant-scam": 0.3,
    "account-phishing": 0.3,
}
RAW_SHARE_OTHER = 0.21


class Event:
    """One message to write: when, where, and from which family."""

    def __init__(self, seconds, seq, channel, campaign, label):
        self.seconds = seconds
        self.seq = seq
        self.channel = channel
        self.campaign = campaign
        self.label = label


def poisson(rng, mean):
    """Knuth's method; mean stays small here, so the loop is short."""
    if mean <= 0:
        return 0
    limit = math.exp(-mean)
    count, product = 0, rng.random()
    while product > limit:
        count += 1
        product *= rng.random()
    return count


def weighted_index(rng, weights):
    total = sum(weights)
    x = rng.random() * total
    for index, weight in enumerate(weights):
        x -= weight
        if x < 0:
            return index
    return len(weights) - 1


def schedule(rng):
    """All events of the eight weeks, in time order."""
    events = []

    def add(day, hour, channel, campaign, label, minute=None):
        second = rng.randrange(3600) if minute is None else minute * 60 + rng.randrange(60)
        events.append(Event(day * 86400 + hour * 3600 + second, len(events), channel,
                            campaign, label))

    for day in range(DAYS):
        week, weekday = day // 7 + 1, day % 7
        for campaign, per_mail, per_ticket in CUSTOMER_FAMILIES:
            factor = CUSTOMER_WEEKDAY[weekday] * CUSTOMER_SEASON[week - 1]
            if campaign == "shipping-delay":
                factor *= SHIPPING_DELAY_WEEKS[week - 1]
            if campaign == "wholesale-enquiry":
                factor = WORK_WEEKDAY[weekday]
            for channel, rate in (("mail", per_mail), ("tickets", per_ticket)):
                for _ in range(poisson(rng, rate * factor)):
                    add(day, weighted_index(rng, CUSTOMER_HOURS), channel, campaign, "fine")
        for campaign, channel, rates in WORK_FAMILIES:
            for _ in range(poisson(rng, rates[week - 1] * WORK_WEEKDAY[weekday])):
                add(day, weighted_index(rng, WORK_HOURS), channel, campaign, "fine")
        # Payouts on Mondays and Thursdays; a carrier manifest every working day.
        if weekday in (0, 3):
            add(day, 5, "mail", "service-notice", "fine")
        if weekday < 5:
            add(day, 17, "mail", "service-notice", "fine")
        # The payment provider's routine check of the seller's details, twice.
        if weekday == 1 and week in (3, 7):
            add(day, 10, "mail", "service-notice", "fine")
        for name, _, _, _, send_weekday, hour, every, first in NEWSLETTERS:
            if weekday == send_weekday and week >= first and (week - first) % every == 0:
                add(day, hour, "mail", "newsletter", "fine", minute=rng.randrange(5))
        for campaign, first, last, per_mail, per_ticket in JUNK_CAMPAIGNS:
            if not first <= week <= last:
                continue
            trend = JUNK_TREND.get(campaign, [1.0] * WEEKS)[week - 1]
            office = campaign in OFFICE_HOURS_CAMPAIGNS
            if office:
                trend *= WORK_WEEKDAY[weekday]
            if campaign == "grant-scam" and week == 5:
                trend *= GRANT_LAUNCH_DAYS[weekday]
            for channel, rate in (("mail", per_mail), ("tickets", per_ticket)):
                count = poisson(rng, rate * trend)
                if count == 0:
                    continue
                # Junk arrives in bursts: one to three send windows a day, or
                # one each morning and afternoon for the campaigns that copy
                # office mail.
                if office:
                    centres = [rng.randrange(8 * 3600, 12 * 3600),
                               rng.randrange(13 * 3600, 17 * 3600)]
                else:
                    centres = [rng.randrange(86400) for _ in range(rng.randint(1, 3))]
                for _ in range(count):
                    centre = rng.choice(centres)
                    offset = int(rng.gauss(0, 1800))
                    second = min(max(centre + offset, 0), 86399)
                    events.append(Event(day * 86400 + second, len(events), channel, campaign,
                                        "junk"))
    events.sort(key=lambda event: (event.seconds, event.seq))
    return events


# --------------------------------------------------------------------------
# Building blocks of message text
# --------------------------------------------------------------------------

KEYBOARD_NEIGHBOURS = {
    "a": "sq", "e": "wr", "i": "uo", "o": "ip", "n": "bm", "t": "ry", "r": "et",
    "s": "ad", "l": "k", "d": "sf", "h": "gj", "u": "yi", "m": "n", "c": "xv",
}


def add_typos(rng, text, rate):
    """Swaps, drops, doubles or mistypes a letter in some longer words."""
    if rate <= 0:
        return text
    words = text.split(" ")
    for index, word in enumerate(words):
        if len(word) < 4 or not word.isalpha() or rng.random() >= rate:
            continue
        at = rng.randrange(1, len(word) - 1)
        kind = rng.randrange(4)
        if kind == 0:
            word = word[:at] + word[at + 1] + word[at] + word[at + 2:]
        elif kind == 1:
            word = word[:at] + word[at + 1:]
        elif kind == 2:
            word = word[:at] + word[at] + word[at:]
        else:
            near = KEYBOARD_NEIGHBOURS.get(word[at].lower())
            if near:
                word = word[:at] + rng.choice(near) + word[at + 1:]
        words[index] = word
    return " ".join(words)


def fill(template, slots):
    """str.format with the slots a template names; unknown names are an error."""
    return template.format(**slots)


def ascii_fold(text):
    table = {"ë": "e", "è": "e", "é": "e", "ø": "o", "Ø": "O", "ö": "o", "ü": "u", "á": "a",
             "í": "i", "ó": "o", "ñ": "n", "ç": "c", "à": "a"}
    return "".join(table.get(ch, ch) for ch in text)


# Our own name tables, so that no locale setting can change the output.
DAY_NAMES = ["Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday"]
MONTH_NAMES = ["January", "February", "March", "April", "May", "June", "July", "August",
               "September", "October", "November", "December"]


def human_date(dt):
    return f"{DAY_NAMES[dt.weekday()]} {dt.day} {MONTH_NAMES[dt.month - 1]}"


def short_date(dt):
    return f"{DAY_NAMES[dt.weekday()][:3]} {dt.day} {MONTH_NAMES[dt.month - 1][:3]} {dt.year}"


class Person:
    def __init__(self, first, last, address):
        self.first = first
        self.last = last
        self.address = address

    @property
    def name(self):
        return f"{self.first} {self.last}"


def invent_customer(rng):
    first, last = rng.choice(FIRST_NAMES), rng.choice(SURNAMES)
    domain = rng.choice(CUSTOMER_DOMAINS)
    plain_first = ascii_fold(first).lower()
    plain_last = ascii_fold(last).lower().replace("-", "")
    style = rng.randrange(5)
    if style == 0:
        local = f"{plain_first}.{plain_last}"
    elif style == 1:
        local = f"{plain_first}{rng.randrange(70, 100)}"
    elif style == 2:
        local = f"{plain_first[0]}{plain_last}"
    elif style == 3:
        local = f"{plain_first}_{plain_last[:4]}"
    else:
        local = f"{plain_last}.{plain_first[0]}"
    return Person(first, last, f"{local}@{domain}")


def member(rng, craft=None):
    choices = [m for m in MEMBERS if craft is None or m[3] == craft]
    first, last, local, _ = rng.choice(choices)
    return Person(first, last, f"{local}@{SHOP_DOMAIN}")


def greeting(rng, to_name=None):
    options = ["Hello,", "Hi there,", "Hi,", "Dear Brackenfold team,", "Good morning,",
               "Hello Brackenfold Makers,", "Hey,", "", ""]
    if to_name:
        options += [f"Hi {to_name},", f"Dear {to_name},"]
    return rng.choice(options)


def signoff(rng, person, formal=False):
    if formal:
        return rng.choice([f"Kind regards,\n{person.name}", f"Best wishes,\n{person.name}",
                           f"Many thanks,\n{person.name}"])
    return rng.choice([
        f"Thanks,\n{person.first}", f"Best wishes,\n{person.name}", f"Cheers\n{person.first}",
        f"Kind regards,\n{person.name}", f"Thank you!\n{person.first}", person.first,
        f"thanks\n{person.first.lower()}", f"Many thanks,\n{person.first}\n\nSent from my phone",
        "",
    ])


def quote(text):
    return "\n".join("> " + line if line else ">" for line in text.split("\n"))


def compose(parts):
    """Joins non-empty paragraphs with blank lines."""
    return "\n\n".join(part for part in parts if part)


# --------------------------------------------------------------------------
# A message before it is written out
# --------------------------------------------------------------------------

class Draft:
    """What a template produces; rendered as plain fields or as a raw mail."""

    def __init__(self, subject, text, sender, sender_name=None):
        self.subject = subject
        self.text = text
        self.sender = sender
        self.sender_name = sender_name
        self.to = CONTACT_ADDR
        self.reply_to = None
        self.list_unsubscribe = None
        self.html = None  # explicit HTML; otherwise made from the text
        self.html_only = False
        self.attachment = None  # (file name, MIME type, bytes)
        self.hops = 2
        self.date_skew_seconds = 60
        self.utc_offset_hours = 0
        self.meta = None

    def sender_field(self, rng):
        if self.sender_name and rng.random() < 0.6:
            return f"{self.sender_name} <{self.sender}>"
        return self.sender


class Context:
    """What templates share: the random source and the running numbers."""

    def __init__(self, rng):
        self.rng = rng
        self.next_ticket = 4100
        self.recent_tickets = []
        self.now = START
        self.week = 1

    def order_ref(self, days_back_max=10):
        days_back = self.rng.randint(0, days_back_max)
        hours = max(0, (self.now - START).total_seconds() / 3600 - days_back * 24)
        return f"BF-{21040 + int(hours * 0.9) + self.rng.randrange(9)}"

    def tracking(self):
        return f"SC{self.rng.randrange(10**8, 10**9)}"

    def product(self, category=None):
        pool = [p for p in PRODUCTS if category is None or p[0] == category]
        return self.rng.choice(pool)

    def earlier(self, days_min, days_max):
        return self.now - timedelta(days=self.rng.randint(days_min, days_max))

    def ticket(self):
        number = self.next_ticket
        self.next_ticket += 1
        self.recent_tickets = (self.recent_tickets + [number])[-40:]
        return f"T-{number}"


# --------------------------------------------------------------------------
# Fine families
# --------------------------------------------------------------------------

def help_desk_reply(ctx, customer, ref, topic):
    rng = ctx.rng
    agent = member(rng, "help desk") if rng.random() < 0.7 else member(rng, "packing and shipping")
    lines = {
        "order-question": f"thanks for your message. Order {ref} is with us and will go out "
                          f"within two working days. You'll get a tracking link from {CARRIER}.",
        "shipping-delay": f"sorry for the wait. {CARRIER} are behind this week; your parcel "
                          f"is at their {rng.choice(TOWNS)} depot: {TRACK_URL}{ctx.tracking()}",
        "return-request": "certainly. Please send it back within 30 days in its packaging and "
                          "tell us whether you'd like a refund or an exchange. The form is at "
                          f"{SHOP_URL}/returns",
        "damaged-item": "I'm so sorry it arrived broken. Could you send a photo of the piece "
                        "and the box? Then we'll send a replacement straight away.",
        "product-enquiry": "yes, we can. Each piece is made by hand, so allow two to three "
                           "weeks, and colours vary a little from the photos.",
    }
    text = f"Hello {customer.first},\n\n{lines.get(topic, lines['order-question'])}\n\n" \
           f"Best wishes,\n{agent.first}\n{SHOP} help desk"
    when = ctx.earlier(1, 4).replace(hour=rng.randrange(9, 17), minute=rng.randrange(60))
    header = f"On {short_date(when)} at {when.strftime('%H:%M')}, {SHOP} help desk <{HELP_ADDR}> wrote:"
    return header + "\n" + quote(text)


def customer_message(ctx, campaign, channel):
    """Customers: questions, problems, returns, thanks."""
    rng = ctx.rng
    customer = invent_customer(rng)
    category, product, price = ctx.product()
    _, product2, _ = ctx.product()
    ref = ctx.order_ref()
    tracking = ctx.tracking()
    ordered = ctx.earlier(3, 12)
    slots = {
        "ref": ref, "product": product, "product2": product2, "price": price,
        "tracking": tracking, "ordered": human_date(ordered), "shop": SHOP, "carrier": CARRIER,
        "street": f"{rng.randint(2, 88)} {rng.choice(STREETS)}", "town": rng.choice(TOWNS),
        "first": customer.first, "count": rng.choice(["two", "three", "four", "six", "a dozen"]),
        "giftee": rng.choice(["Mum", "Grandad", "Amélie", "my sister", "Theo", "our neighbours"]),
        "member": rng.choice(MEMBERS)[0], "days": rng.choice(["ten", "twelve", "eight", "fifteen"]),
        "category": category,
    }
    generic, bodies = CUSTOMER_TEXT[campaign]
    body, specific = rng.choice(bodies)
    subject = fill(rng.choice(specific if rng.random() < 0.55 else generic), slots)
    body = fill(body, slots)
    extra = CUSTOMER_EXTRAS.get(campaign, [])
    if extra and rng.random() < 0.35:
        body = body + " " + fill(rng.choice(extra), slots)
    if campaign in PRICED_FAMILIES and rng.random() < 0.3:
        body = body + " " + fill(rng.choice(PRICE_LINES), slots)
    if rng.random() < LINK_SHARE:
        body = body + " " + pasted_link(rng, campaign, slots)
    typo_rate = rng.choice([0, 0, 0.02, 0.04, 0.08])
    body = add_typos(rng, body, typo_rate)
    short = len(body) < 90
    parts = [greeting(rng) if not short or rng.random() < 0.3 else "", body]
    if not short and rng.random() < 0.25:
        parts.append(fill(rng.choice(CUSTOMER_PS), slots))
    parts.append(signoff(rng, customer, formal=campaign == "wholesale-enquiry"))
    text = compose(parts)
    if rng.random() < 0.1:
        text = text.lower()
    if campaign in HURRY_FAMILIES and rng.random() < HURRY_SHARE:
        text, subject = hurried(rng, text, subject, slots)
    quoted_topics = ("order-question", "shipping-delay", "return-request", "damaged-item",
                     "product-enquiry")
    if channel == "mail" and campaign in quoted_topics and rng.random() < 0.22:
        text = text + "\n\n" + help_desk_reply(ctx, customer, ref, campaign)
        subject = "Re: " + subject
    if rng.random() < 0.08:
        subject = subject.upper()
    draft = Draft(subject, text, customer.address, customer.name)
    draft.hops = rng.randint(2, 4)
    draft.utc_offset_hours = rng.choice([0, 0, 1, 1, 2, -5])
    draft.date_skew_seconds = rng.randint(2, 90)
    if channel == "mail" and rng.random() < 0.12:
        # The shop's own contact form relays the customer's mail.
        draft.sender = f"form@{SHOP_DOMAIN}"
        draft.sender_name = "Shop contact form"
        draft.hops = 1
        draft.reply_to = customer.address
        draft.text = f"Name: {customer.name}\nEmail: {customer.address}\nOrder: {ref}\n\n{text}"
    if channel == "tickets":
        draft.meta = {"form": TICKET_FORMS.get(campaign, "general")}
    return draft


# Families where customers mention what they paid.
PRICED_FAMILIES = ("order-question", "shipping-delay", "return-request", "damaged-item",
                   "address-change", "thanks-note")
PRICE_LINES = ["It was {price} EUR.", "(I paid {price} EUR for it.)",
               "The total was {price} EUR plus postage.", "That's the {price} EUR one."]

# Share of customers who paste a link (the listing, the tracking page, the order).
LINK_SHARE = 0.25


# Where customers keep the photos they link to.
PHOTO_HOSTS = ["photos.example.org", "pics.example.net", "album.example.com"]


def pasted_link(rng, campaign, slots):
    slug = re.sub(r"[^a-z0-9]+", "-", slots["product"].lower()).strip("-")
    listing = f"{SHOP_URL}/p/{slug}"
    photos = f"https://{rng.choice(PHOTO_HOSTS)}/a/{rng.randrange(10**5, 10**6)}"
    if campaign in ("damaged-item", "return-request", "thanks-note") and rng.random() < 0.6:
        return rng.choice([f"Photos: {photos}", f"I've put some photos here: {photos}",
                           f"Here it is in its new home: {photos}"
                           if campaign == "thanks-note" else f"See the photos: {photos}"])
    if campaign in ("shipping-delay", "order-question", "address-change", "damaged-item"):
        return rng.choice([f"Tracking: {TRACK_URL}{slots['tracking']}",
                           f"(order page: {SHOP_URL}/orders/{slots['ref'].lower()})",
                           f"This is the one: {listing}"])
    return rng.choice([f"This is the one I mean: {listing}", f"({listing})",
                       f"Link in case it helps: {listing}"])


# Share of customers who write in a hurry: shouting, links, "click here".
HURRY_SHARE = 0.08
HURRY_FAMILIES = ("order-question", "shipping-delay", "damaged-item", "address-change")


def hurried(rng, text, subject, slots):
    """A real customer in a hurry: the wording of junk, the matter of an order."""
    slug = re.sub(r"[^a-z0-9]+", "-", slots["product"].lower()).strip("-")
    listing = f"{SHOP_URL}/p/{slug}"
    tracking = f"{TRACK_URL}{slots['tracking']}"
    order = f"{SHOP_URL}/orders/{slots['ref'].lower()}"
    plea = rng.choice([
        f"PLEASE reply asap, I need this sorted TODAY!! This is the one I mean: {listing}",
        f"Click here to see what I mean: {tracking} - it hasn't moved in DAYS!!!",
        f"urgent!! link to my order: {order} please check it now, I need it by Friday",
        f"Sorry to rush you but it's urgent. Here's the listing: {listing} and the "
        f"tracking: {tracking}",
        f"Act fast please, it's a gift and time is running out! {order}",
    ])
    prefix = rng.choice(["URGENT: ", "URGENT!! ", "Please help!! ", "!!! ",
                         "Reply today please - "])
    return before_signature(text, plea), prefix + subject


TICKET_FORMS = {
    "order-question": "order-help", "shipping-delay": "order-help", "address-change": "order-help",
    "return-request": "returns", "damaged-item": "returns", "account-help": "account",
    "product-enquiry": "general", "custom-order": "general", "workshop-booking": "general",
    "thanks-note": "general",
}

CUSTOMER_PS = [
    "PS: the {product2} I bought last year is still my favourite thing in the kitchen.",
    "P.S. Love the new photos on the website!",
    "PS I'm away from the {town} address after the 20th, in case that matters.",
    "(Sorry if this is the second message, the form seemed to freeze.)",
]

CUSTOMER_EXTRAS = {
    "order-question": ["It's a birthday present so timing matters a bit.",
                       "No rush, just want to be sure it went through.",
                       "I paid by card if that helps."],
    "shipping-delay": ["The tracking page just says 'in transit'.",
                       "Is there a number I can ring at {carrier}?",
                       "I've checked with the neighbours, nothing there."],
    "return-request": ["I still have the box it came in.", "The receipt is in my email."],
    "damaged-item": ["I've kept all the packing in case the carrier wants to see it.",
                     "I can send more photos if needed."],
    "product-enquiry": ["I'm happy to wait a few weeks if they need making.",
                        "Do you post to Ireland as well?"],
}

# Each family: (subjects that fit any of its messages, [(body, subjects for that body)]).
CUSTOMER_TEXT = {
    "order-question": (
        ["Order {ref}", "Question about my order", "{ref}", "quick question", "My order"],
        [("I placed an order on {ordered} ({ref}) for the {product} but haven't had a "
          "confirmation email. Could you check it went through? The money has left my account.",
          ["Did my order go through?", "No confirmation for {ref}"]),
         ("Is it still possible to add a {product2} to order {ref}? I don't think it has "
          "shipped yet. Happy to pay the difference.",
          ["order {ref} - can I add something?", "Adding to my order"]),
         ("I ordered the {product} as a present for {giftee}. Could you leave the price off the "
          "packing slip and add a little note saying 'Happy birthday, love from {first}'?",
          ["Gift note for order {ref}", "It's a present"]),
         ("My card was charged twice for order {ref} ({price} EUR each time). Could you refund "
          "one of them please? I don't know how to attach a screenshot, but both payments are "
          "dated {ordered}.",
          ["Charged twice for {ref}?", "Double payment"]),
         ("hi, has {ref} shipped yet? thx", ["shipped?"]),
         ("Hello again - I ordered {count} of the {product} for a wedding on the 28th. The "
          "order is {ref}. Could you tell me roughly when they will go out? The couple are "
          "friends of ours and the table is all ceramics from you, so I'm a bit nervous about "
          "timing.\n\nIf it's easier to collect from the studio in {town} I could do that on a "
          "Saturday.",
          ["Wedding order timing", "When will {ref} go out?"]),
         ("Just checking: does order {ref} include the gift wrap? I ticked the box but the "
          "confirmation doesn't mention it.",
          ["Gift wrap on {ref}?"]),
         ("Can I pay for {ref} by bank transfer instead? The card payment keeps failing at the "
          "last step.",
          ["Payment failing", "Bank transfer?"])]),
    "shipping-delay": (
        ["Where is my parcel?", "Order {ref} not arrived", "Still waiting for {ref}",
         "delivery?", "Late delivery - {ref}"],
        [("My order {ref} was marked as shipped on {ordered} but nothing has arrived and the "
          "tracking number {tracking} hasn't changed for four days.",
          ["Tracking {tracking} not moving"]),
         ("Hi, it's been {days} days since I ordered the {product} and I haven't received "
          "anything. Can you check what's going on?", ["Nothing received yet"]),
         ("The {carrier} tracking ({tracking}) says 'delivered' but there is no parcel here. "
          "I've looked in the porch and asked next door. What should I do?",
          ["Says delivered but not here", "Parcel {tracking} missing"]),
         ("still nothing for {ref}!! this was meant to be a gift for last weekend",
          ["STILL WAITING"]),
         ("I know the carriers are busy at the moment, I'm not complaining, but could you let "
          "me know if order {ref} has actually left the studio? I'm moving house soon and want "
          "to be sure it goes to the right place.\n\nThe new address from the 1st will be "
          "{street}, {town}.",
          ["Has {ref} left the studio?"]),
         ("Parcel {tracking} has been at the {town} depot since {ordered}. Is it stuck?",
          ["Stuck at the depot?"])]),
    "return-request": (
        ["Return", "Returning an item from {ref}", "Can I send this back?", "Refund for {ref}",
         "Returns"],
        [("I'd like to return the {product} from order {ref}. It's lovely but it's not quite "
          "the colour I expected in our room. How do I send it back?", ["Not the right colour"]),
         ("The {product} is smaller than I thought from the photos. Can I exchange it for the "
          "{product2} and pay the difference?", ["Exchange please"]),
         ("Could I get a refund for order {ref}? Someone else in the family bought the same "
          "present, so we don't need it any more. It's unused and still wrapped.",
          ["Refund request"]),
         ("you sent me the {product2} instead of the {product} (order {ref}). can you swap it?",
          ["wrong item", "wrong item sent"]),
         ("What is your returns policy for sale items? I bought the {product} on {ordered} "
          "and would like to return it if I can.", ["Returns policy"])]),
    "damaged-item": (
        ["Broken on arrival", "Order {ref} arrived damaged", "parcel damaged", "Damaged item"],
        [("The {product} from order {ref} arrived with a crack along the rim. The box was "
          "crushed on one corner. I've taken photos. Can I get a replacement or a refund?",
          ["Order {ref} arrived cracked", "Cracked {product}"]),
         ("Unfortunately one of the {count} {product} pieces is chipped. The others are "
          "perfect and beautiful! Could you send just one more?", ["One chipped piece"]),
         ("the parcel came today and the {product} was in pieces :( order {ref}",
          ["broken :("]),
         ("Hello, I received order {ref} today. The outer box was wet and the {product2} "
          "inside has a water mark. I don't want to make a fuss but it was a gift, so I can't "
          "really give it like this. What can we do?", ["Water damage"])]),
    "product-enquiry": (
        ["Question about the {product}", "Product question", "Quick question", "Enquiry",
         "{product}"],
        [("Do you still make the {product}? It's been out of stock on the website for a while.",
          ["Back in stock?", "Do you still make the {product}?"]),
         ("Are your mugs dishwasher safe? I'd like to buy {count} but we use the dishwasher "
          "for everything.", ["Dishwasher safe?"]),
         ("Is the {product} finished with anything? My son is 14 months and chews everything.",
          ["Safe for a toddler?"]),
         ("How long does the {product} burn for, roughly? And is the wax from local bees?",
          ["Candle burn time"]),
         ("What are the measurements of the {product}? The listing says 'medium' which could "
          "mean anything!", ["Sizes?", "Measurements"]),
         ("I saw your stall at the market last month and bought a {product}. Do you make it in "
          "other colours? I'd love a set of {count} in the sea-green.", ["Other colours?"]),
         ("do you ship abroad?", ["shipping abroad"]),
         ("Would the {product} fit a table 180 cm long? Or do you make longer ones to order?",
          ["Longer sizes?"])]),
    "custom-order": (
        ["Custom order", "Commission enquiry", "Made to order?"],
        [("Would it be possible to order a set of {count} {product} with our initials? It's "
          "for our wedding in June. We're flexible on colour.", ["Wedding order"]),
         ("I'm looking for a name carved on a {product} for my nephew's first birthday. Do you "
          "do personalisation, and how long does it take?", ["Personalised {product}?"]),
         ("Our café in {town} is opening in May and we'd love {count} dozen mugs in a single "
          "glaze. Could {member} make something like that? What would the price be per piece?",
          ["Mugs for our café"]),
         ("Could you weave a runner to a custom length (240 cm)? Same indigo as on the site.",
          ["Custom length runner"])]),
    "workshop-booking": (
        ["Workshop booking", "Workshops", "Booking enquiry"],
        [("Can I book two places on the Saturday pottery workshop? My daughter is 12, is that "
          "okay?", ["Saturday pottery workshop"]),
         ("Is there still space on the weaving class on the 21st? I'm a complete beginner.",
          ["Places on the weaving class"]),
         ("I'd like to buy a workshop place as a gift. Does it come with a printed voucher?",
          ["Gift voucher for a workshop"]),
         ("Do you run the candle-making evening for groups? We are {count} colleagues looking "
          "for a team outing.", ["candle-making evening", "Team outing"]),
         ("I booked the workshop for the 14th but can't make it now. Could I move to a later "
          "date?", ["Moving my workshop date"])]),
    "account-help": (
        ["My account", "Account question", "Help with my account"],
        [("I asked for a password reset three times but the email never comes. I've checked "
          "the spam folder.", ["Password reset not arriving", "Can't log in"]),
         ("Please change the email on my account to the one I'm writing from. The old one "
          "doesn't exist any more.", ["Change my email address"]),
         ("Could you delete my customer account and any data you hold? Thank you.",
          ["Delete my account"]),
         ("How do I sign up for your newsletter? The box on the website didn't do anything.",
          ["Newsletter sign-up"]),
         ("The site says my email is already registered but I don't remember making an "
          "account.", ["Already registered?"])]),
    "address-change": (
        ["Change of address", "Update delivery address", "Address for {ref}"],
        [("Could you change the delivery address on {ref}? I've just realised I put my old "
          "flat. The new one is {street}, {town}.", ["Wrong address on {ref}"]),
         ("Please send order {ref} to my work address instead: {street}, {town}. Reception "
          "will sign for it.", ["deliver to work instead?"]),
         ("I made a typo in the postcode for {ref}. The street is right ({street}) but the "
          "town should be {town}.", ["Typo in my address"])]),
    "thanks-note": (
        ["Thank you!", "Arrived safely", "Just a thank you", "Thanks"],
        [("Just wanted to say the {product} arrived today and it's gorgeous. Thank you for "
          "the handwritten note too!", ["The {product} is perfect"]),
         ("Thanks so much for sorting out the replacement so quickly. Really great service.",
          ["Lovely service"]),
         ("The {product} was a huge hit with {giftee}. We'll be back for the {product2}.",
          ["A big hit"]),
         ("got it, thanks!", ["received"]),
         ("Everything arrived beautifully packed. Please pass my thanks to {member}.",
          ["Beautifully packed"])]),
    "wholesale-enquiry": (
        ["Wholesale enquiry", "Stocking your products", "Trade prices?"],
        [("I run a small gift shop in {town} and would love to stock your {category}. Do you "
          "offer trade prices, and is there a minimum order?",
          ["Shop in {town} - stockist enquiry"]),
         ("We're a farm shop and café near {town}. Our customers keep asking for local "
          "handmade goods. Could you send a trade price list for the {product} and the "
          "{product2}? We'd start with {count} of each.", ["Trade price list"]),
         ("Do you sell wholesale? We are opening a second shop in the autumn.",
          ["Wholesale?"])]),
}


def supplier_message(ctx):
    """Suppliers: confirmations, deliveries, price lists, real invoices."""
    rng = ctx.rng
    company, person_name, address, kind = rng.choice(SUPPLIERS)
    first, last = person_name.split(" ")
    person = Person(first, last, address)
    item = rng.choice(SUPPLY_ITEMS[kind])
    po = f"PO-{rng.randrange(310, 399)}"
    day = human_date(ctx.now + timedelta(days=rng.randint(1, 6)))
    buyer = member(rng, {"wax": "candles", "clay": "ceramics", "wool": "weaving",
                         "timber": "wooden toys", "boxes": "packing and shipping"}[kind])
    variant = rng.randrange(5)
    attachment = None
    if variant == 0:
        subject = f"Order confirmation {po}"
        body = (f"Hi {buyer.first},\n\nThanks for your order {po}: {item}, "
                f"{rng.randrange(80, 900)}.00 EUR. We have it in stock and it will go out on "
                f"{day}.\n\n{person.name}\n{company}")
    elif variant == 1:
        subject = f"Delivery {day}"
        body = (f"Hi team,\n\nThe {item} arrives {day} morning. Please make room in the back "
                f"store; the driver can't wait long in the yard.\n\nRegards,\n{person.first} "
                f"({company})")
    elif variant == 2:
        invoice = f"{kind[:2].upper()}{rng.randrange(1000, 9999)}"
        amount = rng.randrange(120, 1400)
        subject = f"Invoice {invoice} for {po}"
        body = (f"Dear {buyer.first},\n\nPlease find attached invoice {invoice} for {po} "
                f"({item}), {amount}.00 EUR, payable within 30 days to the account on our "
                f"usual invoices. Nothing has changed on our side.\n\nKind regards,\n"
                f"{person.name}\nAccounts, {company}")
        attachment = (f"invoice-{invoice}.pdf", "application/pdf",
                      fake_pdf(f"{company} invoice {invoice} {po} {amount}.00 EUR"))
    elif variant == 3:
        subject = rng.choice(["Price update from April", "New price list", "Prices 2026"])
        body = (f"Hello {buyer.first},\n\nA heads-up that {item.split(',')[0]} goes up by "
                f"{rng.randint(3, 9)}% from 1 April because of transport costs. Orders placed "
                f"before then keep the old price.\n\nAll the best,\n{person.first}\n{company}")
    else:
        subject = f"Re: {po} - short delivery"
        reply = (f"Hi {buyer.first},\n\nSorry, we could only send part of {po}. The rest "
                 f"({item}) follows on {day}, no extra carriage.\n\n{person.first}")
        asked = (f"Hi {person.first}, the delivery for {po} was short. Could you check? "
                 f"Thanks, {buyer.first}")
        when = ctx.earlier(1, 2)
        body = (reply + f"\n\nOn {short_date(when)}, {buyer.name} <{buyer.address}> wrote:\n"
                + quote(asked))
    if rng.random() < 0.45:
        portal = f"https://portal.{address.split('@')[1]}"
        body = body + "\n\n" + rng.choice([
            f"Your account: {portal}/account", f"Order history and invoices: {portal}/orders",
            f"Track deliveries at {TRACK_URL}{ctx.tracking()}"])
    elif rng.random() < 0.5:
        body = body + f"\nhttps://www.{address.split('@')[1]}"
    draft = Draft(subject, body, person.address, f"{person.name} ({company})")
    draft.attachment = attachment
    draft.hops = rng.randint(2, 3)
    draft.utc_offset_hours = rng.choice([0, 1])
    draft.to = buyer.address if rng.random() < 0.5 else CONTACT_ADDR
    return draft


def supplier_offer(ctx):
    """Suppliers' offer mailings the co-op signed up for: sales wording, still fine."""
    rng = ctx.rng
    company, _, address, kind = rng.choice(SUPPLIERS)
    host = address.split("@")[1]
    item = rng.choice(SUPPLY_ITEMS[kind]).split(",")[0]
    percent = rng.choice([10, 15, 20, 25, 30])
    code = f"{kind.upper()}{percent}"
    link = f"https://shop.{host}/offers"
    subject = rng.choice([
        f"Spring sale: {percent}% off {item} until Sunday",
        f"Last chance: {item} at {percent}% off",
        "FREE delivery on orders over 150 EUR - this week only",
        f"New price list + {percent}% off your next order",
        f"Clearance: limited stock of {item}",
    ])
    body = rng.choice([
        f"Hello makers,\n\nOur spring sale is on! Save {percent}% on {item} and more with "
        f"code {code} at checkout. Offer ends Sunday at midnight, while stocks last.\n\n"
        f"Shop now: {link}\n\nThe team at {company}",
        f"Dear customer,\n\nDon't miss out: FREE delivery on every order over 150 EUR until "
        f"Friday. Order now and we ship the same day.\n\n{link}\n\nBest wishes,\n{company}",
        f"LIMITED STOCK - {item}\n\nWe have a last batch at {percent}% off the list price. "
        f"First come, first served! Click here to order: {link}\n\n{company}",
        f"Hello,\n\nOur price list for April is out. Order before the 1st and get {percent}% "
        f"off with code {code}, or reply to this mail and we will book it for you.\n\n{link}"
        f"\n\n{company}",
    ])
    unsubscribe = f"https://shop.{host}/unsubscribe"
    text = compose([body, f"You get these offers because you have a trade account with us. "
                          f"Unsubscribe: {unsubscribe}"])
    draft = Draft(subject, text, f"offers@{host}", company)
    draft.list_unsubscribe = f"<{unsubscribe}?u=bf{rng.randrange(1000, 9999)}>"
    draft.html = paragraphs_html(text, heading=company)
    draft.hops = rng.randint(2, 3)
    return draft


FUND_HOST = "arts.harrowmere.example.org"
FUND_OFFICERS = ["Agatha Penhallow", "Ruben Ashcombe"]

# Sentences of the spring round's world. The Regional Makers' Fund's own mail
# is made of them, and the grant scam borrows them.
FUND_SCENE = [
    "We hope the spring market went well for you.",
    "It was lovely to see so many studios at the open day.",
    "Thank you to everyone who sent in photos of their work this winter.",
    "This spring the fund is putting small studios and co-operatives first.",
    "Many of you asked about help with equipment after the cold winter.",
    "Kiln repairs and new looms were the most common requests last year.",
    "The panel will go through every application by hand.",
    "Several co-operatives in Harrowmere have already applied.",
    "We know how busy the weeks before Easter are for makers.",
    "It has been a long winter for everyone who works with clay and wool.",
    "Last year's round helped two co-operatives open a shared workshop.",
    "Our thanks to the members who came to the information evening.",
    "The council has topped up the fund for the spring round.",
    "Local makers are what keeps the Saturday market going.",
    "We are writing to every registered studio in the district.",
    "Weavers, potters and woodworkers all qualify this time.",
    "Prices for clay, wax and wool keep going up, so the round comes at a good time.",
]
FUND_NEWS = [
    "The spring round is open for equipment and training awards of up to 4,000 EUR.",
    "Applications close on 24 April and the panel meets in May.",
    "Decisions go out by post in late May.",
    "A shared kiln or loom counts as equipment.",
    "A co-operative can apply once for all its members.",
    "Your application {case} is complete and with the panel.",
    "We have received your application {case}.",
    "The information evening is on Thursday at the arts office.",
    "To check eligibility we need your registration number and last year's accounts.",
    "Awards are paid by the council's finance office after the decision letter.",
]
FUND_ASKS = [
    "You can follow your application on the council portal: {portal}",
    "Please upload last year's accounts on the portal by 24 April: {portal}",
    "Please confirm your place at the information evening: https://" + FUND_HOST + "/events",
    "The eligibility rules are on our website: https://" + FUND_HOST + "/rules",
    "Please check that the registration number on the portal is right: {portal}",
    "",
]
FUND_CAUTIONS = [
    "We never ask for fees, card numbers or bank log-ins by email.",
    "Applying is free, and there is no fee at any stage.",
    "If a message asks you to pay to receive an award, it is not from us.",
    "",
]
FUND_GREETINGS = ["Dear applicant,", f"Dear {SHOP},", "Hello,", "Dear makers,"]


def fund_mail(ctx):
    """The Regional Makers' Fund's own mail about the spring round and the co-op's application."""
    rng = ctx.rng
    officer = rng.choice(FUND_OFFICERS)
    case = f"RMF-{rng.randrange(2000, 9999)}"
    slots = {"case": case, "portal": f"https://{FUND_HOST}/portal/{case.lower()}"}
    news = [fill(line, slots) for line in rng.sample(FUND_NEWS, k=rng.randint(1, 2))]
    scene = rng.sample(FUND_SCENE, k=rng.randint(0, 2))
    text = compose([rng.choice(FUND_GREETINGS), " ".join(scene + news),
                    fill(rng.choice(FUND_ASKS), slots), rng.choice(FUND_CAUTIONS),
                    f"Kind regards,\n{officer}\nRegional Makers' Fund, Harrowmere Arts Office"])
    subject = fill(rng.choice([
        "Spring round: application {case}", "Your application {case}", "Spring round update",
        "Information evening", "Regional Makers' Fund - {case}", "Spring round: eligibility",
    ]), slots)
    draft = Draft(subject, text, f"{rng.choice(['funding', 'grants'])}@{FUND_HOST}",
                  rng.choice(["Regional Makers' Fund", "Harrowmere Arts Office", officer]))
    draft.html = paragraphs_html(text)
    draft.hops = rng.randint(2, 3)
    draft.to = rng.choice([CONTACT_ADDR, f"maud@{SHOP_DOMAIN}", f"wren@{SHOP_DOMAIN}"])
    return draft


def member_note(ctx, channel):
    """Co-op members' internal notes: rotas, kiln schedules, ticket notes."""
    rng = ctx.rng
    author = member(rng)
    if channel == "tickets" and ctx.recent_tickets:
        ticket = f"T-{rng.choice(ctx.recent_tickets)}"
        notes = [
            f"Rang the customer, replacement going out {human_date(ctx.earlier(-2, 0))}.",
            f"Refund issued for {ctx.order_ref()} ({ctx.product()[2]} EUR). Closing.",
            f"Waiting on photos from the customer before we send a new "
            f"{ctx.product()[1]}.",
            f"{CARRIER} claim opened for parcel {ctx.tracking()}.",
            "Duplicate of an earlier ticket, merged.",
            f"Customer happy with an exchange; {ctx.product()[1]} put aside for them.",
            "Passed to Maud for the double card charge, see bank statement for the 9th.",
            f"Asked {rng.choice(MEMBERS)[0]} whether a custom length is possible. Will reply "
            f"by Friday.",
        ]
        text = rng.choice(notes)
        if rng.random() < 0.3:
            text += f" {ADMIN_URL}/tickets/{ticket.lower()}"
        if rng.random() < 0.3:
            text += f"\n- {author.first}"
        draft = Draft(f"Internal note on {ticket}", text, author.address, author.name)
        draft.meta = {"form": "internal"}
        return draft
    options = [
        ("Kiln firing this week",
         f"Hi all,\n\nBisque firing {human_date(ctx.earlier(-3, -1))}, glaze firing two days "
         f"later. Please have pieces on the shelf by 5pm the day before.\n\n{author.first}"),
        ("Market stall rota",
         f"Rota for the {TOWN} spring market:\n\nSaturday morning - Wren, Idris\nSaturday "
         f"afternoon - Sunniva, Tobiah\nSunday - Rosalind, Halvard\n\nSwap among yourselves if "
         f"needed, just tell me.\n{author.first}"),
        ("Members' meeting notes",
         f"Notes from Tuesday's meeting:\n\n1. Prices stay as they are until summer.\n2. We'll "
         f"try a Thursday late opening in April.\n3. Maud needs receipts for March by the "
         f"10th.\n4. The website photos need redoing for the candles.\n\n{author.first}"),
        ("Packing table",
         f"Could whoever used the packing table last put the fragile tape back? We've run out "
         f"upstairs. Thanks! {author.first}"),
        ("Stock count Friday",
         f"Reminder: stock count Friday after closing. Pizza is on the co-op.\n{author.first}"),
        ("Re: photos for the shop",
         f"I can do the photos on Wednesday if the light is good.\n\n"
         f"On {short_date(ctx.earlier(1, 2))}, Rosalind Quay <rosalind@{SHOP_DOMAIN}> wrote:\n"
         + quote("Can someone take new photos of the candles and the throws? The old ones "
                 "look grey.")),
        ("Help desk cover",
         f"I'm off Thursday and Friday, {rng.choice(MEMBERS)[0]} is covering the help desk. "
         f"Open tickets are tagged in the system.\n\n{author.first}"),
        ("Wool delivery",
         f"The merino is in the back store. Please don't stack the clay on it!\n{author.first}"),
        ("Regional Makers' Fund",
         f"The fund's spring round is open. I'll do our application on the council portal "
         f"this week; it asks for last year's accounts, so could someone send me the PDF? "
         f"Applying costs nothing.\n\n{author.first}"),
        ("Re: grant application",
         f"Sent off our Regional Makers' Fund application for the new kiln. They post the "
         f"decision in May. Fingers crossed!\n\n{author.first}"),
        ("Fund paperwork",
         f"Does anyone have the co-op's registration number to hand? The fund's application "
         f"form wants it, and the bank details for the award.\n\nThanks, {author.first}"),
    ]
    subject, text = rng.choice(options)
    if rng.random() < 0.5:
        folder = rng.choice(["photos", "rota", "kiln-log", "stock", "minutes", "accounts"])
        text = text + "\n\n" + rng.choice([
            f"It's all in the shared folder: {FILES_URL}/{folder}",
            f"(see {FILES_URL}/{folder})", f"Link: {FILES_URL}/{folder}"])
    draft = Draft(subject, text, author.address, author.name)
    draft.to = f"members@{SHOP_DOMAIN}"
    draft.hops = 1
    return draft


def service_notice(ctx):
    """Payout summaries and carrier pick-up manifests the shop signed up for."""
    if ctx.now.hour == 10:
        return details_notice(ctx)
    if ctx.now.hour < 12:
        return payout_notice(ctx)
    rng = ctx.rng
    parcels = rng.randrange(6, 38)
    text = (f"Collection manifest for {SHOP}\nDate: {short_date(ctx.now)}\nParcels collected: "
            f"{parcels}\nDriver: route {rng.randrange(10, 60)}\n\nTrack every parcel at "
            f"{TRACK_URL}\n\n{CARRIER}")
    draft = Draft(f"Collection manifest: {parcels} parcels", text, CARRIER_ADDR, CARRIER)
    draft.hops = 3
    return draft


def details_notice(ctx):
    """The payment provider's routine request to check the seller's details."""
    rng = ctx.rng
    checks = rng.sample(["trading name", "address", "the bank account for payouts",
                         "the contact phone number", "the VAT number"], k=3)
    text = (f"Hello {COOP},\n\nOnce a year we ask every seller to confirm their business "
            f"details. Please log in to your dashboard and check your {checks[0]}, {checks[1]} "
            f"and {checks[2]} by {rng.choice(['30 April', '15 May', 'the end of the month'])}:"
            f"\n\nhttps://dashboard.tillbridge-pay.example.net/settings\n\nYour payouts carry "
            f"on as usual in the meantime. We never ask for your password or card number by "
            f"email.\n\n{PAYMENTS}")
    draft = Draft("Action needed: confirm your business details", text, PAYMENTS_ADDR,
                  PAYMENTS)
    draft.html = paragraphs_html(text)
    draft.hops = 3
    return draft


def payout_notice(ctx):
    """The payment provider's note that a payout is on its way."""
    rng = ctx.rng
    amount = f"{rng.randrange(600, 4200)}.{rng.randrange(100):02d}"
    orders = rng.randrange(25, 140)
    largest = []
    for _ in range(rng.randint(3, 5)):
        _, product, price = ctx.product()
        largest.append(f"{ctx.order_ref(4)}  {product}  {price * rng.randint(1, 4)}.00 EUR")
    text = (f"Hello {COOP},\n\nYour payout of {amount} EUR for {orders} orders is on its "
            f"way to the bank account ending 0417 and should arrive within two working "
            f"days.\n\nLargest orders in this payout:\n" + "\n".join(largest) +
            f"\n\nSee the details in your dashboard: "
            f"https://dashboard.tillbridge-pay.example.net/payouts\n\n{PAYMENTS}")
    draft = Draft(f"Payout of {amount} EUR sent", text, PAYMENTS_ADDR, PAYMENTS)
    draft.html = paragraphs_html(text)
    draft.hops = 3
    return draft


def newsletter(ctx, chosen=None):
    """Newsletters someone at the co-op subscribed to (by default the one due now)."""
    rng = ctx.rng
    weekday, hour = ctx.now.weekday(), ctx.now.hour
    if chosen is None:
        chosen = NEWSLETTERS[0]
        for entry in NEWSLETTERS:
            if entry[4] == weekday and entry[5] == hour:
                chosen = entry
    name, sender_name, address, list_host, _, _, _, _ = chosen
    issue = ctx.week + rng.randrange(40, 44)
    stories = NEWSLETTER_STORIES[name]
    picked = rng.sample(stories, k=min(rng.choice([3, 3, 4]), len(stories)))
    text = compose([f"{name}, issue {issue}", *picked,
                    f"You get this because you signed up at https://{list_host}/subscribe. "
                    f"Unsubscribe: https://{list_host}/unsubscribe"])
    draft = Draft(f"{name} - issue {issue}", text, address, sender_name)
    draft.list_unsubscribe = f"<https://{list_host}/unsubscribe?u=bf{rng.randrange(1000, 9999)}>"
    draft.html = paragraphs_html(text, heading=name)
    draft.hops = rng.randint(3, 4)
    draft.to = rng.choice([CONTACT_ADDR, f"wren@{SHOP_DOMAIN}", f"sunniva@{SHOP_DOMAIN}"])
    return draft


NEWSLETTER_STORIES = {
    "Makers' Market Bulletin": [
        "Spring market: stall bookings for the Harrowmere spring market close on the 20th. "
        "Pitches by the bandstand go first.",
        "New this year: a covered food court and a children's craft tent run by volunteers.",
        "Parking: the east field is closed for drainage work, please use the school car park.",
        "Member spotlight: a glass-blower from Stanmere shows how she builds her own furnace.",
        "Reminder: public liability cover is needed for every stall; ask us if unsure.",
        "Early-bird offer: book your summer fair stall this week and save 20%. Limited "
        "pitches, first come first served!",
        "Win a free double pitch at the summer fair: enter our prize draw by Friday.",
        "The Regional Makers' Fund's spring round is open: stallholders can apply for "
        "equipment awards on the council portal.",
    ],
    "Kiln & Glaze Notes": [
        "Glaze of the month: a satin ash glaze that breaks brown over texture. Recipe inside.",
        "Kiln care: vacuum your elements before the spring firing season.",
        "Price note: stoneware bags go up slightly from April.",
        "Kiln grants: this spring the Regional Makers' Fund covers kilns. Apply on the "
        "council portal; the fund never charges a fee.",
        "Reader question: why do my glazes crawl? Usually dust or a too-thick application.",
        "This fortnight only: 15% off all glazes with code GLAZE15 and free delivery over "
        "100 EUR. Order now while stocks last!",
    ],
    "Loom Circle": [
        "Open studio on the last Sunday of the month: bring a project, share a warp.",
        "Dyeing with onion skins: a beginner's guide to warm yellows.",
        "Guild library: three new books on rag rugs and tablet weaving.",
        "Call for entries: the guild's summer exhibition in Tidewell.",
        "Bursaries: the guild helps members with Regional Makers' Fund applications for "
        "looms; ask at the open studio.",
    ],
    "Regional Makers' Fund bulletin": [
        "The Regional Makers' Fund opens its spring round: small grants for equipment and "
        "training. Applications through the council's portal only; we never ask for fees or "
        "bank log-ins by email.",
        "Workshop: writing a good grant application, free for registered makers, 14 April.",
        "Last year's round funded 23 studios, including two co-operatives.",
        "Reminder: decisions are posted, never sent as payment requests.",
        "Open studios weekend: the fund pays for signs for any maker who opens their "
        "workshop to the public on 9 and 10 May.",
        "Meet the panel: this round's judges are two potters, a furniture maker and a "
        "weaver from Tidewell.",
        "Case study: how a Marrowford bookbinder used a small grant to buy a board shear "
        "and doubled her orders.",
        "Training bursaries: up to 300 EUR towards a course, paid straight to the course "
        "provider.",
        "Dates: the spring round closes on 24 April and decisions go out by post in late May.",
    ],
    "Swiftcrate service update": [
        "Depot update: the Marrowford depot is running a day behind after the storm.",
        "Collections over the Easter weekend: no collections on Friday or Monday.",
        "New: customers can now pick a safe place for their parcel when they track it.",
        "Reminder: mark fragile parcels on the label, not only on the tape.",
        "Special offer: save 20% on a bundle of 50 labels if you buy it in your account "
        "before Friday.",
    ],
}


def paragraphs_html(text, heading=None):
    parts = ["<html><body>"]
    if heading:
        parts.append(f"<h2>{escape(heading)}</h2>")
    for paragraph in text.split("\n\n"):
        parts.append("<p>" + link_urls(escape(paragraph)).replace("\n", "<br>") + "</p>")
    parts.append("</body></html>")
    return "\n".join(parts)


def escape(text):
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


# A URL in prose: it never ends in the sentence's own punctuation.
URL_RE = re.compile(r"https?://[A-Za-z0-9.\-]*[A-Za-z0-9](?:/[^\s<>\"]*[^\s<>\".,;:!?)])?/?")


def link_urls(html_text):
    return URL_RE.sub(lambda m: f'<a href="{m.group(0)}">{m.group(0)}</a>', html_text)


def fake_pdf(line):
    """A tiny, not fully valid PDF whose only content is one line of text."""
    stream = f"BT /F1 12 Tf 72 720 Td ({line}) Tj ET"
    return ("%PDF-1.4\n1 0 obj << /Type /Catalog /Pages 2 0 R >> endobj\n"
            "2 0 obj << /Type /Pages /Kids [3 0 R] /Count 1 >> endobj\n"
            "3 0 obj << /Type /Page /Parent 2 0 R /Contents 4 0 R >> endobj\n"
            f"4 0 obj << /Length {len(stream)} >> stream\n{stream}\nendstream endobj\n"
            "trailer << /Root 1 0 R >>\n%%EOF\n").encode("ascii")


# --------------------------------------------------------------------------
# Junk families
# --------------------------------------------------------------------------

def junk_sender(rng, campaign, names, locals_):
    """A display name, a sender address and the host the campaign's links go to.

    Junk comes from the campaign's own hosts, from free-mail accounts (the
    same providers customers use) and from hijacked accounts at small
    businesses, so the sender's domain alone gives little away.
    """
    domain = rng.choice(JUNK_DOMAINS[campaign])
    source = rng.random()
    if source < 0.45:
        address = f"{rng.choice(locals_)}@{domain}"
    elif source < 0.75:
        address = f"{rng.choice(locals_)}.{rng.randrange(100, 9999)}@{rng.choice(CUSTOMER_DOMAINS)}"
    else:
        address = f"{rng.choice(['info', 'office', 'mail', 'contact'])}@{rng.choice(HIJACKED_DOMAINS)}"
    return rng.choice(names), address, domain


def junk_message(ctx, campaign, channel):
    rng = ctx.rng
    maker = JUNK_MAKERS[campaign]
    draft = maker(ctx, channel)
    if campaign in OFFICE_HOURS_CAMPAIGNS:
        # Sent through ordinary mail services, so the envelope looks ordinary too.
        draft.hops = rng.randint(2, 4)
        draft.date_skew_seconds = rng.randint(2, 90)
        draft.utc_offset_hours = rng.choice([0, 0, 1])
    else:
        draft.hops = rng.choice([1, 2, 4, 5, 6, 7, 8])
        draft.date_skew_seconds = rng.choice([5, 30, 600, 7200, -3600, 86400 * 3])
        draft.utc_offset_hours = rng.choice([0, 3, 5, 8, -7, -4])
    if rng.random() < 0.04:
        draft.text = add_typos(rng, draft.text, 0.05)
    if channel == "tickets" and draft.meta is None:
        draft.meta = {"form": rng.choice(["general", "general", "general", "order-help",
                                          "account", "returns"])}
    return draft


def fake_invoice(ctx, _channel):
    rng = ctx.rng
    name, sender, domain = junk_sender(rng, "fake-invoice",
                                       ["Accounts Department", "Billing Team", "Finance Dept",
                                        "Invoice Service", "Credit Control"],
                                       ["billing", "accounts", "noreply", "invoice", "ar"])
    number = f"INV-{rng.randrange(100000, 999999)}"
    amount = f"{rng.randrange(180, 4900)}.{rng.randrange(100):02d}"
    service = rng.choice(["web hosting renewal", "domain protection", "directory listing",
                          "annual maintenance", "consulting services", "marketplace fees"])
    pay = f"https://{domain}/pay/{number.lower()}"
    subject = rng.choice([f"Invoice {number} overdue", f"Payment reminder: {amount} EUR outstanding",
                          f"RE: Invoice {number}", f"FINAL NOTICE - {number}",
                          f"Your invoice {number} is attached", "Outstanding balance - action required"])
    body = rng.choice([
        f"Dear customer,\n\nPlease find attached invoice {number} for {service} in the amount "
        f"of {amount} EUR. Payment is due within 48 hours to avoid late fees and suspension "
        f"of service.\n\nPay online: {pay}\n\nAccounts Department",
        f"Hello,\n\nOur records show invoice {number} ({amount} EUR) remains unpaid. Please note "
        f"our bank details have CHANGED. Use the new account below only:\n\nIBAN XX00 0000 "
        f"{rng.randrange(1000, 9999)} {rng.randrange(1000, 9999)} 00\n\nFailure to pay will "
        f"result in legal action.\n\nCredit Control",
        f"FINAL NOTICE\n\nInvoice {number} for {service} is now 30 days overdue. A collection "
        f"agency will be instructed if {amount} EUR is not received today. Settle now: {pay}",
        f"Hi,\n\nAs discussed, attached is the invoice for the {service}. Kindly process "
        f"payment today as our director is travelling.\n\nRegards\n{name}\n\n"
        f"On {short_date(ctx.earlier(2, 6))}, {SHOP} <{CONTACT_ADDR}> wrote:\n"
        + quote("Please send the invoice again, thanks."),
    ])
    draft = Draft(subject, body, sender, name)
    if rng.random() < 0.6:
        draft.attachment = (f"{number}.pdf", "application/pdf",
                            fake_pdf(f"INVOICE {number} AMOUNT DUE {amount} EUR"))
    if rng.random() < 0.4:
        draft.reply_to = f"payments@{rng.choice(JUNK_DOMAINS['fake-invoice'])}"
    return draft


def account_phishing(ctx, _channel):
    rng = ctx.rng
    name, sender, domain = junk_sender(rng, "account-phishing",
                                       ["Shop Support", "Account Security", "Mailbox Admin",
                                        "Seller Services", "Brackenfold Support"],
                                       ["security", "support", "no-reply", "alert", "admin"])
    ref = rng.randrange(10**6, 10**7)
    link = f"http://{domain}/login?ref={ref}"
    shown = rng.choice([f"{SHOP_URL}/account", "https://mail.brackenfold.example.com/login",
                        link])
    subject = rng.choice(["Your shop account has been suspended",
                          "Unusual sign-in to your seller dashboard",
                          "Mailbox storage full - verify now",
                          "Action required: confirm your account details",
                          "Security alert: password expires today",
                          "Your account will be closed in 24 hours"])
    body = rng.choice([
        f"Dear user,\n\nWe detected unusual activity on your account. To avoid suspension, "
        f"verify your identity within 24 hours:\n\n{shown}\n\nIf you do not verify, your "
        f"account will be permanently closed.\n\nAccount Security Team",
        f"Your mailbox has reached 99% of its storage. Incoming messages will be rejected. "
        f"Click below to upgrade your quota free of charge:\n{shown}",
        f"Hello,\n\nYour password expires today. Keep your current password by confirming "
        f"your login here: {shown}\n\nThanks,\nIT Support",
        f"We could not process your last payout. Update your bank details to continue "
        f"selling: {shown}\n\nReference: {ref}",
    ])
    # The HTML link shows a trustworthy-looking address; the plain text has
    # to give the real one for the trick to work there.
    draft = Draft(subject, body.replace(shown, link), sender, name)
    draft.html = "<html><body>" + "".join(
        f"<p>{escape(p)}</p>" for p in body.replace(shown, "__LINK__").split("\n\n")
    ).replace("__LINK__", f'<a href="{link}">{escape(shown)}</a>') + "</body></html>"
    draft.html_only = rng.random() < 0.4
    return draft


def seo_offer(ctx, _channel):
    rng = ctx.rng
    name, sender, domain = junk_sender(rng, "seo-offer",
                                       ["Digital Growth Team", "SEO Expert", "Marketing Consultant",
                                        "Web Solutions", "Ranking Specialist"],
                                       ["seo", "info", "growth", "sales", "outreach"])
    keyword = rng.choice(["handmade ceramics", "wooden toys", "handmade candles",
                          "woven throws", "craft shop"])
    subject = rng.choice([f"Rank #1 for '{keyword}'", "Boost your shop traffic 300%",
                          "Guest post opportunity", "Your website is missing customers",
                          "Quick question about brackenfold", "Page 1 guaranteed in 10 days"])
    body = rng.choice([
        f"Dear Website Owner,\n\nI was checking your website and noticed it is not ranking on "
        f"first page for '{keyword}'. We can guarantee top position in 10 days with our "
        f"white-hat backlinks. Cheap price, reply now for the package list.\n\nBest Regards\n{name}",
        f"Hi,\n\nWe will write 50 five-star reviews for your shop and boost your traffic 300%. "
        f"Results guaranteed or money back. See our packages: https://{domain}/packages",
        f"Hello,\n\nI'd like to publish a guest post on your blog with a do-follow link. We "
        f"pay 50 USD per article. Please share your price.\n\nThanks,\n{name}",
        f"Your website has 37 SEO errors that are costing you sales! Get a FREE audit "
        f"today: https://{domain}/audit",
        f"Hi there! Do you want more customers? We are expert team of SEO, SMM, web design. "
        f"Very affordable. Just reply YES and we send you proposal.",
    ])
    draft = Draft(subject, body, sender, name)
    if rng.random() < 0.3:
        draft.reply_to = f"{rng.choice(['deals', 'offers'])}@{rng.choice(JUNK_DOMAINS['seo-offer'])}"
    return draft


def prize_notice(ctx, _channel):
    rng = ctx.rng
    name, sender, domain = junk_sender(rng, "prize-notice",
                                       ["Prize Committee", "Customer Rewards", "Lottery Desk",
                                        "Winner Notification", "Loyalty Team"],
                                       ["winner", "claims", "rewards", "notify", "promo"])
    amount = rng.choice(["5,000 EUR", "850,000 USD", "a brand new laptop", "2 return flights",
                         "a 500 EUR gift card"])
    ref = f"WIN/{rng.randrange(1000, 9999)}/{rng.randrange(10, 99)}"
    subject = rng.choice(["Congratulations! You've been selected", "WINNER notification",
                          f"Claim your prize ref {ref}", "Your reward is waiting",
                          "You have (1) unclaimed gift"])
    body = rng.choice([
        f"Congratulations! Your email address was selected in our annual draw and you have won "
        f"{amount}. To claim, reply with your full name, address and phone number quoting "
        f"reference {ref}.",
        f"Dear Winner,\n\nYou are one of 10 lucky customers chosen to receive {amount}. Claim "
        f"before midnight: https://{domain}/claim?ref={ref}\n\nA small handling fee applies.",
        f"!! FINAL REMINDER !! Your {amount} reward expires today. Click https://{domain}/r/"
        f"{rng.randrange(1000, 9999)} to receive it.",
    ])
    return Draft(subject, body, sender, name)


def crypto_giveaway(ctx, _channel):
    rng = ctx.rng
    name, sender, domain = junk_sender(rng, "crypto-giveaway",
                                       ["Crypto Rewards", "Token Airdrop", "Wallet Bonus",
                                        "Investor Relations", "Coin Foundation"],
                                       ["airdrop", "bonus", "invest", "team", "wallet"])
    subject = rng.choice(["Double your crypto in 7 days", "Exclusive token airdrop for small "
                          "businesses", "Your wallet bonus is ready", "Last chance: 2x giveaway",
                          "Passive income for makers"])
    body = rng.choice([
        f"Send any amount of coins to our wallet and receive DOUBLE back instantly. Limited "
        f"giveaway, act now: https://{domain}/double",
        f"Hello,\n\nSmall businesses qualify for our token airdrop worth 1,200 USD. Connect "
        f"your wallet to claim: https://{domain}/claim\n\nOnly 48 hours left.",
        f"Our trading robot earned members 38% last month. Start with just 250 USD and "
        f"withdraw anytime. Register: https://{domain}/join",
        f"Dear friend, I am a financial adviser and I can help you grow your savings with "
        f"crypto. Reply to this message to get started.",
    ])
    return Draft(subject, body, sender, name)


def counterfeit_goods(ctx, _channel):
    rng = ctx.rng
    name, sender, domain = junk_sender(rng, "counterfeit-goods",
                                       ["Factory Outlet", "Luxury Deals", "Brand Warehouse",
                                        "Wholesale Supplier", "Designer Outlet"],
                                       ["sales", "deals", "shop", "export", "service"])
    goods = rng.choice(["designer handbags", "luxury watches", "branded sneakers",
                        "sunglasses", "premium perfumes"])
    subject = rng.choice([f"{goods.title()} 90% off", "Top brand replicas - AAA quality",
                          "Factory direct prices", "Wholesale luxury goods for your shop",
                          "Best replicas 2026"])
    body = rng.choice([
        f"Hello friend,\n\nWe supply top brand {goods} at factory price, AAA quality "
        f"replicas, nobody can tell the difference. Free shipping worldwide. Catalogue: "
        f"https://{domain}/catalogue",
        f"Dear Buyer, we are wholesaler of {goods}. Min order 10 pcs. Stock your shop and "
        f"earn big profit. WhatsApp only.",
        f"{goods.upper()} 90% OFF - ORIGINAL BOX - https://{domain} - limited stock!!!",
    ])
    return Draft(subject, body, sender, name)


HOMOGLYPHS = {"a": "\u0430", "e": "\u0435", "o": "\u043e", "p": "\u0440", "c": "\u0441",
              "x": "\u0445", "i": "\u0456", "y": "\u0443"}
DIGITS_FOR = {"o": "0", "i": "1", "e": "3", "a": "4", "s": "5", "l": "1"}
ZERO_WIDTH = ["\u200b", "\u200c", "\u200d", "\u2060"]
# The grant scam's giveaway words, the ones it disguises.
GRANT_WORDS = {"verify", "verification", "account", "accounts", "grant", "grants", "award",
               "marketplace", "payment", "payout", "confirm", "confirmed", "claim", "funds",
               "seller", "approved", "fee", "deadline", "release", "deposit", "bank", "details",
               "eligibility", "processing", "portal", "refunded", "co-op", "co-operative",
               "bursary", "register", "registration", "scheme", "equipment", "secure",
               "charge", "handling", "stall", "top-up"}


ALL_TRICKS = ("homoglyph", "spaced", "digits", "zero-width")


def disguise_word(rng, word, html, tricks=ALL_TRICKS):
    """Hides a word from naive matching with one of `tricks`; `html` adds comments inside it."""
    method = rng.choice(list(tricks) + (["comment"] * len(tricks) if html else []))
    letters = list(word)
    positions = list(range(len(letters)))
    if method == "homoglyph":
        eligible = [i for i in positions if letters[i].lower() in HOMOGLYPHS]
        for i in rng.sample(eligible, k=min(len(eligible), rng.randint(1, 3))):
            swapped = HOMOGLYPHS[letters[i].lower()]
            letters[i] = swapped.upper() if letters[i].isupper() else swapped
        return "".join(letters)
    if method == "spaced":
        return " ".join(letters)
    if method == "digits":
        eligible = [i for i in positions if letters[i].lower() in DIGITS_FOR]
        for i in rng.sample(eligible, k=min(len(eligible), rng.randint(1, 2))):
            letters[i] = DIGITS_FOR[letters[i].lower()]
        return "".join(letters)
    if len(letters) < 2:
        return word
    cuts = sorted(rng.sample(range(1, len(letters)), k=min(len(letters) - 1, rng.randint(1, 2))))
    filler = ("<!-- -->" if method == "comment" else None)
    out, last = [], 0
    for cut in cuts:
        out.append("".join(letters[last:cut]))
        out.append(filler if filler else rng.choice(ZERO_WIDTH))
        last = cut
    out.append("".join(letters[last:]))
    return "".join(out)


TOKEN_EDGE_RE = re.compile(r"^([^A-Za-z]*)([A-Za-z][A-Za-z-]*[A-Za-z])([^A-Za-z]*)$")


def disguise_text(rng, text, share, html=False, tricks=ALL_TRICKS):
    """Disguises a share of the grant-scam keywords; URLs and addresses stay intact."""
    if share <= 0:
        return text
    out_lines = []
    for line in text.split("\n"):
        tokens = line.split(" ")
        for index, token in enumerate(tokens):
            if "/" in token or "@" in token or (html and ("<" in token or ">" in token)):
                continue
            match = TOKEN_EDGE_RE.match(token)
            if not match or match.group(2).lower() not in GRANT_WORDS:
                continue
            if rng.random() < share:
                tokens[index] = match.group(1) + disguise_word(rng, match.group(2), html,
                                                               tricks) + match.group(3)
        out_lines.append(" ".join(tokens))
    return "\n".join(out_lines)


def fake_order_notice(ctx, channel):
    """Junk dressed as the shop's everyday order and parcel mail."""
    rng = ctx.rng
    variant = weighted_index(rng, [3, 2, 2, 3])
    tracking = ctx.tracking()
    hosts = JUNK_DOMAINS["fake-order-notice"]
    if variant == 0:
        host = rng.choice(hosts[:2])
        link = f"https://{host}/r/{tracking.lower()}"
        subject = rng.choice([f"Parcel {tracking}: delivery attempt failed",
                              f"Your parcel is waiting at the {rng.choice(TOWNS)} depot",
                              f"{CARRIER}: we missed you today"])
        body = (f"Hello,\n\nWe tried to deliver parcel {tracking} today but nobody was in. To "
                f"book a new delivery, pay the redelivery charge of 1.99 EUR within 48 hours:"
                f"\n\n{link}\n\nParcels that are not rebooked go back to the sender.\n\n{CARRIER}")
        name, sender = CARRIER, f"updates@{host}"
    elif variant == 1:
        host = rng.choice(hosts[:2])
        link = f"https://{host}/customs/{tracking.lower()}"
        subject = rng.choice([f"Parcel {tracking} held: import charges due",
                              "Your parcel is on hold"])
        body = (f"Dear customer,\n\nYour parcel {tracking} is held at customs. Import charges "
                f"of {rng.randrange(2, 9)}.{rng.randrange(100):02d} EUR are due before we can "
                f"deliver it. Pay here: {link}\n\n{CARRIER} customer service")
        name, sender = f"{CARRIER} customs", f"customs@{host}"
    elif variant == 2:
        host = hosts[2]
        number = f"{rng.randrange(100000, 999999)}"
        link = f"https://{host}/cancel/{number}"
        goods = rng.choice(["a laptop", "a tablet", "a pair of headphones", "a coffee machine"])
        subject = rng.choice([f"Order confirmation {number}", f"Your order {number} has shipped"])
        body = (f"Thank you for your order!\n\nOrder: {number}\nItem: {goods}\nTotal: "
                f"{rng.randrange(190, 990)}.00 EUR\n\nIf you did not place this order, cancel it "
                f"within 24 hours here: {link}\n\nCustomer service")
        name, sender = "Order Service", f"orders@{host}"
    else:
        # A customer's complaint, word for word, with a link to "photos" that
        # leads somewhere else.
        draft = customer_message(ctx, rng.choice(["damaged-item", "return-request"]), channel)
        link = f"https://{rng.choice(hosts[3:])}/s/{rng.randrange(10**6, 10**7)}"
        draft.text = before_signature(draft.text, rng.choice([
            f"I've put the photos here: {link}", f"Photos: {link}",
            f"The pictures are too big to attach, here's the link: {link}",
            f"You can see the damage here {link}"]))
        return draft
    draft = Draft(subject, body, sender, name)
    draft.html = paragraphs_html(body)
    return draft


def overpayment_order(ctx, channel):
    """A large order from a "customer" that ends in a refund of an overpayment.

    It reads like a custom or wholesale enquiry, because it is one written
    the customers' way; the tell is one added paragraph: a shipping agent who
    collects, payment by cheque or for more than the total, a reason not to
    talk on the phone.
    """
    rng = ctx.rng
    draft = customer_message(ctx, rng.choice(["custom-order", "wholesale-enquiry",
                                              "product-enquiry"]), channel)
    count = rng.choice([40, 50, 60, 80, 100, 120])
    tell = rng.choice([
        "My shipping agent will collect from you, so please add nothing for postage.",
        f"We will need {count} in all. I will pay by cheque and my agent will pick them up "
        "when it clears.",
        "My accountant will send a payment for more than the total; please refund the "
        "difference to the shipping agent.",
        "I am travelling and can only be reached by email, so please send the total and I "
        "will arrange the payment today.",
        "I am hard of hearing so I cannot call. Just reply with the total including the agent's "
        "fee and I will pay at once.",
        f"Make it {count} pieces. Payment will come from my company abroad, a little over the "
        "total, and you can send the rest to our courier.",
    ])
    draft.text = before_signature(draft.text, tell)
    return draft


GRANT_OFFICERS = ["Harriet Vale", "Desmond Orchard", "Lena Brightwell", "Conrad Ellery"]

# Whose mail the grant scam passes itself off as, with weights.
GRANT_PERSONAS = {
    "mail": [("thread", 50), ("supplier", 30), ("member", 10), ("fund", 5), ("payments", 5)],
    "tickets": [("fund", 30), ("thread", 70)],
}
# In its first week the campaign copies another correspondent every half
# day, from Monday morning on: (morning, afternoon) by weekday.
GRANT_LAUNCH_WAVES = {
    "mail": [("thread", "supplier"), ("thread", "member"), ("supplier", "thread"),
             ("member", "thread"), ("payments", "supplier"), ("thread", "supplier"),
             ("thread", "supplier")],
    "tickets": [("thread", "thread"), ("thread", "thread"), ("thread", "thread"),
                ("thread", "thread"), ("thread", "thread"), ("thread", "thread"),
                ("thread", "thread")],
}

# The grant scam's one added paragraph is spun from these pools; the rest of
# each message is a copy of real-looking mail that differs from message to
# message. The campaign rewords the paragraph as it gets caught: in its first
# week each half working day brings a new generation (its own words, fee,
# hosts, reference numbers and disguises), and from week 6 on it mixes them.
GRANT_GENERATIONS = [
    {   # an award, eligibility, a processing fee
        "claims": ["{shop} is on the list for a spring award of {amount}",
                   "your studio qualifies for an award of {amount}",
                   "the panel has approved {amount} towards {item}",
                   "an award of {amount} has been reserved for us"],
        "asks": ["please confirm your eligibility", "complete the short eligibility check",
                 "confirm who should receive the award"],
        "fees": ["A processing fee of {fee} applies.", "(Processing fee: {fee}.)",
                 "The {fee} processing fee is refunded with the award."],
        "hosts": ["arts-harrowmere.example.org", "makersfund-harrowmere.example.org"],
        "paths": ["portal/", "eligibility?ref="],
        "leads": ["", "Good news: ", "Please note: "],
        "deadlines": ["by {by}", "before {by} or it lapses"],
        "case": "RMF-{n}",
        "tricks": ("homoglyph", "digits"),
        "senders": ["brackenfold-makers.example.com"],
    },
    {   # a relief payment from the council
        "claims": ["the council's relief payment of {amount} for small studios is due to us",
                   "small studios in the district get a one-off {amount} relief payment",
                   "we're owed {amount} under the small-studio relief"],
        "asks": ["claim it on the relief page", "put in the claim online",
                 "send the claim with the studio's sort code"],
        "fees": ["The bank's transfer fee is {fee}.", "A {fee} transfer fee comes off first.",
                 "There's a {fee} transfer charge."],
        "hosts": ["harrowmere-relief.example.org", "council-relief.example.net"],
        "paths": ["relief/", "claims/"],
        "leads": ["Just seen this: ", "", "Heads up, "],
        "deadlines": ["before Friday noon", "while the money lasts"],
        "case": "HR{n}",
        "tricks": ("spaced", "digits"),
        "senders": ["brackenfold-team.example.net"],
    },
    {   # a bursary, registration
        "claims": ["the studio has been offered a bursary of {amount}",
                   "there is a {amount} bursary for {item} with our name on it",
                   "makers who applied last year can take up a {amount} bursary"],
        "asks": ["register the studio on the bursary page", "fill in the two-minute "
                 "registration", "sign the bursary agreement"],
        "fees": ["Registration is {fee}.", "They charge {fee} to register, annoyingly.",
                 "A {fee} registration charge applies, card only."],
        "hosts": ["harrowmere-arts.example.org", "regional-makers-fund.example.org"],
        "paths": ["bursary/", "register/"],
        "leads": ["PS ", "Before I forget, ", ""],
        "deadlines": ["today if you can", "this week"],
        "case": "B/2026/{n}",
        "tricks": ("zero-width", "spaced"),
        "senders": ["brackenfold-coop.example.net"],
    },
    {   # a training voucher
        "claims": ["two of us can have training vouchers worth {amount}",
                   "the college is handing out {amount} training vouchers to co-ops",
                   "a {amount} voucher for a glaze or weaving course is ours"],
        "asks": ["enrol on the voucher page", "pick the course and enrol",
                 "put our names down"],
        "fees": ["Enrolment is {fee} each.", "It's {fee} to enrol.",
                 "Enrolment fee {fee}, taken off the voucher later."],
        "hosts": ["harrowmere-college.example.org", "makers-vouchers.test"],
        "paths": ["vouchers/", "enrol/"],
        "leads": ["Oh, and ", "", "By the way, "],
        "deadlines": ["before the course fills up", "by Wednesday"],
        "case": "TV-{n}",
        "tricks": ("homoglyph", "zero-width"),
        "senders": ["brackenfold-shop.example.org"],
    },
    {   # an equipment scheme, verification
        "claims": ["the equipment scheme will cover {amount} of {item}",
                   "we qualify for the equipment scheme, worth {amount}",
                   "{amount} of equipment money is waiting for {shop}"],
        "asks": ["verify the receiving account", "verify the co-op's trade account",
                 "re-enter the bank details they hold"],
        "fees": ["Verification costs {fee}.", "A {fee} verification charge is taken first.",
                 "It's {fee} to verify, which comes back with the money."],
        "hosts": ["rmf-harrowmere.example.com", "arts.harrowmere-council.example.net"],
        "paths": ["verify/", "scheme/"],
        "leads": ["Quick one: ", "Also, ", ""],
        "deadlines": ["within 48 hours", "before the end of the month"],
        "case": "EQ{n}",
        "tricks": ("digits", "zero-width"),
        "senders": ["brackenfoldmakers.example.org"],
    },
    {   # an energy rebate for the kiln
        "claims": ["there's an energy rebate of {amount} for running the kiln",
                   "kiln studios can get {amount} back on this winter's power",
                   "our power bill qualifies for a {amount} rebate"],
        "asks": ["confirm the meter number and the account", "send the meter reading and "
                 "bank details", "fill in the rebate form"],
        "fees": ["The admin charge is {fee}.", "Admin fee {fee}.",
                 "They keep {fee} for admin."],
        "hosts": ["kiln-rebate.example.com", "energy-rebate.test"],
        "paths": ["rebate/", "meter/"],
        "leads": ["", "Worth doing: ", "Saw this today: "],
        "deadlines": ["before the next bill", "by the 15th"],
        "case": "ER{n}",
        "tricks": ("spaced", "homoglyph"),
        "senders": ["brackenfoldcoop.test"],
    },
    {   # a stall grant, a deposit
        "claims": ["stallholders get {amount} towards pitch and tent this spring",
                   "the spring market stall grant of {amount} is ours if we want it",
                   "our pitch qualifies for a stall grant of {amount}"],
        "asks": ["secure the stall grant", "book the grant with the market office",
                 "confirm the stall and payment details"],
        "fees": ["They hold a refundable deposit of {fee}.", "Deposit {fee}, paid back in May.",
                 "A {fee} deposit secures it."],
        "hosts": ["craftfair-harrowmere.example.org", "harrowmere-craftfair.example.net"],
        "paths": ["stall-grant/", "pitch/"],
        "leads": ["One more thing: ", "", "Reminder: "],
        "deadlines": ["before the market", "by the 20th"],
        "case": "SG-{n}",
        "tricks": ("homoglyph", "spaced"),
        "senders": ["mail-brackenfold.test"],
    },
    {   # a marketing grant for the online shop
        "claims": ["the online shop qualifies for a {amount} marketing grant",
                   "there's {amount} of marketing money for craft webshops",
                   "our webshop was picked for a {amount} promotion grant"],
        "asks": ["activate the grant", "link the shop to the grant", "switch it on"],
        "fees": ["Activation is {fee}.", "It costs {fee} to activate.",
                 "A one-off {fee} activation fee applies."],
        "hosts": ["webshop-grants.example.net", "craft-promo.example"],
        "paths": ["activate/", "promo/"],
        "leads": ["", "Nice one: ", "FYI: "],
        "deadlines": ["by Sunday", "in the next two days"],
        "case": "MG{n}",
        "tricks": ("digits", "homoglyph"),
        "senders": ["team-brackenfold.example.com"],
    },
    {   # a top-up held with a payout
        "claims": ["a top-up of {amount} is held with the next payout",
                   "the fund has added {amount} to our payout",
                   "{amount} is ready to be released to {shop}"],
        "asks": ["release it by confirming the payout account", "confirm the studio's bank "
                 "details", "check and confirm the co-op's details"],
        "fees": ["Release costs {fee}.", "A {fee} handling charge covers the bank check.",
                 "They take {fee} for the paperwork."],
        "hosts": ["tillbridge-payments.example.net", "tillbridgepay.example.com"],
        "paths": ["release/", "payout-check?id="],
        "leads": ["", "Heads up: ", "FYI "],
        "deadlines": ["before the next payout", "as soon as possible"],
        "case": "TP{n}",
        "tricks": ("homoglyph", "zero-width", "digits"),
        "senders": ["brackenfold-studio.example.com"],
    },
    {   # a heritage craft prize
        "claims": ["the heritage crafts panel has picked us for a {amount} prize",
                   "our weaving is up for a heritage prize of {amount}",
                   "a {amount} heritage craft prize is waiting for the studio"],
        "asks": ["accept the prize online", "send the acceptance form", "say yes on their site"],
        "fees": ["Acceptance costs {fee}.", "There's a {fee} acceptance fee.",
                 "They ask {fee} to cover the certificate."],
        "hosts": ["heritage-crafts-prize.example.org", "craftprize.test"],
        "paths": ["accept/", "prize/"],
        "leads": ["Lovely news: ", "", "Guess what: "],
        "deadlines": ["before the ceremony", "by Monday"],
        "case": "HCP{n}",
        "tricks": ("zero-width", "digits", "spaced"),
        "senders": ["bfmakers.example.org"],
    },
]


def grant_generation(ctx):
    """Which wording the grant scam uses now: a new one every half working day of week 5."""
    if ctx.week == 5 and ctx.now.weekday() < 5:
        return GRANT_GENERATIONS[2 * ctx.now.weekday() + int(ctx.now.hour >= 13)]
    return ctx.rng.choice(GRANT_GENERATIONS)


def grant_line(rng, generation, slots, link):
    """The grant scam's tell: money, an ask at a look-alike host, a fee, a deadline."""
    lead = rng.choice(generation["leads"])
    claim = fill(rng.choice(generation["claims"]), slots)
    ask = rng.choice(generation["asks"])
    deadline = fill(rng.choice(generation["deadlines"]), slots)
    fee = fill(rng.choice(generation["fees"]), slots)
    joint = rng.choice([". To receive it, ", ". ", "; ", " - "])
    ask = capitalise(ask) if joint == ". " else ask
    line = (lead + claim if lead else capitalise(claim)) + joint + ask + " " + \
        deadline + rng.choice([": ", " at ", " here: "]) + link
    return line + rng.choice([" ", "\n\n"]) + fee


def grant_scam(ctx, channel):
    """The campaign that starts in week 5: copies of mail the co-op already trusts.

    Each message is a real-looking copy of one of the shop's correspondents
    (the Regional Makers' Fund, a member replying in the members' thread or
    passing on a customer's mail, the payment provider, a supplier), from a
    look-alike host or a free-mail account, with one paragraph added: money
    from the fund, confirm eligibility or account details at a look-alike
    host, a small fee, a deadline. Its key words are disguised
    (`disguise_text`).
    """
    rng = ctx.rng
    if ctx.week == 5:
        persona = GRANT_LAUNCH_WAVES[channel][ctx.now.weekday()][int(ctx.now.hour >= 13)]
    else:
        names, weights = zip(*GRANT_PERSONAS[channel])
        persona = names[weighted_index(rng, weights)]
    generation = grant_generation(ctx)
    case = generation["case"].format(n=rng.randrange(2000, 9999))
    slots = {
        "shop": SHOP, "case": case,
        "amount": rng.choice(["1,750 EUR", "2,500 EUR", "3,200 EUR", "4,000 EUR", "EUR 2,000",
                              "1,200 EUR", "650 EUR", "2.5k"]),
        "fee": rng.choice(["18 EUR", "25 EUR", "29 EUR", "35 EUR", "19.50 EUR"]),
        "by": rng.choice(["Friday", "Thursday", "the end of the week", "tomorrow", "Monday"]),
        "item": rng.choice(["a new kiln", "a second loom", "the packing room", "a lathe",
                            "training for the members", "the spring market stall",
                            "studio repairs"]),
    }
    path = f"{rng.choice(generation['paths'])}{re.sub('[^a-z0-9]+', '-', case.lower())}"
    line = grant_line(rng, generation, slots,
                      f"https://{rng.choice(generation['hosts'])}/{path}")
    # The host the message comes from, looking like the copied sender's.
    host = rng.choice(GRANT_HOSTS["payments" if persona == "payments" else "fund"])
    first, last, local, _ = rng.choice(MEMBERS)
    if rng.random() < 0.5:
        member_sender = f"{local}@{rng.choice(generation['senders'])}"
    else:
        member_sender = f"{local}.{last.lower()}@{rng.choice(CUSTOMER_DOMAINS)}"

    if persona == "fund":
        base = fund_mail(ctx)
        officer = rng.choice(GRANT_OFFICERS + FUND_OFFICERS)
        text = re.sub(r"\n\n(We never|Applying is free|If a message)[^\n]*", "", base.text)
        text = text.replace(FUND_HOST, host)
        text = insert_paragraph(rng, text, line)
        text = re.sub(r"Kind regards,\n[^\n]+", f"Kind regards,\n{officer}", text)
        draft = Draft(base.subject, text, f"{base.sender.split('@')[0]}@{host}",
                      base.sender_name)
        draft.to = base.to
    elif persona in ("member", "thread"):
        # A member's account (or one like it) replying in a thread: a note
        # among the members, or a customer's mail passed on by the help desk.
        if persona == "member":
            earlier = member_note(ctx, "mail")
            reply = rng.choice(["", "Sounds good.", "Thanks, will do.", "Noted!"])
        else:
            earlier = customer_message(ctx, rng.choice(QUOTED_FAMILIES), "mail")
            reply = rng.choice(["I've answered this one.", "I'll deal with this customer.",
                                "Replied, see below.", "Sorted, the parcel goes out tomorrow.",
                                "", "", "Can you check the stock for this?",
                                "This one's for you I think.", "FYI", "Done.",
                                "I've sent a replacement.", "Refund issued."])
        when = ctx.earlier(1, 3)
        other = rng.choice([m[0] for m in MEMBERS if m[0] != first])
        text = compose([f"Hi {other}," if rng.random() < 0.5 else "Hi all,", reply, line,
                        first, f"On {short_date(when)}, {earlier.sender_name} "
                        f"<{earlier.sender}> wrote:\n" + quote(earlier.text)])
        subject = earlier.subject if earlier.subject.startswith("Re: ") \
            else f"Re: {earlier.subject}"
        draft = Draft(subject, text, member_sender, f"{first} {last}")
        draft.to = f"members@{SHOP_DOMAIN}" if persona == "member" else HELP_ADDR
        if channel == "tickets":
            draft.meta = {"form": "general"}
    elif persona == "payments":
        base = details_notice(ctx) if rng.random() < 0.7 else payout_notice(ctx)
        text = insert_paragraph(rng, base.text.replace("tillbridge-pay.example.net", host),
                                line)
        draft = Draft(base.subject, text, f"payouts@{host}", base.sender_name)
    else:
        base = supplier_message(ctx)
        # The look-alike of the copied supplier's own host.
        name = base.sender.split("@")[1].split(".")[0].replace("-", "")
        host = rng.choice([h for h in GRANT_HOSTS["supplier"]
                           if h.split(".")[0].replace("-", "") == name])
        # A supplier's look-alike sends its readers to its own host.
        line = re.sub(r"https://[^/]+/", f"https://{host}/", line)
        text = insert_paragraph(rng, base.text, line)
        draft = Draft(base.subject, text, f"{base.sender.split('@')[0]}@{host}",
                      base.sender_name)
        draft.to = base.to
        draft.attachment = base.attachment

    share, tricks = GRANT_DISGUISE[ctx.week - 1], generation["tricks"]
    plain = draft.text
    draft.text = disguise_text(rng, plain, share, tricks=tricks)
    draft.subject = disguise_text(rng, draft.subject, share, tricks=tricks)
    if rng.random() < 0.5:
        draft.sender_name = disguise_text(rng, draft.sender_name, share * 0.5, tricks=tricks)
    if channel == "tickets":
        draft.meta = draft.meta or {"form": rng.choice(["general", "general", "account"])}
    elif persona in ("fund", "payments"):
        # The HTML part is disguised on its own, with comments inside words as well.
        html_body = "<html><body>" + "".join(
            f"<p>{link_urls(escape(p)).replace(chr(10), '<br>')}</p>"
            for p in plain.split("\n\n")) + "</body></html>"
        draft.html = disguise_text(rng, html_body, share, html=True, tricks=tricks)
    if rng.random() < 0.2:
        # Replies go to the host the link points at.
        draft.reply_to = f"{rng.choice(['claims', 'office', 'help'])}@" \
                         f"{re.search(r'https://([^/]+)/', line).group(1)}"
    return draft


QUOTED_FAMILIES = ["order-question", "shipping-delay", "return-request", "damaged-item",
                   "product-enquiry", "custom-order", "workshop-booking"]


def before_signature(text, paragraph):
    """Adds `paragraph` to a customer's own words, before the sign-off and any quote."""
    head, marker, tail = text.partition("\n\nOn ")
    parts = head.split("\n\n")
    at = len(parts)
    # Step back over short closing paragraphs: "Thanks,\nKim", "Sent from my phone".
    while at > 1 and len(parts) - at < 2 and len(parts[at - 1]) < 40:
        at -= 1
    return "\n\n".join(parts[:at] + [paragraph] + parts[at:]) + marker + tail


def insert_paragraph(rng, text, paragraph, first=1):
    """Puts `paragraph` between two of the text's paragraphs, never before `first`."""
    parts = text.split("\n\n")
    at = rng.randint(min(first, len(parts)), max(min(first, len(parts)), len(parts) - 1))
    return "\n\n".join(parts[:at] + [paragraph] + parts[at:])


def capitalise(text):
    return text[:1].upper() + text[1:]


JUNK_MAKERS = {
    "fake-invoice": fake_invoice,
    "account-phishing": account_phishing,
    "seo-offer": seo_offer,
    "prize-notice": prize_notice,
    "crypto-giveaway": crypto_giveaway,
    "counterfeit-goods": counterfeit_goods,
    "fake-order-notice": fake_order_notice,
    "overpayment-order": overpayment_order,
    "grant-scam": grant_scam,
}


# --------------------------------------------------------------------------
# Rendering raw mails
# --------------------------------------------------------------------------

def encode_word(text):
    """RFC 2047 encoded words for non-ASCII header text; ASCII passes through."""
    if all(ord(ch) < 128 for ch in text):
        return text
    words, chunk = [], ""
    for ch in text:
        if len((chunk + ch).encode("utf-8")) > 45:
            words.append(chunk)
            chunk = ""
        chunk += ch
    words.append(chunk)
    return " ".join("=?UTF-8?B?" + base64.b64encode(w.encode("utf-8")).decode("ascii") + "?="
                    for w in words)


def mailbox(name, address):
    if not name:
        return address
    if all(ord(ch) < 128 for ch in name):
        if re.fullmatch(r"[A-Za-z0-9 ]+", name):
            return f"{name} <{address}>"
        escaped = name.replace("\\", "\\\\").replace('"', '\\"')
        return f'"{escaped}" <{address}>'
    return f"{encode_word(name)} <{address}>"


def crlf(text):
    return text.replace("\r\n", "\n").replace("\n", "\r\n")


def encode_part(rng, text, content_type, encoding):
    """One leaf part: headers plus encoded body, CRLF line ends."""
    data = text.encode("utf-8")
    is_ascii = all(b < 128 for b in data)
    if encoding == "7bit" and not is_ascii:
        encoding = "quoted-printable"
    charset = "us-ascii" if is_ascii and encoding == "7bit" else "utf-8"
    head = f"Content-Type: {content_type}; charset={charset}\r\n" \
           f"Content-Transfer-Encoding: {encoding}\r\n\r\n"
    if encoding == "quoted-printable":
        body = quopri.encodestring(data).decode("ascii")
    elif encoding == "base64":
        body = base64.encodebytes(data).decode("ascii")
    else:
        body = text
    return head + crlf(body.rstrip("\n")) + "\r\n"


def attachment_part(filename, mime, data):
    encoded = base64.encodebytes(data).decode("ascii")
    return (f'Content-Type: {mime}; name="{filename}"\r\n'
            f"Content-Transfer-Encoding: base64\r\n"
            f'Content-Disposition: attachment; filename="{filename}"\r\n\r\n'
            + crlf(encoded.rstrip("\n")) + "\r\n")


def multipart(kind, boundary, parts):
    out = f'Content-Type: multipart/{kind}; boundary="{boundary}"\r\n\r\n'
    if kind == "alternative" and len(parts) > 1:
        out += "This is a multi-part message in MIME format.\r\n\r\n"
    for part in parts:
        out += f"--{boundary}\r\n{part}"
    return out + f"--{boundary}--\r\n"


def received_hops(rng, draft, at):
    relays = ["mx1.relay.example.net", "mx2.relay.example.net", "out.mailer.example.org",
              "smtp.post.example.net", "edge.example.com", "gw.bulk-sender.test",
              "mta7.example.net", "filter.hosting.example"]
    hops = []
    when = at
    previous = f"mx.{SHOP_DOMAIN}"
    for index in range(draft.hops):
        source = rng.choice([relay for relay in relays if relay != previous])
        ip = rng.choice(["192.0.2.", "198.51.100.", "203.0.113."]) + str(rng.randrange(1, 255))
        stamp = format_date(when, 0)
        hops.append(f"Received: from {source} ({source} [{ip}])\r\n\tby {previous} with "
                    f"ESMTPS id {rng.randrange(16**7, 16**8):08X};\r\n\t{stamp}\r\n")
        previous = source
        when = when - timedelta(seconds=rng.randint(1, 40))
    return "".join(hops)


def format_date(dt, offset_hours):
    local = dt.astimezone(timezone(timedelta(hours=offset_hours)))
    sign = "+" if offset_hours >= 0 else "-"
    offset = f"{sign}{abs(offset_hours):02d}00"
    return (f"{DAY_NAMES[local.weekday()][:3]}, {local.day:02d} "
            f"{MONTH_NAMES[local.month - 1][:3]} {local.year} "
            f"{local.hour:02d}:{local.minute:02d}:{local.second:02d} {offset}")


def render_raw(rng, draft, at, domain_hint):
    sent = at - timedelta(seconds=draft.date_skew_seconds)
    message_id = f"<{rng.randrange(16**11, 16**12):012x}.{rng.randrange(1000, 9999)}@{domain_hint}>"
    headers = received_hops(rng, draft, at)
    headers += f"From: {mailbox(draft.sender_name, draft.sender)}\r\n"
    headers += f"To: {draft.to}\r\n"
    headers += f"Subject: {encode_word(draft.subject)}\r\n"
    headers += f"Date: {format_date(sent, draft.utc_offset_hours)}\r\n"
    headers += f"Message-ID: {message_id}\r\n"
    if draft.reply_to:
        headers += f"Reply-To: {draft.reply_to}\r\n"
    if draft.list_unsubscribe:
        headers += f"List-Unsubscribe: {draft.list_unsubscribe}\r\n"
        headers += "List-Unsubscribe-Post: List-Unsubscribe=One-Click\r\n"
    headers += "MIME-Version: 1.0\r\n"

    text_encoding = rng.choice(["7bit", "quoted-printable", "quoted-printable"])
    html_encoding = rng.choice(["quoted-printable", "base64"])
    html = draft.html
    wants_html = html is not None or rng.random() < 0.35
    if wants_html and html is None:
        html = paragraphs_html(draft.text)
    boundary = f"=_bf{rng.randrange(16**10, 16**11):x}"
    if not wants_html:
        body_part = encode_part(rng, draft.text, "text/plain", text_encoding)
    elif draft.html_only:
        body_part = encode_part(rng, html, "text/html", html_encoding)
    else:
        body_part = multipart("alternative", boundary, [
            encode_part(rng, draft.text, "text/plain", text_encoding),
            encode_part(rng, html, "text/html", html_encoding),
        ])
    if draft.attachment:
        filename, mime, data = draft.attachment
        outer = f"=_mix{rng.randrange(16**10, 16**11):x}"
        body_part = multipart("mixed", outer, [body_part, attachment_part(filename, mime, data)])
    # body_part starts with its own Content-Type (and encoding) header lines.
    return headers + body_part


# --------------------------------------------------------------------------
# Checks and output
# --------------------------------------------------------------------------

HOST_RES = [
    re.compile(r"@([A-Za-z0-9.\-]+)"),
    re.compile(r"[a-z]+://([A-Za-z0-9.\-]+)"),
    re.compile(r"\b(www\.[A-Za-z0-9.\-]+)"),
    re.compile(r"(?:from|by) ([A-Za-z0-9\-]+(?:\.[A-Za-z0-9\-]+)+)"),
]


def check_hosts(texts):
    """Refuses any host name outside the reserved ones (RFC 2606)."""
    for text in texts:
        if not text:
            continue
        for pattern in HOST_RES:
            for host in pattern.findall(text):
                host = host.rstrip(".-").lower()
                if not host.endswith(RESERVED_SUFFIXES):
                    raise SystemExit(f"generate.py: host {host!r} is not reserved: {text[:120]!r}")


def build(seed):
    rng = random.Random(seed)
    events = schedule(rng)
    ctx = Context(rng)
    records = []
    for index, event in enumerate(events):
        at = START + timedelta(seconds=event.seconds)
        ctx.now = at
        ctx.week = event.seconds // (7 * 86400) + 1
        campaign, channel = event.campaign, event.channel
        if event.label == "junk":
            draft = junk_message(ctx, campaign, channel)
        elif campaign == "supplier-mail":
            draft = supplier_message(ctx)
        elif campaign == "supplier-offer":
            draft = supplier_offer(ctx)
        elif campaign == "fund-mail":
            draft = fund_mail(ctx)
        elif campaign == "member-note":
            draft = member_note(ctx, channel)
        elif campaign == "service-notice":
            draft = service_notice(ctx)
        elif campaign == "newsletter":
            draft = newsletter(ctx)
        else:
            draft = customer_message(ctx, campaign, channel)
        if channel == "tickets":
            ctx.ticket()
        record = {
            "id": f"m{index + 1:05d}",
            "at": at.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "week": ctx.week,
            "channel": channel,
            "label": event.label,
            "campaign": campaign,
        }
        is_raw = channel == "mail" and rng.random() < RAW_SHARE.get(campaign, RAW_SHARE_OTHER)
        if is_raw:
            domain_hint = draft.sender.split("@")[1]
            raw = render_raw(rng, draft, at, domain_hint)
            # Encoded bodies may split a host across lines, so the raw text is
            # checked up to the blank line that ends the headers; the bodies
            # were checked before they were encoded.
            attachment_text = draft.attachment[2].decode("ascii") if draft.attachment else None
            check_hosts([draft.text, draft.html, draft.subject, draft.sender, draft.reply_to,
                         attachment_text, raw.split("\r\n\r\n", 1)[0]])
            record["raw"] = raw
        else:
            check_hosts([draft.text, draft.html, draft.subject, draft.sender])
            record["subject"] = draft.subject
            record["body"] = draft.text
            record["sender"] = draft.sender_field(rng)
            if draft.meta:
                record["meta"] = {key: draft.meta[key] for key in sorted(draft.meta)}
        records.append(record)
    if len(records) < 3200:
        raise SystemExit(f"generate.py: only {len(records)} messages; expected at least 3200")
    return records


def stats(records):
    lines = []
    weeks = range(1, WEEKS + 1)
    lines.append("week  first day   mail fine  mail junk  tickets fine  tickets junk  total  "
                 "junk %  raw mails")
    totals = [0] * 6
    for week in weeks:
        rows = [r for r in records if r["week"] == week]
        counts = [
            sum(1 for r in rows if r["channel"] == "mail" and r["label"] == "fine"),
            sum(1 for r in rows if r["channel"] == "mail" and r["label"] == "junk"),
            sum(1 for r in rows if r["channel"] == "tickets" and r["label"] == "fine"),
            sum(1 for r in rows if r["channel"] == "tickets" and r["label"] == "junk"),
            len(rows),
            sum(1 for r in rows if "raw" in r),
        ]
        totals = [a + b for a, b in zip(totals, counts)]
        first = (START + timedelta(days=7 * (week - 1))).strftime("%Y-%m-%d")
        junk = counts[1] + counts[3]
        lines.append(f"{week:>4}  {first}  {counts[0]:>9}  {counts[1]:>9}  {counts[2]:>12}  "
                     f"{counts[3]:>12}  {counts[4]:>5}  {100 * junk / counts[4]:>6.1f}  "
                     f"{counts[5]:>9}")
    junk = totals[1] + totals[3]
    lines.append(f"{'all':>4}  {'':10}  {totals[0]:>9}  {totals[1]:>9}  {totals[2]:>12}  "
                 f"{totals[3]:>12}  {totals[4]:>5}  {100 * junk / totals[4]:>6.1f}  "
                 f"{totals[5]:>9}")
    mail = totals[0] + totals[1]
    lines.append(f"raw mails: {totals[5]} of {mail} mail-channel messages "
                 f"({100 * totals[5] / mail:.1f}%)")
    lines.append("")
    lines.append("campaign             label  channel    " + " ".join(f"w{w:<3}" for w in weeks)
                 + "  total")
    keys = sorted({(r["label"], r["campaign"], r["channel"]) for r in records})
    for label, campaign, channel in keys:
        per_week = [sum(1 for r in records if r["week"] == w and r["campaign"] == campaign
                        and r["channel"] == channel and r["label"] == label) for w in weeks]
        lines.append(f"{campaign:<20} {label:<6} {channel:<10} "
                     + " ".join(f"{n:<4}" for n in per_week) + f"  {sum(per_week):>5}")
    return "\n".join(lines) + "\n"


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--seed", type=int, default=SEED, help=f"random seed (default {SEED})")
    parser.add_argument("--stats", action="store_true",
                        help="print counts per week, label, channel and campaign instead")
    args = parser.parse_args()
    records = build(args.seed)
    if args.stats:
        out = stats(records)
    else:
        out = "".join(json.dumps(r, ensure_ascii=False) + "\n" for r in records)
    sys.stdout.buffer.write(out.encode("utf-8"))


if __name__ == "__main__":
    main()
