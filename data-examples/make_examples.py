#!/usr/bin/env python3
"""Generate the example data sets shipped with pondus.

ALL DATA PRODUCED BY THIS SCRIPT ARE INVENTED.  The labs, sites, towns,
authors, trials and programmes are fictional, and every number is simulated
from the models stated below.  They exist only to demonstrate and test
pondus; they say nothing about the real world.

Usage (from the repository root or anywhere):

    python3 data-examples/make_examples.py

rewrites the CSV files in the folder that holds this script.  Only the Python
standard library is used (random, math), each file draws from its own
random.Random seeded from SEED, and output is written as UTF-8 with "\\n" line
endings, so re-running the script reproduces the files byte-for-byte.

The true parameters of every simulation are collected in PARAMS (and listed in
README.md) so that tests can check that the tool recovers them roughly.
"""

import math
import os
import random

SEED = 4217

OUT_DIR = os.path.dirname(os.path.abspath(__file__))

# True simulation parameters (all on the scale stated in "scale").
PARAMS = {
    "consortium-correlations.csv": {
        "scale": "Fisher z of r",
        "model": "z_i = intercept + session_minutes*b1 + online*b2 + u_i, "
                 "u_i ~ N(0, tau2); z_obs = z_i + N(0, 1/(n-3)); r = tanh(z_obs)",
        "intercept": 0.10,
        "session_minutes": 0.005,    # per minute of session length
        "mode_online": -0.06,        # online vs in_person (reference)
        "tau2": 0.01,
    },
    "programme-sites.csv": {
        "scale": "standardised mean difference (d, population SD = 15)",
        "model": "d_i = intercept + dosage_hours*b1 + volunteer*b2 + u_i, "
                 "u_i ~ N(0, tau2); group means/SDs sampled from normal data",
        "intercept": 0.05,
        "dosage_hours": 0.008,       # per tutoring hour
        "delivery_volunteer": -0.15, # volunteer vs staff (reference)
        "tau2": 0.02,
    },
    "published-slopes.csv": {
        "scale": "raw slope (mmHg systolic pressure per 1000 daily steps)",
        "model": "slope_i = intercept + mean_age*b1 + u_i, u_i ~ N(0, tau2); "
                 "slope_obs = slope_i + N(0, se_i^2)",
        "intercept": 0.20,
        "mean_age": -0.012,          # per year of mean sample age
        "tau2": 0.004,
    },
    "trial-events.csv": {
        "scale": "log odds ratio (treatment vs control)",
        "model": "logOR_i = intercept + followup_months*b1 + community*b2 + u_i, "
                 "u_i ~ N(0, tau2); control risk ~ U(0.10, 0.30); binomial events. "
                 "Two small trials have hand-set zero cells (see below).",
        "intercept": -0.70,
        "followup_months": 0.03,     # benefit fades with longer follow-up
        "setting_community": 0.0,    # no true effect of setting
        "tau2": 0.04,
    },
    "precomputed-effects.csv": {
        "scale": "generic effect as reported (author-computed SMD)",
        "model": "theta_i = intercept + duration_weeks*b1 + u_i, u_i ~ N(0, tau2); "
                 "effect = theta_i + N(0, se_i^2)",
        "intercept": 0.05,
        "duration_weeks": 0.015,     # per week of the schedule change
        "tau2": 0.01,
    },
    "partial-correlations.csv": {
        "scale": "Fisher z of the partial r",
        "model": "z_i = intercept + remote_share*b1 + u_i, u_i ~ N(0, tau2); "
                 "z_obs = z_i + N(0, 1/(n-covariates-3)); r = tanh(z_obs); "
                 "t = r*sqrt(df/(1-r^2)), df = n-covariates-2",
        "intercept": -0.20,
        "remote_share": 0.25,        # per unit (0..1) share of remote workers
        "tau2": 0.005,
    },
    "hiring-validity.csv": {
        "scale": "correlation r (true-score validity in the applicant pool)",
        "model": "rho_i = rho + N(0, tau^2); attenuated by sqrt(rxx_a) (x unreliable in the "
                 "applicant pool), restricted by u (inverse Thorndike Case II), attenuated by "
                 "sqrt(ryy) (y unreliable among the hired); r = that + N(0, (1-r^2)^2/(n-1)); "
                 "rxx in the file is the reliability among the hired, 1-(1-rxx_a)/u^2; "
                 "u = 0.35 + 0.6*selectivity + N(0, 0.04^2), clipped to [0.3, 0.98]",
        "rho": 0.45,
        "tau": 0.05,
        "selectivity_true_effect": 0.0,  # selectivity does not change rho
    },
}


