"""Implied-vol throughput: optbench's vectorised solver against vollib's
``implied_volatility`` called once per option, measured side by side in one run.

Prints medians of several alternating rounds (one solve of the whole set on
optbench's numpy special functions, the same solve handing over to
:mod:`scipy.special`'s compiled ndtr/ndtri/erfcx (``special.PREFER_COMPILED``, opt-in),
then the vollib sample), ns per option for both, the ratio of the medians (target >= 50x) and
the range of the per-round ratios, and the accuracy of both against the vols that
priced the options.

    .venv/bin/python tests/benchmarks/bench_implied_vol.py [n_options]
"""
from __future__ import annotations

import statistics
import sys
import time

import numpy as np
from vollib.black_scholes_merton.implied_volatility import implied_volatility as vollib_iv

from optbench.pricing.bsm import bsm_price
from optbench.pricing.implied import implied_vol_with_status
from timing import figure  # noqa: E402  (tests/benchmarks)


def main(n: int = 100_000, runs: int = 7, vollib_sample: int = 3_000) -> None:
    rng = np.random.default_rng(2015)
    S = 100.0
    t = rng.uniform(1 / 365, 3.0, n)
    r = rng.uniform(0.0, 0.06, n)
    q = rng.uniform(0.0, 0.04, n)
    F = S * np.exp((r - q) * t)
    K = F * np.exp(rng.uniform(np.log(0.5), np.log(2.0), n))
    v = rng.uniform(0.05, 1.5, n)
    call = rng.random(n) < 0.5
    price = bsm_price(S, K, t, r, q, v, call)

    implied_vol_with_status(price[:1000], S, K[:1000], t[:1000], r[:1000], q[:1000],
                            call[:1000])  # warm up
    # vollib: one call per option, on a sample (per-option cost does not depend on n);
    # the two are timed in alternating rounds so that both see the same load on a
    # shared machine
    idx = rng.choice(n, vollib_sample, replace=False)
    flags = np.where(call, "c", "p")
    args = [(float(price[i]), S, float(K[i]), float(t[i]), float(r[i]), float(q[i]),
             flags[i]) for i in idx]
    ref_vol = np.full(vollib_sample, np.nan)
    ours, ref_runs, with_scipy = [], [], []
    cpu = {"ours": [], "scipy": [], "ref": []}   # CPU seconds: steadier under load
    import scipy.special  # noqa: F401  (optbench can hand over to its ufuncs, opt-in)

    from optbench.pricing import special
    for _ in range(runs):
        # the numpy special functions (the default, and the command line's path); then
        # the same solve handing over to scipy.special's ufuncs (PREFER_COMPILED)
        t0, c0 = time.perf_counter(), time.process_time()
        vol, status = implied_vol_with_status(price, S, K, t, r, q, call)
        ours.append((time.perf_counter() - t0) / n)
        cpu["ours"].append((time.process_time() - c0) / n)
        special.PREFER_COMPILED = True
        try:
            t0, c0 = time.perf_counter(), time.process_time()
            vol_sc, _ = implied_vol_with_status(price, S, K, t, r, q, call)
            with_scipy.append((time.perf_counter() - t0) / n)
            cpu["scipy"].append((time.process_time() - c0) / n)
        finally:
            special.PREFER_COMPILED = False
        t0, c0 = time.perf_counter(), time.process_time()
        for j, a in enumerate(args):
            try:
                ref_vol[j] = vollib_iv(*a)
            except Exception:
                ref_vol[j] = np.nan
        ref_runs.append((time.perf_counter() - t0) / vollib_sample)
        cpu["ref"].append((time.process_time() - c0) / vollib_sample)
    ours_ns = statistics.median(ours) * 1e9
    ref_ns = statistics.median(ref_runs) * 1e9
    scipy_ns = statistics.median(with_scipy) * 1e9
    ratios = sorted(r_ / o_ for r_, o_ in zip(ref_runs, ours))
    ratios_sc = sorted(r_ / o_ for r_, o_ in zip(ref_runs, with_scipy))
    cpu_ratio = statistics.median(cpu["ref"]) / statistics.median(cpu["ours"])
    cpu_ratio_sc = statistics.median(cpu["ref"]) / statistics.median(cpu["scipy"])

    well = status == 0
    print(f"implied vol of {n:,} options (strikes 0.5-2x forward, 1 day-3 years, "
          f"vols 5-150%, calls and puts)")
    print(f"  optbench, numpy special    {ours_ns:10.1f} ns/option   median of {runs} runs "
          f"(the default and the command line's path)")
    print(f"  optbench, PREFER_COMPILED  {scipy_ns:10.1f} ns/option   (hands over to "
          f"scipy.special's ndtr/ndtri/erfcx; max |vol diff| {np.nanmax(np.abs(vol_sc - vol)):.1e})")
    print(f"  vollib implied_volatility  {ref_ns:10.1f} ns/option   median of {runs} runs "
          f"of {vollib_sample:,} calls")
    print(f"  ratio, numpy special       {ref_ns / ours_ns:10.1f} x   (target >= 50 x); "
          f"per round {ratios[0]:.1f}-{ratios[-1]:.1f} x")
    print(f"  ratio, PREFER_COMPILED      {ref_ns / scipy_ns:10.1f} x   (target >= 50 x); "
          f"per round {ratios_sc[0]:.1f}-{ratios_sc[-1]:.1f} x")
    print(f"  CPU-time ratios            {cpu_ratio:10.1f} x numpy special, {cpu_ratio_sc:.1f} x "
          f"PREFER_COMPILED (medians of CPU seconds, steadier on a loaded machine)")
    figure("implied vols vs vollib, CPU time", cpu_ratio, "x", 50, better="higher",
           reference="vollib implied_volatility, same options; numpy special functions")
    figure("implied vols vs vollib", ref_ns / ours_ns, "x", 50, better="higher",
           reference="vollib implied_volatility, same options; numpy special functions")
    figure("implied vols vs vollib, scipy.special opted in", ref_ns / scipy_ns, "x", 50,
           better="higher", reference="vollib implied_volatility, same options")
    figure("implied vols: numpy special functions vs scipy.special", ours_ns / scipy_ns,
           "x time", None, reference="same solver with scipy.special ufuncs, same run")
    print(f"  status counts: " + ", ".join(
        f"{k}={int(c)}" for k, c in enumerate(np.bincount(status.ravel())) if c))
    # accuracy on the out-of-the-money elements (in the money the price's rounding
    # limits any method)
    otm = well & np.where(call, K >= F, K < F)
    print(f"  max |vol - true| (OTM)     optbench {np.max(np.abs(vol[otm] - v[otm])):.2e}   "
          f"vollib {np.nanmax(np.abs(ref_vol - v[idx])[otm[idx]]):.2e}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
