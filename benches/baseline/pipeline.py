#!/usr/bin/env python3
"""numpy/scipy baseline of the iqaudit pipeline, for the end-to-end benchmark.

Takes in: a raw cf32_le capture (interleaved little-endian float32 I/Q) and an
iqaudit link profile (JSON) whose training is a PRBS sequence on QPSK and whose
payload is 16-QAM placed after the training (the benchmark's profile,
benches/e2e/profile.json). Gives out: one JSON object on stdout with the burst
start samples found, per-stage CPU/wall times and the mean EVM.

The same stages as `iqaudit analyse`, done the way a competent engineer would
with numpy/scipy, not a port of the Rust code:

1. search: the capture is memory-mapped and processed in chunks; the training is
   shaped with the RRC pulse (same definitions as src/sync/mod.rs: reference cut
   to the training span, capture virtually padded by floor(sps/2) zeros, lag n =
   first-symbol instant); cross-correlation with scipy.signal.oaconvolve
   (overlap-add FFT), window energy from a float64 cumulative sum, the same
   normalised metric rho = |r^H x|^2 / (|r|^2 |x|^2) and the profile's threshold;
   greedy peak merge (strongest first, minimum spacing one frame);
2. per burst: matched filter (np.convolve), symbol-rate sampling at the integer
   instant (no fractional timing search: simpler than iqaudit), CFO from the
   phase advance of sum z_k conj(t_k) between the training's two halves, de-rotation;
3. channel: least-squares fit of the profile's taps over the training with
   numpy.linalg.lstsq;
4. MMSE-DFE design (finite-length, every delay tried, numpy.linalg.solve) and
   the DFE loop: the feed-forward filter vectorised (np.convolve), the
   feedback + slicer recursion in a plain Python loop over Python complex
   numbers with a second-order decision-directed phase loop (the decision
   loop is sequential; numba is not used, it is not
   installed on the benchmark machine);
5. EVM of the equalised payload against its decisions.

It does less than iqaudit per burst (one equaliser instead of four, no
fractional timing, no fine CFO iteration, no traces or report), which favours
the baseline in the ratio.

Install: pip install numpy scipy (measured with numpy 2.4.6, scipy 1.17.1).
Usage: pipeline.py CAPTURE PROFILE.json [--chunk SAMPLES]
"""

import argparse
import cmath
import json
import math
import sys
import time

import numpy as np
import scipy.signal


def prbs_bits(order, tap, seed, n, inverted):
    """Fibonacci LFSR, stage convention of src/signal/prbs.rs: y[m] = y[m-n] ^ y[m-a];
    the first `order` output bits are seed bits order-1 … 0."""
    y = [(seed >> (order - 1 - i)) & 1 for i in range(order)]
    while len(y) < n:
        m = len(y)
        y.append(y[m - order] ^ y[m - tap])
    bits = np.array(y[:n], dtype=np.uint8)
    return bits ^ 1 if inverted else bits


PATTERNS = {"prbs7": (7, 6), "prbs9": (9, 5), "prbs11": (11, 9), "prbs15": (15, 14),
            "prbs23": (23, 18), "prbs31": (31, 28)}


def qpsk(bits):
    b = bits.reshape(-1, 2).astype(np.float64)
    return ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1])) / math.sqrt(2)


