#!/usr/bin/env python3
"""Times `gliss analyze` and the numpy/scipy peer (peer.py) on the same
recording in one run and prints the figures and their ratios.

    python3 benches/peer/compare.py [--gliss target/release/gliss] [--runs 7]

It makes the case of docs/performance.md (a 5 s, 48 kHz sweep with a 3 s
tail through the virtual system) in a temporary folder. CPU times are the
children's user + system time from wait4 (microseconds), the best of the
runs; the gliss and peer runs are pinned to one core for the CPU figures.
Needs python3 with numpy and scipy.
"""
import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))


def timed(cmd, cwd, pin):
    """(wall s, CPU s, max RSS kB, stdout) of one run of cmd."""
    def preexec():
        if pin is not None:
            os.sched_setaffinity(0, {pin})
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
                         preexec_fn=preexec)
    out = p.stdout.read()
    _, status, ru = os.wait4(p.pid, 0)
    wall = time.perf_counter() - t0
    if status != 0:
        sys.exit(f"{' '.join(cmd)} failed")
    return wall, ru.ru_utime + ru.ru_stime, ru.ru_maxrss, out.decode()


def best(cmd, cwd, runs, pin, clean=None):
    res = []
    for _ in range(runs):
        if clean:
            shutil.rmtree(os.path.join(cwd, clean), ignore_errors=True)
        res.append(timed(cmd, cwd, pin))
    return min(r[0] for r in res), min(r[1] for r in res), min(r[2] for r in res), res[-1][3]


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--gliss", default=os.path.join(HERE, "..", "..", "target", "release", "gliss"))
    ap.add_argument("--runs", type=int, default=7)
    a = ap.parse_args()
    g = os.path.abspath(a.gliss)
    with tempfile.TemporaryDirectory() as w:
        subprocess.run([g, "sweep", "--out", "sweep.wav", "--length", "5", "--tail", "3"],
                       cwd=w, check=True, stdout=subprocess.DEVNULL)
        subprocess.run([g, "demo", "--single", "--out", "case", "--length", "5", "--tail", "3",
                        "--no-plots"], cwd=w, check=True, stdout=subprocess.DEVNULL)
        rate = json.load(open(os.path.join(w, "sweep.json")))["sweep"]["rate_constant_s"]
        analyze = [g, "analyze", "case/recording.wav", "--sweep", "sweep.wav", "--out", "a"]
        g1 = best(analyze + ["--no-plots"], w, a.runs, 0, "a")
        g2n = best(analyze + ["--no-plots"], w, a.runs, None, "a")
        g2p = best(analyze, w, a.runs, None, "a")
        peer = [sys.executable, os.path.join(HERE, "peer.py"), "case/recording.wav", "sweep.wav",
                str(rate)]
        p1 = best(peer, w, a.runs, 0)
        inproc = min(
            float(timed(peer, w, 0)[3].rsplit("peer_s=", 1)[1]) for _ in range(a.runs)
        )
    print(f"gliss analyze --no-plots, whole process, one core: CPU {g1[1]*1e3:.0f} ms, wall {g1[0]*1e3:.0f} ms, peak RSS {g1[2]/1024:.0f} MB")
    print(f"gliss analyze, whole process wall on 2 cores: {g2n[0]*1e3:.0f} ms without plots, {g2p[0]*1e3:.0f} ms with ({(g2p[0]-g2n[0])*1e3:+.0f} ms)")
    print(f"peer (numpy/scipy), analysis in-process, one core: {inproc*1e3:.0f} ms")
    print(f"peer, whole process (interpreter, imports, reading), one core: CPU {p1[1]*1e3:.0f} ms, wall {p1[0]*1e3:.0f} ms")
    print(f"ratio peer in-process / gliss whole-process CPU: {inproc/g1[1]:.1f}x")
    print(f"ratio whole process CPU: {p1[1]/g1[1]:.1f}x")


if __name__ == "__main__":
    main()
