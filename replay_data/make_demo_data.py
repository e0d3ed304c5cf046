#!/usr/bin/env python3
"""Makes the invented demo logs in replay_data/ (fixed seed; standard library only).

INVENTED DATA. "Larkspur Outfitters" is a fictional online outdoor-gear shop; its teams, metrics and
results below are made up for demonstrating alphaledger and describe no real company or experiment.

Files written:
  larkspur_experiments.csv  two years of product A/B tests (id, team, metric, finished_at, p_value);
                            about 12% of the changes truly move their metric.
  larkspur_summaries.csv    60 of its checkout experiments as raw dashboard summaries (users and
                            conversions per arm) instead of p-values, for the summary columns.
  simulated_stream.csv      a simulated monitoring stream with the truth known (is_null column):
                            1,000 one-sided z-tests, 10% non-null with mean 3.

Run: python3 replay_data/make_demo_data.py   (rewrites both files identically every time)
"""
import math
import os
import random

HERE = os.path.dirname(os.path.abspath(__file__))
TEAMS = {
    "checkout": ["conversion", "basket_value", "payment_errors"],
    "search": ["click_through", "zero_result_rate", "add_to_cart"],
    "recommendations": ["click_through", "items_per_order"],
    "mobile-app": ["day7_retention", "crash_free_sessions", "conversion"],
    "pricing": ["revenue_per_visitor", "conversion"],
    "email": ["open_rate", "unsubscribe_rate"],
}


def normal(rng):
    """Box-Muller transform of two uniforms (Box & Muller 1958)."""
    u1 = 1.0 - rng.random()
    u2 = rng.random()
    return math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


def upper_p(z):
    """One-sided p-value 1 - Phi(z) = erfc(z / sqrt(2)) / 2."""
    return 0.5 * math.erfc(z / math.sqrt(2.0))


def two_sided_p(z):
    return math.erfc(abs(z) / math.sqrt(2.0))


def experiments(rng):
    rows = []
    start_day = 19723  # 2024-01-01 as days since 1970-01-01
    teams = sorted(TEAMS)
    for n in range(1, 421):
        team = teams[rng.randrange(len(teams))]
        metric = TEAMS[team][rng.randrange(len(TEAMS[team]))]
        day = start_day + int(rng.random() * 731)
        seconds = int(rng.random() * 86400)
        real = rng.random() < 0.12
        shift = (2.2 + 1.3 * rng.random()) * (1 if rng.random() < 0.85 else -1) if real else 0.0
        z = shift + normal(rng)
        rows.append((day * 86400 + seconds, "LO-%04d" % n, team, metric, two_sided_p(z)))
    return rows


def iso(ts):
    days, secs = divmod(ts, 86400)
    # civil_from_days (proleptic Gregorian)
    z = days + 719468
    era = (z if z >= 0 else z - 146096) // 146097
    doe = z - era * 146097
    yoe = (doe - doe // 1460 + doe // 36524 - doe // 146096) // 365
    y = yoe + era * 400
    doy = doe - (365 * yoe + yoe // 4 - yoe // 100)
    mp = (5 * doy + 2) // 153
    d = doy - (153 * mp + 2) // 5 + 1
    m = mp + 3 if mp < 10 else mp - 9
    y += m <= 2
    return "%04d-%02d-%02dT%02d:%02d:%02dZ" % (y, m, d, secs // 3600, secs % 3600 // 60, secs % 60)


def main():
    rng = random.Random(20240101)
    with open(os.path.join(HERE, "larkspur_experiments.csv"), "w", newline="\n") as f:
        f.write("id,team,metric,finished_at,p_value\n")
        for ts, eid, team, metric, p in experiments(rng):  # file order = order of entry, not time
            f.write("%s,%s,%s,%s,%s\n" % (eid, team, metric, iso(ts), repr(p)))
    rng = random.Random(31)
    with open(os.path.join(HERE, "larkspur_summaries.csv"), "w", newline="\n") as f:
        f.write("id,finished_at,control_n,control_conversions,treatment_n,treatment_conversions\n")
        for n in range(1, 61):
            users = 2000 + int(rng.random() * 18000)
            base = 0.03 + 0.04 * rng.random()
            lift = base * (0.15 + 0.15 * rng.random()) if rng.random() < 0.2 else 0.0
            control = sum(1 for _ in range(users) if rng.random() < base)
            treatment = sum(1 for _ in range(users) if rng.random() < base + lift)
            f.write("LS-%03d,2025-%02d-%02d,%d,%d,%d,%d\n" % (n, 1 + (n - 1) // 5, 1 + (n * 7) % 28,
                                                              users, control, users, treatment))
    rng = random.Random(7)
    with open(os.path.join(HERE, "simulated_stream.csv"), "w", newline="\n") as f:
        f.write("id,finished_at,p_value,is_null\n")
        for t in range(1, 1001):
            nonnull = rng.random() < 0.10
            z = (3.0 if nonnull else 0.0) + normal(rng)
            f.write("sim-%04d,%d,%s,%d\n" % (t, t, repr(upper_p(z)), 0 if nonnull else 1))


if __name__ == "__main__":
    main()
