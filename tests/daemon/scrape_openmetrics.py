#!/usr/bin/env python3
"""Scrapes nightjar's metrics endpoint with urllib (an HTTP client independent of ours),
checks the text line by line against the OpenMetrics 1.0 text format, and prints the
samples as JSON {"<name>{<labels>}": value, ...} on stdout.

The rules checked are those of the OpenMetrics 1.0 specification (ABNF and the sections
on counters, gauges and histograms, from memory): the body ends with "# EOF\\n"; each
family has one TYPE line before its samples and its samples are not interleaved with
another family's; UNIT is a suffix of the family name; counters are written as _total,
gauges bare, histograms as _bucket{le=...} (le increasing, ending at "+Inf", counts
cumulative), _sum and _count (equal to the +Inf bucket); label values are escaped
strings; values are numbers. It also checks that another path answers 404.

Usage: scrape_openmetrics.py http://127.0.0.1:PORT
Exit 0 with the JSON when everything holds, 1 with the first violation on stderr.
"""
import json
import math
import re
import sys
import urllib.error
import urllib.request

CONTENT_TYPE = "application/openmetrics-text; version=1.0.0; charset=utf-8"
NAME = r"[a-zA-Z_:][a-zA-Z0-9_:]*"
LABEL_NAME = r"[a-zA-Z_][a-zA-Z0-9_]*"
ESCAPED = r'(?:[^"\\\n]|\\\\|\\"|\\n)*'
LABEL = rf'{LABEL_NAME}="{ESCAPED}"'
SAMPLE = re.compile(rf"^({NAME})(\{{(?:{LABEL}(?:,{LABEL})*)?\}})? (\S+)$")
DESCRIPTOR = re.compile(rf"^# (TYPE|HELP|UNIT) ({NAME})(?: (.*))?$")
TYPES = {"counter", "gauge", "histogram", "gaugehistogram", "stateset", "info", "summary",
         "unknown"}
SUFFIXES = {"counter": {"_total", "_created"}, "gauge": {""},
            "histogram": {"_bucket", "_sum", "_count", "_created"}}


class Bad(Exception):
    pass


def number(text, where):
    if text in ("+Inf", "-Inf", "NaN"):
        return float(text.replace("Inf", "inf").replace("NaN", "nan"))
    if not re.fullmatch(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?", text):
        raise Bad(f"{where}: '{text}' is not a number")
    return float(text)


def check(text):
    if not text.endswith("# EOF\n"):
        raise Bad("body does not end with '# EOF\\n'")
    lines = text[:-1].split("\n")
    if lines.count("# EOF") != 1:
        raise Bad("'# EOF' must appear once, as the last line")
    families = {}  # name -> {"type":..., "unit":..., "help": bool, "closed": bool}
    current = None
    samples = {}
    histogram = {}  # family -> {"le": [...], "counts": [...], "sum":, "count":}
    for number_, line in enumerate(lines[:-1], start=1):
        where = f"line {number_} '{line}'"
        if line.startswith("#"):
            m = DESCRIPTOR.match(line)
            if not m:
                raise Bad(f"{where}: not a TYPE, HELP or UNIT line")
            kind, name, rest = m.group(1), m.group(2), m.group(3) or ""
            if name != current:
                if name in families:
                    raise Bad(f"{where}: family {name} interleaved with another")
                families[name] = {"type": None, "unit": None, "help": False, "samples": 0}
                current = name
            fam = families[name]
            if fam["samples"]:
                raise Bad(f"{where}: descriptor after the family's samples")
            if kind == "TYPE":
                if fam["type"] is not None or rest not in TYPES:
                    raise Bad(f"{where}: second TYPE or unknown type")
                fam["type"] = rest
            elif kind == "UNIT":
                if fam["unit"] is not None or not name.endswith("_" + rest):
                    raise Bad(f"{where}: UNIT must be a suffix of the family name")
                fam["unit"] = rest
            else:
                if fam["help"] or not re.fullmatch(r'(?:[^"\\\n]|\\\\|\\"|\\n)*', rest):
                    raise Bad(f"{where}: second HELP or bad escaping")
                fam["help"] = True
            continue
        m = SAMPLE.match(line)
        if not m:
            raise Bad(f"{where}: not a sample line")
        name, labels, value = m.group(1), m.group(2) or "", m.group(3)
        if current is None or not name.startswith(current):
            raise Bad(f"{where}: sample outside its family ({current})")
        fam = families[current]
        if fam["type"] is None:
            raise Bad(f"{where}: sample before the family's TYPE")
        suffix = name[len(current):]
        if suffix not in SUFFIXES.get(fam["type"], {""}):
            raise Bad(f"{where}: suffix '{suffix}' not allowed for a {fam['type']}")
        fam["samples"] += 1
        v = number(value, where)
        key = name + labels
        if key in samples:
            raise Bad(f"{where}: duplicate sample")
        samples[key] = v
        if fam["type"] == "counter" and (v < 0 or math.isnan(v)):
            raise Bad(f"{where}: counter below zero or NaN")
        if fam["type"] == "histogram":
            h = histogram.setdefault(current, {"le": [], "counts": [], "sum": None,
                                               "count": None})
            if suffix == "_bucket":
                le = re.fullmatch(r'\{le="([^"]*)"\}', labels)
                if not le:
                    raise Bad(f"{where}: bucket without its le label")
                h["le"].append(number(le.group(1), where))
                if not re.fullmatch(r"\d+", value):
                    raise Bad(f"{where}: bucket count must be an integer")
                h["counts"].append(int(value))
            elif suffix == "_sum":
                h["sum"] = v
            elif suffix == "_count":
                h["count"] = v
    for name, fam in families.items():
        if fam["type"] is None:
            raise Bad(f"family {name} has no TYPE")
    for name, h in histogram.items():
        if not h["le"] or h["le"][-1] != math.inf:
            raise Bad(f"histogram {name}: last bucket must be le=\"+Inf\"")
        if any(b <= a for a, b in zip(h["le"], h["le"][1:])):
            raise Bad(f"histogram {name}: le thresholds must increase")
        if any(b < a for a, b in zip(h["counts"], h["counts"][1:])):
            raise Bad(f"histogram {name}: bucket counts must be cumulative")
        if h["count"] is None or h["sum"] is None or h["count"] != h["counts"][-1]:
            raise Bad(f"histogram {name}: _count must equal the +Inf bucket; _sum present")
    return samples


def main():
    base = sys.argv[1]
    try:
        with urllib.request.urlopen(base + "/metrics", timeout=5) as response:
            if response.status != 200:
                raise Bad(f"status {response.status}")
            content_type = response.headers.get("Content-Type")
            if content_type != CONTENT_TYPE:
                raise Bad(f"Content-Type '{content_type}'")
            body = response.read().decode("utf-8")
        samples = check(body)
        try:
            urllib.request.urlopen(base + "/elsewhere", timeout=5)
            raise Bad("/elsewhere did not answer 404")
        except urllib.error.HTTPError as e:
            if e.code != 404:
                raise Bad(f"/elsewhere answered {e.code}, not 404")
    except (Bad, OSError, UnicodeDecodeError) as e:
        print(f"scrape_openmetrics: {e}", file=sys.stderr)
        return 1
    json.dump(samples, sys.stdout)
    print()
    return 0


if __name__ == "__main__":
    sys.exit(main())