# ---------------------------------------------------------------- helpers

def rng_for(index):
    """Independent, reproducible stream per file."""
    return random.Random(SEED * 1000 + index)


def binomial(rng, n, p):
    return sum(1 for _ in range(n) if rng.random() < p)


def sample_sd(rng, sigma, n):
    """Sample SD of n normal observations: sigma * sqrt(chi2_{n-1}/(n-1))."""
    chi2 = rng.gammavariate((n - 1) / 2.0, 2.0)
    return sigma * math.sqrt(chi2 / (n - 1))


def fmt(x, digits):
    s = f"{x:.{digits}f}"
    if s.startswith("-") and float(s) == 0.0:
        s = s[1:]  # no "-0.000"
    return s


def write_csv(name, header, rows):
    path = os.path.join(OUT_DIR, name)
    for row in rows:
        assert len(row) == len(header), (name, row)
        for cell in row:
            assert "," not in cell and '"' not in cell and "\n" not in cell
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        f.write(",".join(header) + "\n")
        for row in rows:
            f.write(",".join(row) + "\n")
    print(f"wrote {path} ({len(rows)} rows)")


# ------------------------------------------------ 1. consortium correlations
# Invented scenario: a 24-lab consortium ran one protocol measuring the
# correlation between a brief attention-task score and next-day recall.  Labs
# chose their own session length and whether to run online or in person.

CONSORTIUM_LABS = [
    "Lab Kessler-Ota", "Lab Moravec-Lind", "Lab Ødegård-Pike", "Lab Santelli",
    "Lab Nakamura-Reyes", "Lab Halvorsen", "Lab Wróbel-Aske", "Lab Okonkwo",
    "Lab Dufresne", "Lab Ferreira-Quist", "Lab Lindqvist-Barr", "Lab Holt-Anand",
    "Lab Przybył", "Lab Achterberg", "Lab Mendoza-Vail", "Lab Ishikawa-Brent",
    "Lab Caldwell-Nuñez", "Lab Varga-Lune", "Lab Béranger", "Lab Oyelaran",
    "Lab Sørlie-Grant", "Lab Teodorescu", "Lab Müller-Abara", "Lab Whitcombe",
]


def make_consortium():
    p = PARAMS["consortium-correlations.csv"]
    rng = rng_for(1)
    tau = math.sqrt(p["tau2"])
    rows = []
    for i, lab in enumerate(CONSORTIUM_LABS):
        n = rng.randint(40, 400)
        minutes = rng.choice(range(10, 65, 5))
        mode = "online" if i % 2 == 0 else "in_person"
        if rng.random() < 0.2:  # a few labs break the alternation
            mode = "in_person" if mode == "online" else "online"
        z_true = (p["intercept"] + p["session_minutes"] * minutes
                  + p["mode_online"] * (mode == "online") + rng.gauss(0.0, tau))
        z_obs = z_true + rng.gauss(0.0, 1.0 / math.sqrt(n - 3))
        r = math.tanh(z_obs)
        assert abs(r) < 1 and n >= 10
        rows.append([lab, fmt(r, 3), str(n), str(minutes), mode])
    write_csv("consortium-correlations.csv",
              ["study", "r", "n", "session_minutes", "mode"], rows)


# ---------------------------------------------------- 2. programme sites
# Invented scenario: "Numeracy Bridges", an after-school maths tutoring
# programme for 9-11 year olds, evaluated at 16 fictional sites with a
# randomised comparison group.  Outcome: an invented maths test scaled to
# mean 100, SD 15.  Sites differ in tutoring hours and in whether paid staff
# or trained volunteers delivered the sessions.  One site did not record its
# dosage, so that cell is left empty.

PROGRAMME_SITES = [
    "Site 01 Valdenor", "Site 02 Marrowick", "Site 03 Kestel Bay",
    "Site 04 Pellinore", "Site 05 Ashcombe Rise", "Site 06 Løvstrand",
    "Site 07 Quillon", "Site 08 Brennet Hollow", "Site 09 Saint-Évrard",
    "Site 10 Dunmarrow", "Site 11 Tovey Cross", "Site 12 Osterfjell",
    "Site 13 Grünwick", "Site 14 Harlow Fen", "Site 15 Zabłocie Wolne",
    "Site 16 Carrickmoor",
]
MISSING_DOSAGE_SITE = "Site 11 Tovey Cross"


