#!/usr/bin/python3
"""Independent numpy transcription of the CMA-ES update, used to cross-check ogive's C++ CMA-ES.

Equations from N. Hansen, "The CMA Evolution Strategy: A Tutorial", arXiv:1604.00772 (2016).

Usage:
    /usr/bin/python3 cma_reference_check.py TRACE_PROGRAM [--tolerance 1e-10]
    /usr/bin/python3 cma_reference_check.py --self-test

TRACE_PROGRAM is run without arguments and must print one JSON document
{"traces": [{"name", "n", "lambda", "diagonal", "initial": {"mean", "sigma"},
             "steps": [{"x", "f", "after": {"mean", "sigma", "p_sigma", "p_c", "C"}}]}]}.
Starting from "initial" (C = I, p_sigma = p_c = 0, g = 0) this script replays every step's samples x
and values f through its own update and compares its own state (never reset to the program's) with
"after". Exit status 0 if every full-covariance trace agrees, 1 on the first disagreement or on a
malformed / empty document.
"""

import argparse
import json
import math
import subprocess
import sys

import numpy as np


class CheckFailure(Exception):
    """A trace disagreed with this transcription, or the trace document is unusable."""


# ---------------------------------------------------------------------------------------------
# Strategy parameters
# ---------------------------------------------------------------------------------------------

def default_lambda(n):
    """Default population size lambda = 4 + floor(3 ln n)."""
    return 4 + int(math.floor(3.0 * math.log(n)))


def raw_weights(lam):
    """Raw weights w'_i = ln((lambda + 1)/2) - ln i for i = 1..lambda."""
    i = np.arange(1, lam + 1, dtype=float)
    return math.log((lam + 1) / 2.0) - np.log(i)


def variance_effective(w):
    """Variance effective selection mass (sum w)^2 / sum w^2 of a weight vector."""
    return float(np.sum(w) ** 2 / np.sum(w ** 2))


def chi_n(n):
    """Approximation of E||N(0, I)||: sqrt(n) (1 - 1/(4n) + 1/(21 n^2))."""
    return math.sqrt(n) * (1.0 - 1.0 / (4.0 * n) + 1.0 / (21.0 * n * n))


def strategy_parameters(n, lam):
    """All default strategy parameters for dimension n and population size lambda, as a dict."""
    mu = lam // 2
    w_raw = raw_weights(lam)
    mu_eff = variance_effective(w_raw[:mu])
    mu_eff_minus = variance_effective(w_raw[mu:])

    c_1 = 2.0 / ((n + 1.3) ** 2 + mu_eff)
    c_mu = min(1.0 - c_1, 2.0 * (0.25 + mu_eff + 1.0 / mu_eff - 2.0) / ((n + 2.0) ** 2 + mu_eff))
    c_sigma = (mu_eff + 2.0) / (n + mu_eff + 5.0)
    d_sigma = 1.0 + 2.0 * max(0.0, math.sqrt((mu_eff - 1.0) / (n + 1.0)) - 1.0) + c_sigma
    c_c = (4.0 + mu_eff / n) / (n + 4.0 + 2.0 * mu_eff / n)
    c_m = 1.0

    alpha_minus = min(1.0 + c_1 / c_mu,
                      1.0 + 2.0 * mu_eff_minus / (mu_eff + 2.0),
                      (1.0 - c_1 - c_mu) / (n * c_mu))
    w = final_weights(w_raw, alpha_minus)

    return {
        "n": n, "lambda": lam, "mu": mu, "w_raw": w_raw, "w": w,
        "mu_eff": mu_eff, "mu_eff_minus": mu_eff_minus,
        "c_1": c_1, "c_mu": c_mu, "c_sigma": c_sigma, "d_sigma": d_sigma,
        "c_c": c_c, "c_m": c_m, "alpha_minus": alpha_minus, "chi_n": chi_n(n),
        "eigen_gap": max(1, int(math.floor(1.0 / (10.0 * n * (c_1 + c_mu))))),
    }


def final_weights(w_raw, alpha_minus):
    """Weights w_i: positive ones normalised to sum 1, negative ones to sum -alpha_minus."""
    positive_sum = np.sum(w_raw[w_raw > 0])
    negative_abs_sum = np.sum(np.abs(w_raw[w_raw < 0]))
    w = np.empty_like(w_raw)
    for i, wr in enumerate(w_raw):
        if wr >= 0:
            w[i] = wr / positive_sum
        else:
            w[i] = alpha_minus * wr / negative_abs_sum
    return w


# ---------------------------------------------------------------------------------------------
# Ranking with ties
# ---------------------------------------------------------------------------------------------

