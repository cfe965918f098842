#!/usr/bin/env python3
"""Writes the seed corpora of the fuzz targets (go test fuzz v1 files) from the
project's own fixtures: real BIDS event and participants files (testdata/bids,
BIDS example collection), the valid run of testdata/cmd and the reader fixtures
of testdata/roi. Run from the repository root: python3 testdata/fuzz-seeds.py"""
import glob
import os


def go_bytes(data):
    out = []
    for b in data:
        c = chr(b)
        if c == "\\":
            out.append("\\\\")
        elif c == '"':
            out.append('\\"')
        elif c == "\n":
            out.append("\\n")
        elif c == "\t":
            out.append("\\t")
        elif c == "\r":
            out.append("\\r")
        elif 32 <= b < 127:
            out.append(c)
        else:
            out.append("\\x%02x" % b)
    return '[]byte("' + "".join(out) + '")'


def write(pkg, target, name, data, extra=()):
    d = os.path.join(pkg, "testdata", "fuzz", target)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, "seed-" + name), "w") as f:
        f.write("go test fuzz v1\n" + go_bytes(data) + "\n")
        for e in extra:
            f.write(e + "\n")


def read(p):
    with open(p, "rb") as f:
        return f.read()[:20000]  # keep seeds small


for p in sorted(glob.glob("testdata/bids/**/*_events.tsv", recursive=True)):
    write("roi", "FuzzParseEvents", os.path.basename(p), read(p))
write("roi", "FuzzParseEvents", "valid-run", read("testdata/cmd/valid-run/sub01_events.tsv"))
for p in ["testdata/cmd/valid-run/sub01_signals.csv", "testdata/roi/signals_clean.csv", "testdata/roi/signals_bom_crlf.csv"]:
    for allow in ("false", "true"):
        write("roi", "FuzzParseNumeric", os.path.basename(p) + "-" + allow, read(p), ["bool(%s)" % allow])
write("roi", "FuzzParseConfounds", "valid-run", read("testdata/cmd/valid-run/sub01_confounds.csv"))
for p in ["testdata/cmd/valid-run/study.csv"] + sorted(glob.glob("testdata/roi/study/*.csv")):
    write("roi", "FuzzParseStudy", os.path.basename(os.path.dirname(p)) + "-" + os.path.basename(p), read(p))
for p in sorted(glob.glob("testdata/bids/**/participants.tsv", recursive=True)):
    write("roi", "FuzzParseParticipants", p.split("/")[2] + "-participants.tsv", read(p))
for i, e in enumerate(["order = ordered - jumbled", "viewing = 0.5*ordered + 0.5*jumbled", 'gain = "parametric gain" - loss', "cue:rt", "tap:bin:3 - tap:bin:0"]):
    d = os.path.join("fit", "testdata", "fuzz", "FuzzParseContrast")
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, "seed-%d" % i), "w") as f:
        f.write('go test fuzz v1\nstring("%s")\n' % e.replace('"', '\\"'))
