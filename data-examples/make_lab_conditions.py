#!/usr/bin/env python3
"""Writes data-examples/lab-conditions.csv: INVENTED data for the docs only.

Scenario (invented): 16 labs of a memory-training consortium each ran 1 to 4
conditions that differed in session length; each row is one condition's
standardised mean difference and its sampling variance. Labs differ in how
many years they have run the protocol (a lab-level moderator); session
length varies within labs. Seeded; standard library only.
"""
import os
import random

rng = random.Random(91)
rows = []
names = ["Arnholt", "Brisa", "Caldwell", "Dunmore", "Eskeland", "Farrow", "Galen", "Hollis",
         "Ingram", "Jaskari", "Kettering", "Lindqvist", "Marsh", "Nakamura", "Orwell", "Pereira"]
for lab in names:
    years = rng.randint(1, 9)
    u = rng.gauss(0, 0.18)
    for c in range(rng.randint(1, 4)):
        minutes = rng.choice([15, 20, 30, 45, 60])
        n = rng.randint(30, 120)
        v = 4 / n + rng.uniform(0, 0.01)
        d = 0.15 + 0.02 * years + 0.004 * (minutes - 30) + u + rng.gauss(0, 0.1) + rng.gauss(0, v ** 0.5)
        rows.append((f"{lab} condition {c + 1}", f"Lab {lab}", round(d, 3), round(v, 4), years, minutes))
here = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(here, "lab-conditions.csv"), "w") as fh:
    fh.write("study,lab,effect,variance,lab_years,session_minutes\n")
    for r in rows:
        fh.write(",".join(str(x) for x in r) + "\n")
