#!/usr/bin/env python3
"""Run one command under GNU time -v and sample its memory while it runs.

Usage: measure.py OUT.json -- COMMAND [ARGS...]

Starts `/usr/bin/time -v -o TIME.txt COMMAND...`, finds the command (time's
child) and reads /proc/PID/status every 10 ms, keeping the largest VmHWM,
VmRSS, RssAnon and RssFile seen. Writes OUT.json with: wall_s, user_s, sys_s,
maxrss_kib (from time -v), the sampled peaks in KiB, the exit code, the load
average before the run and the number of samples taken. The sampled peaks can
miss a spike shorter than the interval; time's maxrss cannot.
Standard library only.
"""
import json
import re
import subprocess
import sys
import time


def status_fields(pid):
    out = {}
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                k, _, v = line.partition(":")
                if k in ("VmHWM", "VmRSS", "RssAnon", "RssFile", "RssShmem"):
                    out[k] = int(v.split()[0])
    except (FileNotFoundError, ProcessLookupError, ValueError):
        pass
    return out


def child_of(pid):
    try:
        with open(f"/proc/{pid}/task/{pid}/children") as f:
            kids = f.read().split()
        return int(kids[0]) if kids else None
    except (FileNotFoundError, ValueError):
        return None


def main():
    out_json = sys.argv[1]
    assert sys.argv[2] == "--"
    cmd = sys.argv[3:]
    time_txt = out_json + ".time.txt"
    with open("/proc/loadavg") as f:
        load = " ".join(f.read().split()[:3])
    t0 = time.monotonic()
    p = subprocess.Popen(["/usr/bin/time", "-v", "-o", time_txt] + cmd,
                         stdout=subprocess.DEVNULL)
    peaks = {}
    samples = 0
    target = None
    while p.poll() is None:
        if target is None:
            target = child_of(p.pid)
        if target is not None:
            s = status_fields(target)
            if s:
                samples += 1
                for k, v in s.items():
                    peaks[k] = max(peaks.get(k, 0), v)
        time.sleep(0.01)
    wall_outer = time.monotonic() - t0
    text = open(time_txt).read()

    def g(key):
        m = re.search(re.escape(key) + r":\s*(.*)", text)
        return m.group(1).strip() if m else "0"

    parts = g("Elapsed (wall clock) time (h:mm:ss or m:ss)").split(":")
    wall = sum(float(v) * 60 ** i for i, v in enumerate(reversed(parts)))
    m = re.search(r"Exit status:\s*(\d+)", text)
    res = {
        "cmd": cmd,
        "exit": int(m.group(1)) if m else p.returncode,
        "wall_s": wall,
        "wall_outer_s": wall_outer,
        "user_s": float(g("User time (seconds)")),
        "sys_s": float(g("System time (seconds)")),
        "maxrss_kib": int(g("Maximum resident set size (kbytes)")),
        "peak_kib": peaks,
        "samples": samples,
        "load_before": load,
    }
    with open(out_json, "w") as f:
        json.dump(res, f, indent=1)


if __name__ == "__main__":
    main()
