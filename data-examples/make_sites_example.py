#!/usr/bin/env python3
"""Generate the invented multi-site raw data for `pondus sites`.

ALL DATA PRODUCED BY THIS SCRIPT ARE INVENTED. The choirs, towns and singers
are fictional; every number is simulated from the model below. They exist
only to demonstrate pondus and say nothing about the real world.

Scenario: 30 community choirs (sites) take part in a breathing study. For
each singer: weekly rehearsal hours (x), a breath-hold score in seconds (y),
age in years (w, a participant-level moderator) and whether the singer also
plays a wind instrument (covariate `wind`, 0/1). The site table gives each
choir's conductor experience (years) and its region.

True model, singer i in choir s:
    y = a_s + b_s * hours + G * (age - 45) + C * (hours * (age - 45)) + D * wind + e,
    e ~ N(0, SIGMA^2),
    b_s = B0 + K * (conductor_years_s - 10) + L * (mean_age_s - 45) + u_s, u_s ~ N(0, TAU^2).
C is the within-choir moderation by age (individual level); L is a
contextual effect of the choir's mean age that exists only between choirs,
so the across-choir slope-on-mean-age regression estimates about C + L
(here of the opposite sign), while the pooled product term estimates C.

Usage: python3 data-examples/make_sites_example.py  (rewrites the two CSVs
beside this script byte-for-byte; standard library only).
"""

import os
import random

SEED = 5119
PARAMS = {
    "B0": 1.5,      # slope of breath-hold seconds per weekly rehearsal hour at age 45, conductor 10 y
    "K": 0.04,      # change in slope per conductor year (site characteristic)
    "L": 0.05,      # contextual effect of the choir's mean age on the slope (between choirs only)
    "C": -0.03,     # within-choir product term hours x age (per hour per year of age)
    "G": -0.2,      # age main effect (seconds per year)
    "D": 3.0,       # wind-instrument players hold longer (seconds)
    "SIGMA": 4.0,   # residual SD (seconds)
    "TAU": 0.15,    # SD of the choirs' random slope deviations
}
OUT = os.path.dirname(os.path.abspath(__file__))
TOWNS = ["Aldmoor", "Brackenby", "Cindlewick", "Dunharrow", "Eastfold", "Fennick", "Glenmarsh",
         "Hollowcombe", "Ivelton", "Juniper Bay", "Kestrel Vale", "Larkspur", "Mirefield",
         "Northwyn", "Oakhollow", "Pellmore", "Quarrydown", "Rookhaven", "Saltmere", "Thistleby",
         "Umberlea", "Vantwood", "Wrenford", "Yarrowgate", "Zell Abbey", "Ashcombe", "Birchley",
         "Coldharbour", "Dovecote", "Elmsworth"]
REGIONS = ["coast", "hills", "city"]


def main():
    rng = random.Random(SEED)
    p = PARAMS
    participants = []
    sites = []
    for s, town in enumerate(TOWNS):
        choir = f"{town} Choir"
        conductor = rng.randint(2, 25)
        region = REGIONS[s % 3]
        mean_age = rng.uniform(30, 65)
        n = 2 if s == 7 else rng.randint(18, 60)  # one choir returned only two forms
        slope = (p["B0"] + p["K"] * (conductor - 10) + p["L"] * (mean_age - 45)
                 + rng.gauss(0, p["TAU"]))
        intercept = rng.gauss(40, 3)
        for i in range(n):
            age = max(18.0, rng.gauss(mean_age, 9))
            hours = round(rng.uniform(0.5, 6.0), 1)
            wind = 1 if rng.random() < 0.2 else 0
            a = age - 45
            y = (intercept + slope * hours + p["G"] * a + p["C"] * hours * a + p["D"] * wind
                 + rng.gauss(0, p["SIGMA"]))
            participants.append([choir, f"{hours:.1f}", f"{age:.0f}", str(wind), f"{y:.1f}"])
        if s != 12:  # one choir is missing from the site table
            sites.append([choir, str(conductor), region])
    sites.append(["Greyfriars Choir", "14", "city"])  # in the table, sent no data
    # Two singers left the breath-hold field empty.
    participants[40][4] = ""
    participants[333][4] = "NA"
    rng.shuffle(participants)  # forms arrived in no particular order
    with open(os.path.join(OUT, "choir-participants.csv"), "w", encoding="utf-8", newline="\n") as f:
        f.write("choir,rehearsal_hours,age,wind,breath_hold_s\n")
        for r in participants:
            f.write(",".join(r) + "\n")
    with open(os.path.join(OUT, "choir-sites.csv"), "w", encoding="utf-8", newline="\n") as f:
        f.write("choir,conductor_years,region\n")
        for r in sites:
            f.write(",".join(r) + "\n")


if __name__ == "__main__":
    main()
