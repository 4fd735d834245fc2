#!/usr/bin/env python3
"""numpy/scipy baseline of the synchroniser's search, for benches/sync_vs_scipy.sh.

Takes in: a raw cf32_le capture, its search reference (raw cf32_le, the trimmed shaped
training that `Synchroniser::reference()` returns, written by `cargo bench --bench sync`
in file mode as CAPTURE.ref.cf32) and CAPTURE.ref.json (head, threshold, min_spacing).
Gives out: one JSON line on stdout: method, workers, samples, wall and CPU seconds of
the search alone (correlation, normalised metric, threshold, peak merging; the capture
is read through np.memmap and the page cache is expected warm), and the detected
first-symbol instants.

The metric is the one iqaudit computes (src/sync/mod.rs):
    rho[n] = |sum_m conj(r[m]) x[n+m]|^2 / (sum|r|^2 * sum_m |x[n+m]|^2)
over the capture padded virtually with `head` zeros at both ends, so that lag n is the
first training symbol's instant; the window energy comes from running sums in float64.
Candidates rho >= threshold are merged greedily (strongest first, ties to the earlier
lag, nothing kept within min_spacing - 1 of a kept peak).

Methods:
  oaconvolve  scipy.signal.oaconvolve(chunk, conj(r[::-1]), mode="valid") per chunk
              (scipy picks the block size; single-threaded).
  os          hand-written overlap-save: blocks of --nfft samples stepping nfft-L+1,
              scipy.fft.fft / ifft over a 2-D batch of blocks with workers=--workers
              (scipy.fft's own threads), times the precomputed conj(R) spectrum.
Run: python3 benches/baseline/search.py CAPTURE [--method os] [--nfft 8192] [--workers 2]
"""
import argparse
import bisect
import json
import time

import numpy as np
import scipy
import scipy.fft
import scipy.signal


def merge(cand_lag, cand_rho, spacing):
    order = np.lexsort((cand_lag, -cand_rho))
    kept = []
    for i in order:
        lag = int(cand_lag[i])
        j = bisect.bisect_left(kept, lag - spacing + 1)
        if j < len(kept) and kept[j] <= lag + spacing - 1:
            continue
        bisect.insort(kept, lag)
    return kept


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("capture")
    ap.add_argument("--method", choices=["oaconvolve", "os"], default="os")
    ap.add_argument("--nfft", type=int, default=8192)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--chunk", type=int, default=1 << 22, help="lags per chunk")
    args = ap.parse_args()

    meta = json.load(open(args.capture + ".ref.json"))
    ref = np.fromfile(args.capture + ".ref.cf32", dtype="<c8")
    head, thr, spacing = meta["head"], meta["threshold"], meta["min_spacing"]
    L = len(ref)
    ref_energy = float(np.sum(np.abs(ref.astype(np.complex128)) ** 2))
    x = np.memmap(args.capture, dtype="<c8", mode="r")
    total = len(x)
    lags = total + 2 * head - L + 1

    if args.method == "os":
        nfft = args.nfft
        if nfft < L:
            raise SystemExit("--nfft must be at least the reference length")
        step = nfft - L + 1
        rspec = np.conj(scipy.fft.fft(ref, nfft)).astype(np.complex64)
        chunk = max(step, (args.chunk // step) * step)
    else:
        kernel = np.conj(ref[::-1])
        chunk = args.chunk

    t0w, t0c = time.perf_counter(), time.process_time()
    cand_lag, cand_rho = [], []
    a = 0
    while a < lags:
        c = min(chunk, lags - a)
        if args.method == "os":
            nblk = -(-c // step)
            span = nblk * step + L - 1
        else:
            span = c + L - 1
        # virtual positions a .. a+span  <->  capture a-head ..
        lo, hi = a - head, a - head + span
        seg = np.zeros(span, dtype=np.complex64)
        s0, s1 = max(lo, 0), min(hi, total)
        if s0 < s1:
            seg[s0 - lo:s1 - lo] = x[s0:s1]
        if args.method == "os":
            blocks = np.lib.stride_tricks.as_strided(
                seg, shape=(nblk, nfft), strides=(step * seg.itemsize, seg.itemsize))
            spec = scipy.fft.fft(blocks, axis=1, workers=args.workers)
            spec *= rspec
            out = scipy.fft.ifft(spec, axis=1, workers=args.workers, overwrite_x=True)
            corr = out[:, :step].reshape(-1)[:c]
        else:
            corr = scipy.signal.oaconvolve(seg, kernel, mode="valid")
        p = seg.real.astype(np.float64) ** 2 + seg.imag.astype(np.float64) ** 2
        cs = np.empty(span + 1)
        cs[0] = 0.0
        np.cumsum(p, out=cs[1:])
        energy = cs[L:L + c] - cs[:c]
        num = corr.real.astype(np.float64) ** 2 + corr.imag.astype(np.float64) ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = np.where(energy > 0, num / (ref_energy * energy), 0.0)
        idx = np.nonzero(rho >= thr)[0]
        cand_lag.append(idx + a)
        cand_rho.append(rho[idx])
        a += c
    lag_arr = np.concatenate(cand_lag) if cand_lag else np.array([], dtype=np.int64)
    rho_arr = np.concatenate(cand_rho) if cand_rho else np.array([])
    starts = merge(lag_arr, rho_arr, spacing)
    wall, cpu = time.perf_counter() - t0w, time.process_time() - t0c
    print(json.dumps({
        "method": args.method,
        "nfft": args.nfft if args.method == "os" else None,
        "workers": args.workers if args.method == "os" else 1,
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "samples": int(total),
        "wall_s": wall,
        "cpu_s": cpu,
        "bursts": len(starts),
        "starts": starts,
    }))


if __name__ == "__main__":
    main()