def make_programme():
    p = PARAMS["programme-sites.csv"]
    rng = rng_for(2)
    tau = math.sqrt(p["tau2"])
    sigma = 15.0
    rows = []
    for i, site in enumerate(PROGRAMME_SITES):
        treat_n = rng.randint(25, 150)
        ctrl_n = max(20, treat_n + rng.randint(-15, 15))
        dosage = rng.choice(range(10, 62, 2))
        delivery = "volunteer" if rng.random() < 0.45 else "staff"
        d_true = (p["intercept"] + p["dosage_hours"] * dosage
                  + p["delivery_volunteer"] * (delivery == "volunteer")
                  + rng.gauss(0.0, tau))
        mu = rng.gauss(100.0, 4.0)  # site baseline level
        ctrl_mean = mu + rng.gauss(0.0, sigma / math.sqrt(ctrl_n))
        treat_mean = mu + d_true * sigma + rng.gauss(0.0, sigma / math.sqrt(treat_n))
        ctrl_sd = sample_sd(rng, sigma, ctrl_n)
        treat_sd = sample_sd(rng, sigma, treat_n)
        assert ctrl_sd > 0 and treat_sd > 0 and min(treat_n, ctrl_n) >= 10
        dosage_cell = "" if site == MISSING_DOSAGE_SITE else str(dosage)
        rows.append([site, fmt(treat_mean, 1), fmt(treat_sd, 1), str(treat_n),
                     fmt(ctrl_mean, 1), fmt(ctrl_sd, 1), str(ctrl_n),
                     dosage_cell, delivery])
    write_csv("programme-sites.csv",
              ["study", "treat_mean", "treat_sd", "treat_n", "ctrl_mean",
               "ctrl_sd", "ctrl_n", "dosage_hours", "delivery"], rows)


# ---------------------------------------------------- 3. published slopes
# Invented scenario: 14 fictional published cohort studies each report the
# regression slope of resting systolic blood pressure (mmHg) on average daily
# step count (per 1000 steps), with its standard error.  The slope becomes
# more negative in older samples.

SLOPE_STUDIES = [
    "Arvidsen 2009", "Calloway & Ng 2010", "Brückner 2011", "Tessaro 2012",
    "Mbeki-Hollis 2013", "Ødum 2014", "Farrow & Iqbal 2015", "Lévesque 2016",
    "Kowalczyk-Bałut 2017", "Sandoval-Pratt 2018", "Haverkamp 2019",
    "Renwick & Oduya 2020", "Quintal 2021", "Yamadera 2022",
]


def make_slopes():
    p = PARAMS["published-slopes.csv"]
    rng = rng_for(3)
    tau = math.sqrt(p["tau2"])
    rows = []
    for study in SLOPE_STUDIES:
        mean_age = round(rng.uniform(24.0, 72.0), 1)
        se = rng.uniform(0.05, 0.20)
        slope_true = p["intercept"] + p["mean_age"] * mean_age + rng.gauss(0.0, tau)
        slope_obs = slope_true + rng.gauss(0.0, se)
        assert se > 0
        rows.append([study, fmt(slope_obs, 3), fmt(se, 3), fmt(mean_age, 1)])
    write_csv("published-slopes.csv", ["study", "slope", "se", "mean_age"], rows)


# ------------------------------------------------------ 4. trial events
# Invented scenario: 12 fictional randomised trials of a new antimicrobial
# wound dressing versus standard dressing; the event is a wound infection
# during follow-up.  The benefit fades in trials with longer follow-up.
# Setting (hospital or community clinics) has no true effect.
# Two small trials are set by hand to show zero-cell handling:
# PIPIT-W has no events in the treatment arm, QUAIL has none in either arm.

TRIALS = [
    "ASTER-WD 2011", "BRAMBLE 2012", "CÉLESTE 2013", "DUNLIN 2013",
    "FJØRD-2 2014", "GANNET 2015", "HALCYON-W 2016", "KESTREL-2 2017",
    "LAPWING 2018", "SÜDWIND 2019", "PIPIT-W 2020", "QUAIL 2021",
]
ZERO_ONE_ARM = "PIPIT-W 2020"
ZERO_BOTH_ARMS = "QUAIL 2021"


