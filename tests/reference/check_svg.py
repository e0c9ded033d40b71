#!/usr/bin/python3
"""Reads the line chart spar writes with python's own XML parser and checks it against the
data it was drawn from.

Usage: /usr/bin/python3 check_svg.py PATH_TO_SPAR_PICTURE_DUMP

spar_picture_dump (tests/picture_dump.cpp) writes the chart and, beside it, the data as JSON
(titles with XML special characters and non-ASCII text, NaN and infinite values, an empty
series, a series of one point). Checks:
- The file is well-formed XML (xml.etree.ElementTree, XML 1.0) with an <svg> root in the SVG
  namespace http://www.w3.org/2000/svg (SVG 1.1, W3C) whose width and height match its viewBox.
- Every title, axis label and series name reads back exactly as given (so escaping is right).
- Ticks (per panel): equally spaced values, the step 1, 2 or 5 times a power of ten (the
  1-2-5 series, common practice for chart scales), every tick a multiple of the step; the x
  ticks cover the finite x of all panels, the y ticks the finite y of their panel; at most 8
  x and 6 y intervals (the limits plots.cpp documents), and the next smaller 1-2-5 step would
  need more; tick positions are an affine function of the tick values.
- Series: each run of consecutive points with finite x and y is one polyline (or, for a run
  of one point, one circle), in order; every vertex lies where the affine maps read off the
  ticks put the data point, within 0.02 px (coordinates are printed with 2 decimals), and
  inside the panel's frame.
- No attribute holds "nan" or "inf".

Output: one line per check group, then "N passed, M failed". Exit status 0 when all pass,
1 when a check fails, 2 for bad usage or when the dump program fails.
"""
import json
import math
import os
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET

SVG = "{http://www.w3.org/2000/svg}"
MOST_X, MOST_Y = 8, 6
TOLERANCE = 0.02  # px


def finite(v):
    return math.isfinite(v)


def runs(series):
    """Lists of (x, y) for each run of consecutive finite points."""
    out, current = [], []
    for x, y in zip(series["x"], series["y"]):
        if finite(x) and finite(y):
            current.append((x, y))
        elif current:
            out.append(current)
            current = []
    if current:
        out.append(current)
    return out


def one_two_five(step):
    exponent = math.floor(math.log10(step))
    mantissa = step / 10 ** exponent
    for m in (1, 2, 5, 10):
        if abs(mantissa - m) < 1e-9 * m:
            return m % 10 or 1, exponent + (m == 10)
    return None, None


def smaller_step(m, e):
    return {1: (5, e - 1), 2: (1, e), 5: (2, e)}[m]


def check_ticks(labels, low, high, most, what, problems):
    """labels: [(value, position)]; returns the affine map value -> position."""
    values = [v for v, _ in labels]
    if len(values) < 2:
        problems.append("%s: %d tick(s)" % (what, len(values)))
        return lambda v: float("nan")
    step = values[1] - values[0]
    m, e = one_two_five(step)
    if m is None:
        problems.append("%s: step %r is not 1, 2 or 5 times a power of ten" % (what, step))
        return lambda v: float("nan")
    for i, v in enumerate(values):
        if abs(v - (values[0] + i * step)) > 1e-9 * max(1.0, abs(v)):
            problems.append("%s: tick %r breaks the step %r" % (what, v, step))
        if abs(v / step - round(v / step)) > 1e-6:
            problems.append("%s: tick %r is not a multiple of the step %r" % (what, v, step))
    if not (values[0] <= low + 1e-12 * abs(low) and values[-1] >= high - 1e-12 * abs(high)):
        problems.append("%s: ticks %r..%r do not cover the data %r..%r" % (what, values[0], values[-1], low, high))
    if len(values) - 1 > most:
        problems.append("%s: %d intervals, more than %d" % (what, len(values) - 1, most))
    sm, se = smaller_step(m, e)
    smaller = sm * 10.0 ** se
    needed = math.ceil(high / smaller - 1e-9) - math.floor(low / smaller + 1e-9)
    if needed <= most and low < high:
        problems.append("%s: the smaller step %r would need only %d intervals" % (what, smaller, needed))
    (v0, p0), (v1, p1) = labels[0], labels[-1]
    scale = (p1 - p0) / (v1 - v0)
    mapping = lambda v: p0 + (v - v0) * scale
    for v, p in labels:
        if abs(mapping(v) - p) > TOLERANCE:
            problems.append("%s: tick %r at %r, not on the line through the end ticks" % (what, v, p))
    return mapping


