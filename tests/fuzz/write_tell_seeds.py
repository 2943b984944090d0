#!/usr/bin/env python3
"""Writes the seed inputs of the tell fuzz target (corpus/tell/seed-*) in the byte format that
tell_driver.cc reads. Rerun after changing that format:  tests/fuzz/write_tell_seeds.py

Design header (9 bytes): parameter mask (1 real, 2 log real, 4 integer, 8 categorical, 16 flag),
objective (0 lower, 1 higher, 2 grades), population {0,2,3,4,6}, expected workers {0,1,3}, staleness
limit {0,1,2,3}, budget {0,0,8,20}, target (3 = set), bits (1 restarts, 2-3 lease {0,10,60,3600} s,
4-5 Gaussian model), seed. Then operations, each an op byte (mod 8) and its own bytes."""
import os

ASK, TELL, COHORT, RENEW, SWEEP, PHASE, LIST, RESTART = range(8)


def header(mask=31, objective=0, population=0, workers=0, staleness=0, budget=0, target=0, bits=0, seed=1):
    return bytes([mask, objective, population, workers, staleness, budget, target, bits, seed])


def ask(count=4, worker=0, lease=0, request=0):
    return bytes([ASK, count - 1, worker, lease, request])


def score(trial, index):  # index into the driver's score table; 13 = eight raw bytes follow
    return bytes([trial, 0, index])


def grade(trial, label):
    return bytes([trial, 3, label])


def infeasible(trial):
    return bytes([trial, 4])


def void(trial):
    return bytes([trial, 5])


def unset(trial):
    return bytes([trial, 6])


def noted(trial, note):  # note index: {0, 10, 4096, 4097} bytes
    return bytes([trial, 7, note])


def tell(*reports, worker=0):
    return bytes([TELL, worker, len(reports)]) + b"".join(reports)


def cohort(base=0, step=2, infeasible_every=0):
    return bytes([COHORT, base, step, infeasible_every])


def renew(*trials, worker=0, lease=0):
    return bytes([RENEW, 0, len(trials) - 1]) + bytes(trials) + bytes([worker, lease])


def sweep(advance, sweep_now=True):
    return bytes([SWEEP, advance, 0 if sweep_now else 1])


def phase(command):  # 1 pause, 2 resume, 3 finish, 0 and 4 invalid
    return bytes([PHASE, command])


def list_trials(size=2, state=0, token=0):
    return bytes([LIST, size, state, token])


SEEDS = {
    # Every parameter kind, scores: cohorts, duplicates and conflicts, lapses, renewals, listings.
    "seed-mixed-scores": header(mask=31, population=1)
    + ask(3, worker=0) + tell(score(0, 1), score(1, 2), score(0, 1), score(0, 2))
    + cohort(1, 2) + cohort(0, 3, 2) + sweep(7) + renew(2, worker=0, lease=3) + list_trials(1)
    + list_trials(3, 2) + RESTART.to_bytes(1, "big") + cohort(2, 4) + list_trials(0, 0, 2),
    # A grade scale with a target grade reached by a cohort.
    "seed-graded-target": header(mask=7, objective=2, population=2, target=3, bits=2)
    + cohort(0, 2) + cohort(1, 3) + ask(2) + tell(grade(4, 3), grade(5, 5), grade(6, 4)) + phase(2),
    # A budget of 8 informative outcomes taken up by outstanding trials, then by reports.
    "seed-budget": header(mask=5, population=1, budget=2)
    + ask(6) + ask(6) + tell(score(0, 0), void(1), infeasible(2)) + ask(8) + cohort(0, 2) + cohort(0, 2),
    # A plateau: every cohort tied, until EqualValues converges and the campaign restarts.
    "seed-plateau-restarts": header(mask=16, population=1, bits=1)
    + b"".join(cohort(0, 0) for _ in range(40)) + list_trials(2, 3),
    # Outcomes the service must refuse: NaN, infinities, raw bit patterns, no outcome, long notes,
    # grades in a score campaign, no reports, a worker name too long.
    "seed-refused-outcomes": header(mask=3, objective=1)
    + ask(4) + tell(score(0, 9)) + tell(score(1, 10)) + tell(score(2, 11))
    + tell(bytes([3, 0, 13]) + bytes([0x7F, 0xF8, 0, 0, 0, 0, 0, 1]))
    + tell(unset(0)) + tell(noted(1, 3)) + tell(noted(1, 2)) + tell(grade(2, 1)) + tell()
    + tell(score(3, 3), worker=3) + tell(score(250, 1), score(251, 1)),
    # Pause, resume, finish, with asks and tells in between; an invalid command.
    "seed-phases": header(mask=9, objective=0, population=1)
    + ask(2) + phase(1) + ask(1) + tell(score(0, 2)) + phase(1) + phase(2) + ask(1) + phase(0) + phase(3)
    + ask(1) + phase(2) + tell(score(1, 3)),
    # Short leases: lapses, late reports, renewal of a lapsed trial, requests retried by id.
    "seed-lapses": header(mask=6, bits=2, staleness=1)
    + ask(3, worker=1, request=2) + ask(3, worker=1, request=2) + sweep(5) + tell(score(0, 1))
    + renew(1, worker=0) + renew(1, worker=1, lease=2) + sweep(4, sweep_now=False) + tell(score(1, 4))
    + cohort(0, 2) + sweep(8) + list_trials(0, 3),
}

if __name__ == "__main__":
    out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "corpus", "tell")
    os.makedirs(out, exist_ok=True)
    for name, data in SEEDS.items():
        with open(os.path.join(out, name), "wb") as f:
            f.write(data)
    print(f"wrote {len(SEEDS)} seeds to {out}")