def make_trials():
    p = PARAMS["trial-events.csv"]
    rng = rng_for(4)
    tau = math.sqrt(p["tau2"])
    # spread follow-up over the whole range so the moderator is informative
    followups = [1, 2, 3, 4, 6, 6, 9, 12, 12, 18, 24, 24]
    rng.shuffle(followups)
    rows = []
    for i, trial in enumerate(TRIALS):
        followup = followups[i]
        setting = "community" if rng.random() < 0.5 else "hospital"
        log_or = (p["intercept"] + p["followup_months"] * followup
                  + p["setting_community"] * (setting == "community")
                  + rng.gauss(0.0, tau))
        if trial in (ZERO_ONE_ARM, ZERO_BOTH_ARMS):
            # small trials with rare events; counts set by hand (see above)
            treat_n = rng.randint(18, 30)
            ctrl_n = rng.randint(18, 30)
            treat_events = 0
            ctrl_events = 3 if trial == ZERO_ONE_ARM else 0
        else:
            treat_n = rng.randint(40, 300)
            ctrl_n = max(30, treat_n + rng.randint(-20, 20))
            p_ctrl = rng.uniform(0.10, 0.30)
            odds_t = p_ctrl / (1.0 - p_ctrl) * math.exp(log_or)
            p_treat = odds_t / (1.0 + odds_t)
            treat_events = binomial(rng, treat_n, p_treat)
            ctrl_events = binomial(rng, ctrl_n, p_ctrl)
        assert 0 <= treat_events <= treat_n and 0 <= ctrl_events <= ctrl_n
        assert min(treat_n, ctrl_n) >= 10
        rows.append([trial, str(treat_events), str(treat_n), str(ctrl_events),
                     str(ctrl_n), str(followup), setting])
    write_csv("trial-events.csv",
              ["study", "treat_events", "treat_n", "ctrl_events", "ctrl_n",
               "followup_months", "setting"], rows)


# ------------------------------------------------ 5. precomputed effects
# Invented scenario: 10 fictional workplace reports of a break-schedule
# change (short, frequent breaks) on a standardised wellbeing score.  The
# authors give only a precomputed SMD, with precision reported in one of
# three ways: a variance, a standard error, or a 95% confidence interval.
# Longer-running schedule changes show larger effects.

PRECOMPUTED_STUDIES = [
    "Halden-Voss 2014", "Okafor & Lindahl 2015", "Prévost 2016",
    "Marchetti 2016", "Strømberg 2017", "Kiely-Tan 2018", "Abernathy 2019",
    "Wójcik & Rahman 2020", "Delacourt 2021", "Ferreyra 2022",
]


def make_precomputed():
    p = PARAMS["precomputed-effects.csv"]
    rng = rng_for(5)
    tau = math.sqrt(p["tau2"])
    z975 = 1.959963984540054
    # spread duration over 2..20 weeks so the moderator is informative
    durations = [2, 4, 6, 8, 10, 12, 14, 16, 18, 20]
    rng.shuffle(durations)
    rows = []
    for i, study in enumerate(PRECOMPUTED_STUDIES):
        weeks = durations[i]
        se = rng.uniform(0.08, 0.25)
        theta = p["intercept"] + p["duration_weeks"] * weeks + rng.gauss(0.0, tau)
        effect = theta + rng.gauss(0.0, se)
        variance_cell = se_cell = lo_cell = hi_cell = ""
        way = i % 3
        if way == 0:
            variance_cell = fmt(se * se, 4)
        elif way == 1:
            se_cell = fmt(se, 3)
        else:
            lo_cell = fmt(effect - z975 * se, 3)
            hi_cell = fmt(effect + z975 * se, 3)
        rows.append([study, fmt(effect, 3), variance_cell, se_cell,
                     lo_cell, hi_cell, str(weeks)])
    write_csv("precomputed-effects.csv",
              ["study", "effect", "variance", "se", "ci_low", "ci_high",
               "duration_weeks"], rows)


# ---------------------------------------------- 6. partial correlations
# Invented scenario: 12 fictional employee surveys each report the t statistic
# of commute length in a regression of job satisfaction on commute length plus
# some covariates.  The (negative) association is weaker where a larger share
# of respondents work remotely part of the week.