def tied_weights(f, rank_weights):
    """Per-sample weight: the average of rank_weights over the positions k_minus+1..k_plus (1-based)."""
    f = np.asarray(f, dtype=float)
    out = np.empty(len(f))
    for i, fi in enumerate(f):
        k_minus = int(np.sum(f < fi))
        k_plus = int(np.sum(f <= fi))
        out[i] = float(np.mean(rank_weights[k_minus:k_plus]))
    return out


# ---------------------------------------------------------------------------------------------
# State and one generation
# ---------------------------------------------------------------------------------------------

class State:
    """Mean m, step size sigma, covariance C, paths p_sigma / p_c, eigensystem B, D and counters."""

    def __init__(self, mean, sigma):
        """Initial state: C = I, p_sigma = p_c = 0, B = D = I, g = g_eig = 0."""
        n = len(mean)
        self.m = np.array(mean, dtype=float)
        self.sigma = float(sigma)
        self.C = np.eye(n)
        self.p_sigma = np.zeros(n)
        self.p_c = np.zeros(n)
        self.B = np.eye(n)
        self.D = np.ones(n)  # diagonal of D, so C = B diag(D)^2 B^T
        self.g = 0
        self.g_eig = 0


def inverse_sqrt_C(state):
    """C^{-1/2} = B D^{-1} B^T from the most recent eigendecomposition."""
    return state.B @ np.diag(1.0 / state.D) @ state.B.T


def h_sigma_indicator(p_sigma, c_sigma, g, n, chi):
    """h_sigma = 1 iff ||p_sigma|| / sqrt(1 - (1 - c_sigma)^(2(g+1))) < (1.4 + 2/(n+1)) chi_n."""
    norm = np.linalg.norm(p_sigma) / math.sqrt(1.0 - (1.0 - c_sigma) ** (2 * (g + 1)))
    return 1.0 if norm < (1.4 + 2.0 / (n + 1.0)) * chi else 0.0


def update(state, params, x, f):
    """Apply one generation of the tutorial update to state, given samples x (lambda x n) and values f."""
    n = params["n"]
    mu_eff = params["mu_eff"]
    c_1, c_mu = params["c_1"], params["c_mu"]
    c_sigma, d_sigma = params["c_sigma"], params["d_sigma"]
    c_c, c_m = params["c_c"], params["c_m"]
    w = params["w"]

    # Tie-aware weights per sample: mean weights use w^+ = max(w, 0), covariance weights the full w.
    w_mean = tied_weights(f, np.maximum(w, 0.0))
    w_cov = tied_weights(f, w)
    # ogive's rule for ties (the tutorial has none): the paths are normalized with the variance-
    # effective selection mass of the weights actually used, 1 / sum_i w_mean_i^2, so that under
    # random selection <y> scaled by it is still N(0, C). Without ties this is mu_eff itself.
    if len(set(f)) < len(f):
        mu_eff = 1.0 / float(np.sum(w_mean ** 2))

    # 1. y_i = (x_i - m) / sigma
    y = (x - state.m) / state.sigma

    # 2. <y> = sum_i w_mean_i y_i ; m <- m + c_m sigma <y>
    y_w = w_mean @ y
    state.m = state.m + c_m * state.sigma * y_w

    # 3. C^{-1/2} from the most recent eigendecomposition
    C_inv_sqrt = inverse_sqrt_C(state)

    # 4. p_sigma <- (1 - c_sigma) p_sigma + sqrt(c_sigma (2 - c_sigma) mu_eff) C^{-1/2} <y>
    state.p_sigma = ((1.0 - c_sigma) * state.p_sigma
                     + math.sqrt(c_sigma * (2.0 - c_sigma) * mu_eff) * (C_inv_sqrt @ y_w))

    # 5. h_sigma
    h_sigma = h_sigma_indicator(state.p_sigma, c_sigma, state.g, n, params["chi_n"])

    # 6. p_c <- (1 - c_c) p_c + h_sigma sqrt(c_c (2 - c_c) mu_eff) <y>
    state.p_c = (1.0 - c_c) * state.p_c + h_sigma * math.sqrt(c_c * (2.0 - c_c) * mu_eff) * y_w

    # 7. w°_i = w_cov_i, rescaled by n / ||C^{-1/2} y_i||^2 where negative
    w_circ = np.empty(len(w_cov))
    for i, wc in enumerate(w_cov):
        if wc >= 0:
            w_circ[i] = wc
        else:
            w_circ[i] = wc * n / float(np.sum((C_inv_sqrt @ y[i]) ** 2))

    # 8. C <- (1 + c_1 delta(h_sigma) - c_1 - c_mu sum_j w_j) C + c_1 p_c p_c^T + c_mu sum_i w°_i y_i y_i^T
    delta_h_sigma = (1.0 - h_sigma) * c_c * (2.0 - c_c)
    rank_one = np.outer(state.p_c, state.p_c)
    rank_mu = (y.T * w_circ) @ y
    state.C = ((1.0 + c_1 * delta_h_sigma - c_1 - c_mu * float(np.sum(w))) * state.C
               + c_1 * rank_one + c_mu * rank_mu)

    # 9. sigma <- sigma exp((c_sigma / d_sigma) (||p_sigma|| / chi_n - 1)); g <- g + 1
    state.sigma = state.sigma * math.exp((c_sigma / d_sigma)
                                         * (np.linalg.norm(state.p_sigma) / params["chi_n"] - 1.0))
    state.g += 1

    # Lazy eigendecomposition C = B D^2 B^T
    if state.g - state.g_eig >= params["eigen_gap"]:
        state.C = (state.C + state.C.T) / 2.0
        eigenvalues, state.B = np.linalg.eigh(state.C)
        if np.min(eigenvalues) <= 0.0:
            raise CheckFailure("covariance lost positive definiteness at generation %d (min eigenvalue %g)"
                               % (state.g, np.min(eigenvalues)))
        state.D = np.sqrt(eigenvalues)
        state.g_eig = state.g