def rrc_taps(beta, span, sps):
    """Unit-energy RRC taps over span symbols (half length ceil(span*sps/2))."""
    half = -(-span * sps // 2)
    t = np.arange(-half, half + 1) / sps
    h = np.empty_like(t)
    for i, ti in enumerate(t):
        if abs(ti) < 1e-9:
            h[i] = 1 - beta + 4 * beta / math.pi
        elif abs(1 - (4 * beta * ti) ** 2) < 1e-9 * 8 * beta:
            a = math.pi / (4 * beta)
            h[i] = beta / math.sqrt(2) * ((1 + 2 / math.pi) * math.sin(a) + (1 - 2 / math.pi) * math.cos(a))
        else:
            x = 4 * beta * ti
            h[i] = (math.sin(math.pi * ti * (1 - beta)) + x * math.cos(math.pi * ti * (1 + beta))) / (
                math.pi * ti * (1 - x * x))
    return h / np.sqrt(np.sum(h * h))


def slice16(z):
    """Nearest 16-QAM point (unit mean power) of one Python complex number."""
    s = math.sqrt(10.0)
    re = min(3.0, max(-3.0, 2.0 * math.floor(z.real * s / 2.0) + 1.0))
    im = min(3.0, max(-3.0, 2.0 * math.floor(z.imag * s / 2.0) + 1.0))
    return complex(re / s, im / s)


def mmse_dfe(h, noise_var, nf, nb):
    """Finite-length MMSE-DFE (unit symbol energy), best delay. Returns (w, b, delay, gain)."""
    nu = len(h) - 1
    cols = nf + nu
    hm = np.zeros((nf, cols), dtype=complex)
    for i in range(nf):
        hm[i, i:i + nu + 1] = h
    best = None
    for d in range(cols):
        keep = [j for j in range(cols) if not (d < j <= d + nb)]
        hb = hm[:, keep]
        r = hb @ hb.conj().T + noise_var * np.eye(nf)
        w = np.linalg.solve(r, hm[:, d])
        mse = 1.0 - np.real(np.vdot(hm[:, d], w))
        if best is None or mse < best[0]:
            fb = np.array([np.vdot(w, hm[:, d + j]) if d + j < cols else 0.0 for j in range(1, nb + 1)])
            best = (mse, w, fb, d, np.vdot(w, hm[:, d]))
    _, w, fb, d, gain = best
    return w, fb, d, gain


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("capture")
    ap.add_argument("profile")
    ap.add_argument("--chunk", type=int, default=1 << 22)
    args = ap.parse_args()
    prof = json.load(open(args.profile))
    sps = prof["samples_per_symbol"]
    tr = prof["training"]
    pay = prof["payload"]
    if tr["modulation"] != "qpsk" or tr["sequence"]["kind"] != "prbs" or pay["modulation"] != "16qam" \
            or pay["position"] != "after":
        sys.exit("baseline supports only a PRBS QPSK training and a 16-QAM payload after it")
    order, tap = PATTERNS[tr["sequence"]["pattern"]]
    n_tr = tr["sequence"]["length"]
    inv = tr["sequence"].get("inverted", False)
    training = qpsk(prbs_bits(order, tap, tr["sequence"].get("seed", (1 << order) - 1), 2 * n_tr, inv))
    n_pay = pay["length_symbols"]
    pulse = rrc_taps(prof["pulse"]["rolloff"], prof["pulse"]["span_symbols"], sps)
    d = (len(pulse) - 1) // 2
    half = min(sps // 2, d)
    up = np.zeros(n_tr * sps, dtype=complex)
    up[::sps] = training
    shaped = np.convolve(up, pulse)
    ref_len = (n_tr - 1) * sps + 2 * half + 1
    ref = shaped[d - half:d - half + ref_len].astype(np.complex64)
    ref_energy = float(np.sum(np.abs(ref.astype(np.complex128)) ** 2))
    kernel = np.conj(ref[::-1])
    thr = prof["search"]["threshold"]
    frame = (n_tr + n_pay) * sps
    pre = prof["channel_fit"]["pre_cursor_taps"]
    post = prof["channel_fit"]["post_cursor_taps"]
    nf = prof["equaliser"]["feedforward_taps"]
    nb = prof["equaliser"]["feedback_taps"]

    x = np.memmap(args.capture, dtype=np.complex64, mode="r")
    total = len(x)
    lags = total + 2 * half - ref_len + 1
    t0w, t0c = time.perf_counter(), time.process_time()
    cand_lag, cand_rho = [], []
    a = 0
    while a < lags:
        c = min(args.chunk, lags - a)
        # padded positions a .. a+c+ref_len-1 ↔ capture a-half ..
        lo, hi = a - half, a + c + ref_len - 1 - half
        seg = np.zeros(hi - lo, dtype=np.complex64)
        s0, s1 = max(lo, 0), min(hi, total)
        seg[s0 - lo:s1 - lo] = x[s0:s1]
        corr = scipy.signal.oaconvolve(seg, kernel, mode="valid")
        p = np.abs(seg.astype(np.complex128)) ** 2
        cs = np.concatenate(([0.0], np.cumsum(p)))
        energy = cs[ref_len:] - cs[:-ref_len]
        num = np.abs(corr.astype(np.complex128)) ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = np.where(energy > 0, num / (ref_energy * energy), 0.0)
        idx = np.nonzero(rho >= thr)[0]
        cand_lag.extend((idx + a).tolist())
        cand_rho.extend(rho[idx].tolist())
        a += c
    order_ = sorted(range(len(cand_lag)), key=lambda i: (-cand_rho[i], cand_lag[i]))
    kept = []
    kept_sorted = []  # not needed for speed at these counts; simple scan
    import bisect
    for i in order_:
        lag = cand_lag[i]
        j = bisect.bisect_left(kept_sorted, lag - frame + 1)
        if j < len(kept_sorted) and kept_sorted[j] <= lag + frame - 1:
            continue
        bisect.insort(kept_sorted, lag)
        kept.append(lag)
    starts = kept_sorted
    t1w, t1c = time.perf_counter(), time.process_time()

    margin = nf + nb + pre + post + 4
    evm_num, evm_den, n_sym = 0.0, 0.0, 0
    ntaps = pre + post + 1
    for st in starts:
        k0, k1 = -margin, n_tr + n_pay + margin
        lo = st + k0 * sps - d
        hi = st + (k1 - 1) * sps + d + 1
        seg = np.zeros(hi - lo, dtype=complex)
        s0, s1 = max(lo, 0), min(hi, total)
        seg[s0 - lo:s1 - lo] = x[s0:s1]
        mf = np.convolve(seg, pulse, mode="valid")  # mf[i] ↔ instant lo + d + i
        y = mf[::sps]  # symbol k0 + j
        ytr = y[-k0:-k0 + n_tr]
        pz = ytr * np.conj(training)
        hh = n_tr // 2  # phase advance between the two halves of the training
        w_cfo = np.angle(np.sum(pz[hh:2 * hh]) * np.conj(np.sum(pz[:hh]))) / hh  # rad per symbol
        y = y * np.exp(-1j * w_cfo * np.arange(k0, k1))
        # LS channel: y_k = sum_i h_i t_{k-i}, i = -pre..post, rows with full support.
        rows = np.arange(post, n_tr - pre)
        amat = np.stack([training[rows - i] for i in range(-pre, post + 1)], axis=1)
        h, res, _, _ = np.linalg.lstsq(amat, y[-k0 + rows], rcond=None)
        nv = float(np.sum(np.abs(amat @ h - y[-k0 + rows]) ** 2)) / max(len(rows) - ntaps, 1)
        w, fb, dl, gain = mmse_dfe(h, nv, nf, nb)
        # Feed-forward output for decision on symbol k: sum_i conj(w_i) y[k + dl - i + pre].
        ff = np.convolve(y, np.conj(w))  # ff[n] = sum_i conj(w_i) y[n - i]
        shift = dl - pre
        base = -k0 + n_tr
        ffk = (ff[base + shift:base + shift + n_pay] / gain).tolist()
        fbs = (fb / gain).tolist()
        past = [complex(v) for v in training[::-1][:nb]]  # s_{k-1}, s_{k-2}, …
        err = 0.0
        ph, fr = 0.0, 0.0  # second-order decision-directed phase loop (rad, rad/symbol)
        for z in ffk:
            z *= cmath.exp(-1j * ph)
            for j in range(nb):
                z -= fbs[j] * past[j]
            dec = slice16(z)
            e = z - dec
            pe = (z * dec.conjugate()).imag / (dec.real * dec.real + dec.imag * dec.imag)
            fr += 0.002 * pe
            ph += fr + 0.05 * pe
            err += e.real * e.real + e.imag * e.imag
            past.insert(0, dec)
            past.pop()
        evm_num += err
        evm_den += n_pay
        n_sym += n_pay
    t2w, t2c = time.perf_counter(), time.process_time()
    json.dump({
        "samples": total,
        "bursts": len(starts),
        "start_samples": starts,
        "evm_rms_percent": 100.0 * math.sqrt(evm_num / evm_den) if evm_den else None,
        "symbols": n_sym,
        "search_wall_s": t1w - t0w, "search_cpu_s": t1c - t0c,
        "bursts_wall_s": t2w - t1w, "bursts_cpu_s": t2c - t1c,
    }, sys.stdout)
    print()


if __name__ == "__main__":
    main()