PARTIAL_STUDIES = [
    "Commute Panel Valdenor 2015", "Workforce Survey Marrowick 2016",
    "Nørrebrink Staff Study 2016", "Kestel Bay Employer Panel 2017",
    "Pellinore Transit Survey 2017", "Saint-Évrard Travail 2018",
    "Osterfjell Pendler 2018", "Łąkowa Office Survey 2019",
    "Dunmarrow Wellbeing Panel 2020", "Grünwick Arbeitsweg 2021",
    "Harlow Fen Hybrid Study 2022", "Carrickmoor Commute 2023",
]


def make_partial():
    p = PARAMS["partial-correlations.csv"]
    rng = rng_for(6)
    tau = math.sqrt(p["tau2"])
    rows = []
    for study in PARTIAL_STUDIES:
        n = rng.randint(60, 800)
        covariates = rng.randint(1, 6)
        remote = rng.uniform(0.0, 0.8)
        z_true = p["intercept"] + p["remote_share"] * remote + rng.gauss(0.0, tau)
        z_obs = z_true + rng.gauss(0.0, 1.0 / math.sqrt(n - covariates - 3))
        r = math.tanh(z_obs)
        df = n - covariates - 2
        t = r * math.sqrt(df / (1.0 - r * r))
        assert abs(r) < 1 and n >= 10 and df > 0
        rows.append([study, fmt(t, 2), str(n), str(covariates), fmt(remote, 2)])
    write_csv("partial-correlations.csv",
              ["study", "t", "n", "covariates", "remote_share"], rows)


# ------------------------------------------------ 7. hiring validity
# Invented scenario: 18 fictional regional offices of an invented logistics
# firm, "Brightwater Freight", score job applicants on a work-sample
# exercise; after six months supervisors rate the performance of those
# hired.  r is the exercise-rating correlation among the hired.  Offices
# differ in how selective they are (hired_share = share of applicants
# hired), so the hired group's spread of exercise scores (range_ratio =
# SD among the hired / SD among all applicants) differs too.  The true-score
# validity in the applicant pool does not depend on selectivity: any
# moderation by selectivity in the observed r is an artifact of range
# restriction.

HIRING_OFFICES = [
    "Office Valdenor", "Office Marrowick", "Office Kestel Bay", "Office Pellinore",
    "Office Ashcombe", "Office Løvstrand", "Office Quillon", "Office Brennet",
    "Office Saint-Évrard", "Office Dunmarrow", "Office Tovey", "Office Osterfjell",
    "Office Grünwick", "Office Harlow Fen", "Office Zabłocie", "Office Carrickmoor",
    "Office Nørrebrink", "Office Łąkowa",
]


def make_hiring():
    p = PARAMS["hiring-validity.csv"]
    rng = rng_for(7)
    rows = []
    for office in HIRING_OFFICES:
        n = rng.randint(45, 320)
        selectivity = rng.uniform(0.1, 0.9)
        u = min(0.98, max(0.3, 0.35 + 0.6 * selectivity + rng.gauss(0.0, 0.04)))
        rxx_a = rng.uniform(0.80, 0.92)
        ryy = rng.uniform(0.50, 0.75)
        rho = p["rho"] + rng.gauss(0.0, p["tau"])
        r_pool = rho * math.sqrt(rxx_a)
        r_hired = u * r_pool / math.sqrt((u * u - 1.0) * r_pool * r_pool + 1.0)
        r_true = r_hired * math.sqrt(ryy)
        r = r_true + rng.gauss(0.0, (1.0 - r_true ** 2) / math.sqrt(n - 1))
        rxx = 1.0 - (1.0 - rxx_a) / (u * u)
        assert abs(r) < 1 and 0 < rxx < 1
        rows.append([office, fmt(r, 3), str(n), fmt(rxx, 2), fmt(ryy, 2),
                     fmt(u, 2), fmt(selectivity, 2)])
    write_csv("hiring-validity.csv",
              ["study", "r", "n", "rel_exercise", "rel_rating", "range_ratio",
               "hired_share"], rows)


def main():
    make_consortium()
    make_programme()
    make_slopes()
    make_trials()
    make_precomputed()
    make_partial()
    make_hiring()


if __name__ == "__main__":
    main()