# ---------------------------------------------------------------------------------------------
# Trace checking
# ---------------------------------------------------------------------------------------------

QUANTITIES = ("mean", "sigma", "p_sigma", "p_c", "C")


def relative_error(ours, theirs):
    """||ours - theirs|| / max(1, ||ours||) (Frobenius norm for matrices)."""
    ours = np.asarray(ours, dtype=float)
    theirs = np.asarray(theirs, dtype=float)
    if ours.shape != theirs.shape:
        return math.inf
    err = float(np.linalg.norm(ours - theirs)) / max(1.0, float(np.linalg.norm(ours)))
    return err if math.isfinite(err) else math.inf


def our_quantities(state):
    """The state quantities compared against a trace's "after" record."""
    return {"mean": state.m, "sigma": state.sigma, "p_sigma": state.p_sigma, "p_c": state.p_c,
            "C": state.C}


def as_array(value, shape, what):
    """Convert a JSON value to a float array of the given shape, or fail naming it."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise CheckFailure("%s is not numeric" % what)
    if arr.shape != shape:
        raise CheckFailure("%s has shape %s, expected %s" % (what, arr.shape, shape))
    return arr


def check_trace(trace, tolerance):
    """Replay one trace through this transcription; return (generations, worst error per quantity)."""
    name = trace.get("name", "<unnamed>")
    try:
        n = int(trace["n"])
        lam = int(trace["lambda"])
        initial = trace["initial"]
        steps = trace["steps"]
    except (KeyError, TypeError, ValueError) as e:
        raise CheckFailure("trace %s: missing or bad field %s" % (name, e))
    if n < 1 or lam < 2:
        raise CheckFailure("trace %s: bad n = %d or lambda = %d" % (name, n, lam))
    if not isinstance(steps, list) or len(steps) == 0:
        raise CheckFailure("trace %s: has no steps" % name)

    params = strategy_parameters(n, lam)
    state = State(as_array(initial.get("mean"), (n,), "trace %s: initial mean" % name),
                  float(initial.get("sigma")))
    worst = {q: 0.0 for q in QUANTITIES}

    for gen, step in enumerate(steps, start=1):
        where = "trace %s, generation %d" % (name, gen)
        if not isinstance(step, dict) or "after" not in step:
            raise CheckFailure("%s: step has no 'after' record" % where)
        x = as_array(step.get("x"), (lam, n), where + ": x")
        f = as_array(step.get("f"), (lam,), where + ": f")
        if not np.all(np.isfinite(f)):
            raise CheckFailure("%s: f contains non-finite values" % where)
        update(state, params, x, f)

        after = step["after"]
        ours = our_quantities(state)
        for q in QUANTITIES:
            if q not in after:
                raise CheckFailure("%s: 'after' lacks %s" % (where, q))
            err = relative_error(ours[q], after[q])
            worst[q] = max(worst[q], err)
            if not err <= tolerance:
                raise CheckFailure("%s: %s differs, relative error %.3e > tolerance %.1e"
                                   % (where, q, err, tolerance))
    return len(steps), worst


def run_program(program):
    """Run the trace program with no arguments and parse its stdout as JSON."""
    try:
        proc = subprocess.run([program], stdout=subprocess.PIPE, check=False)
    except OSError as e:
        raise CheckFailure("cannot run trace program %s: %s" % (program, e))
    if proc.returncode != 0:
        raise CheckFailure("trace program %s exited with status %d" % (program, proc.returncode))
    try:
        return json.loads(proc.stdout.decode("utf-8"))
    except (UnicodeDecodeError, ValueError) as e:
        raise CheckFailure("trace program output is not valid JSON: %s" % e)


def check_document(doc, tolerance):
    """Check every trace in a parsed document, printing one line per trace."""
    traces = doc.get("traces") if isinstance(doc, dict) else None
    if not isinstance(traces, list) or len(traces) == 0:
        raise CheckFailure("the trace document contains no traces")
    checked = 0
    for trace in traces:
        if not isinstance(trace, dict):
            raise CheckFailure("a trace entry is not an object")
        name = trace.get("name", "<unnamed>")
        if trace.get("diagonal", False):
            print("%s: skipped (diagonal covariance; only the full-covariance update is checked)" % name)
            continue
        generations, worst = check_trace(trace, tolerance)
        checked += 1
        print("%s: %d generations ok, worst relative error %s"
              % (name, generations, " ".join("%s=%.2e" % (q, worst[q]) for q in QUANTITIES)))
    if checked == 0:
        raise CheckFailure("no full-covariance trace to check (all traces were diagonal)")


# ---------------------------------------------------------------------------------------------
# Self-test of the strategy parameters against computed values
# ---------------------------------------------------------------------------------------------

EXPECTED = {
    2: {"lambda": 6, "chi_n": 1.254273, "mu_eff": 2.028611, "c_sigma": 0.446205, "d_sigma": 1.446205,
        "c_c": 0.624555, "c_1": 0.154815, "c_mu": 0.085593},
    10: {"lambda": 10, "chi_n": 3.084727, "mu_eff": 3.167299, "c_sigma": 0.284429, "d_sigma": 1.284429,
         "c_c": 0.294990, "c_1": 0.015284, "c_mu": 0.023552},
    40: {"lambda": 15, "chi_n": 6.285215, "mu_eff": 4.540915, "c_sigma": 0.132031, "d_sigma": 1.132031,
         "c_c": 0.093009, "c_1": 0.001169, "c_mu": 0.003405},
}


def self_test():
    """Check strategy parameters, weight sums and tie handling; return the number of failures."""
    failures = 0

    def expect(ok, message):
        """Record and print one self-test check."""
        nonlocal failures
        print("%s %s" % ("ok  " if ok else "FAIL", message))
        if not ok:
            failures += 1

    for n, expected in sorted(EXPECTED.items()):
        lam = default_lambda(n)
        expect(lam == expected["lambda"], "n=%d: lambda = %d (expected %d)" % (n, lam, expected["lambda"]))
        p = strategy_parameters(n, lam)
        for key in ("chi_n", "mu_eff", "c_sigma", "d_sigma", "c_c", "c_1", "c_mu"):
            expect(abs(p[key] - expected[key]) <= 5e-6,
                   "n=%d: %s = %.6f (expected %.6f)" % (n, key, p[key], expected[key]))
        w = p["w"]
        positive_sum = float(np.sum(w[w > 0]))
        expect(abs(positive_sum - 1.0) <= 1e-12, "n=%d: positive weights sum to %.15f" % (n, positive_sum))
        expect(int(np.sum(w > 0)) == p["mu"], "n=%d: exactly mu = %d positive weights" % (n, p["mu"]))
        if n in (10, 40):
            total = float(np.sum(w))
            target = -p["c_1"] / p["c_mu"]
            expect(abs(total - target) <= 1e-12,
                   "n=%d: sum of all weights %.12f = -c_1/c_mu = %.12f" % (n, total, target))

    # Ties: tied samples share the average of their rank weights.
    rank_w = np.array([0.4, 0.3, 0.2, 0.1, 0.0, -0.5])
    got = tied_weights([3.0, 1.0, 2.0, 2.0, 5.0, 5.0], rank_w)
    want = np.array([0.1, 0.4, 0.25, 0.25, -0.25, -0.25])
    expect(np.allclose(got, want, rtol=0, atol=1e-15), "tied weights %s" % np.round(got, 6).tolist())
    got = tied_weights([7.0] * 4, np.array([0.5, 0.5, 0.0, 0.0]))
    expect(np.allclose(got, 0.25, rtol=0, atol=1e-15), "all tied: each gets 0.25")

    print("self-test %s" % ("passed" if failures == 0 else "FAILED (%d)" % failures))
    return failures


def main(argv):
    """Command-line entry point."""
    parser = argparse.ArgumentParser(description="Cross-check CMA-ES traces against the tutorial equations.")
    parser.add_argument("trace_program", nargs="?", help="executable that prints the trace JSON")
    parser.add_argument("--tolerance", type=float, default=1e-10, help="max relative error (default 1e-10)")
    parser.add_argument("--self-test", action="store_true", help="check strategy parameters and exit")
    args = parser.parse_args(argv)

    if args.self_test:
        return 0 if self_test() == 0 else 1
    if not args.trace_program:
        parser.error("TRACE_PROGRAM is required unless --self-test is given")
    try:
        check_document(run_program(args.trace_program), args.tolerance)
    except CheckFailure as e:
        print("FAIL: %s" % e, file=sys.stderr)
        return 1
    print("all traces agree within tolerance %.1e" % args.tolerance)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