def main():
    if len(sys.argv) != 2:
        print(__doc__.strip().splitlines()[3], file=sys.stderr)
        return 2
    results = []

    def report(name, problems):
        results.append(not problems)
        print("%s %s%s" % ("pass" if not problems else "FAIL", name, (": " + "; ".join(problems)) if problems else ""))

    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "curves.svg")
        run = subprocess.run([sys.argv[1], "svg", path], capture_output=True, text=True)
        if run.returncode != 0:
            print("dump failed: %s" % run.stderr.strip(), file=sys.stderr)
            return 2
        with open(path, "rb") as f:
            raw = f.read()
        with open(path + ".json", encoding="utf-8") as f:
            data = json.load(f)

    problems = []
    try:
        root = ET.fromstring(raw)
    except ET.ParseError as e:
        report("well-formed XML", ["does not parse: %s" % e])
        print("%d passed, %d failed" % (sum(results), len(results) - sum(results)))
        return 1
    if root.tag != SVG + "svg":
        problems.append("root element is %r" % root.tag)
    box = [float(v) for v in root.get("viewBox", "").split()]
    if len(box) != 4 or box[:2] != [0, 0] or float(root.get("width")) != box[2] or float(root.get("height")) != box[3]:
        problems.append("width/height %r/%r do not match viewBox %r" % (root.get("width"), root.get("height"), box))
    for element in root.iter():
        for key, value in element.attrib.items():
            if "nan" in value.lower() or "inf" in value.lower():
                problems.append("attribute %s=%r of <%s> is not a finite number" % (key, value, element.tag))
    report("well-formed SVG", problems)

    panels = [g for g in root.iter(SVG + "g") if g.get("class") == "panel"]
    if len(panels) != len(data["panels"]):
        report("panels", ["%d panels drawn, %d given" % (len(panels), len(data["panels"]))])
        print("%d passed, %d failed" % (sum(results), len(results) - sum(results)))
        return 1

    all_x = [x for p in data["panels"] for s in p["series"] for r in runs(s) for x, _ in r]
    for number, (g, panel) in enumerate(zip(panels, data["panels"])):
        name = "panel %d" % (number + 1)

        def texts(role):
            return [t.text or "" for t in g.iter(SVG + "text") if t.get("class") == role]

        problems = []
        if texts("title") != [panel["title"]]:
            problems.append("title reads back as %r" % texts("title"))
        if texts("y-label") != [panel["y_label"]]:
            problems.append("y label reads back as %r" % texts("y-label"))
        if texts("x-label") != [data["x_label"]]:
            problems.append("x label reads back as %r" % texts("x-label"))
        if texts("legend") != [s["name"] for s in panel["series"]]:
            problems.append("legend reads back as %r" % texts("legend"))
        report(name + " text", problems)

        problems = []
        x_labels = [(float(t.text), float(t.get("x"))) for t in g.iter(SVG + "text") if t.get("class") == "x-tick"]
        y_labels = [(float(t.text), float(t.get("y"))) for t in g.iter(SVG + "text") if t.get("class") == "y-tick"]
        panel_y = [y for s in panel["series"] for r in runs(s) for _, y in r]
        to_x = check_ticks(x_labels, min(all_x), max(all_x), MOST_X, "x ticks", problems)
        to_y = check_ticks(y_labels, min(panel_y), max(panel_y), MOST_Y, "y ticks", problems)
        report(name + " ticks", problems)

        problems = []
        frames = [r for r in g.iter(SVG + "rect") if r.get("class") == "frame"]
        fx, fy = float(frames[0].get("x")), float(frames[0].get("y"))
        fw, fh = float(frames[0].get("width")), float(frames[0].get("height"))
        for k, series in enumerate(panel["series"]):
            drawn = [e for e in g.iter() if e.get("class") == "series-%d" % k]
            expected = runs(series)
            if len(drawn) != len(expected):
                problems.append("series %r: %d elements drawn for %d runs of finite points"
                                % (series["name"], len(drawn), len(expected)))
                continue
            for element, points in zip(drawn, expected):
                if len(points) == 1:
                    if element.tag != SVG + "circle":
                        problems.append("series %r: a lone point drawn as %s" % (series["name"], element.tag))
                        continue
                    vertices = [(float(element.get("cx")), float(element.get("cy")))]
                else:
                    if element.tag != SVG + "polyline":
                        problems.append("series %r: a run drawn as %s" % (series["name"], element.tag))
                        continue
                    vertices = [tuple(float(v) for v in pair.split(",")) for pair in element.get("points").split()]
                if len(vertices) != len(points):
                    problems.append("series %r: %d vertices for %d points" % (series["name"], len(vertices), len(points)))
                    continue
                for (px, py), (x, y) in zip(vertices, points):
                    if abs(px - to_x(x)) > TOLERANCE or abs(py - to_y(y)) > TOLERANCE:
                        problems.append("series %r: point (%r, %r) drawn at (%r, %r), ticks say (%.3f, %.3f)"
                                        % (series["name"], x, y, px, py, to_x(x), to_y(y)))
                        break
                    if not (fx - TOLERANCE <= px <= fx + fw + TOLERANCE and fy - TOLERANCE <= py <= fy + fh + TOLERANCE):
                        problems.append("series %r: vertex (%r, %r) outside the frame" % (series["name"], px, py))
                        break
        report(name + " series", problems)

    print("%d passed, %d failed" % (sum(results), len(results) - sum(results)))
    return 0 if all(results) else 1


if __name__ == "__main__":
    sys.exit(main())
