#!/usr/bin/python3
"""`ogive campaign report` of real campaigns, rendered by Debian's headless Chromium.

    /usr/bin/python3 report_render_test.py --ogived PATH --ogive PATH [--keep DIR]

Runs a mixed campaign and a graded one against a real ogived (campaign_fixture.py), writes their reports
and checks:
  - the page is self-contained: no script element, nothing it would load (no src or href, no url()
    but the clip paths', no http:);
  - user text is shown as text: the parsed page holds the description's "<script>" and the late
    report's note as characters, not as elements;
  - Chromium's DOM after loading the page has every plot (5 progress plots and one per parameter),
    each with a data group whose lines, paths and bars hold at least MIN_POINTS points;
  - a screenshot of the page at the layout Chromium reported has, inside every plot's frame, at
    least MIN_INK_PIXELS saturated pixels (the data colours; axes, grid and text are grey), and the
    page as a whole is not blank;
  - the graded campaign's best-outcome plot labels its axis with the grades.
The layout comes from a copy of the report with a small script that writes each plot frame's
position into the document title (the report itself has no scripts); Chromium runs it while dumping
the DOM.

Chromium runs as root in tests and CI, which needs --no-sandbox. When chromium is not installed the
test exits 77, which ctest reports as skipped (deploy/check.sh installs it).
"""

import argparse
import html.parser
import json
import os
import re
import shutil
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import campaign_fixture as fx  # noqa: E402

SKIP = 77
WIDTH = 1240
MIN_POINTS = 10
MIN_INK_PIXELS = 150
CHROMIUM_TIMEOUT_S = 120

PROBE = """<script id="ogive-test-probe">
(function () {
  var plots = [];
  document.querySelectorAll('svg.plot').forEach(function (svg) {
    var f = svg.querySelector('rect.frame').getBoundingClientRect();
    plots.push({id: svg.id, frame: [f.left + window.scrollX, f.top + window.scrollY, f.width, f.height]});
  });
  document.title = JSON.stringify({height: document.documentElement.scrollHeight, plots: plots});
})();
</script>
"""


def chromium(binary, workdir, *args):
    """Runs headless Chromium with a profile of its own; returns its standard output."""
    profile = os.path.join(workdir, "chromium-profile")
    command = [binary, "--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
               "--no-first-run", "--disable-extensions", "--hide-scrollbars",
               "--force-device-scale-factor=1", "--user-data-dir=" + profile] + list(args)
    result = subprocess.run(command, capture_output=True, timeout=CHROMIUM_TIMEOUT_S)
    fx.check(result.returncode == 0, "chromium exited %d: %s" % (
        result.returncode, result.stderr.decode(errors="replace")[-2000:]))
    return result.stdout.decode()


class PageParser(html.parser.HTMLParser):
    """Collects what the checks need: elements by tag, per-plot drawn points, and the text."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags = {}
        self.attributes = []
        self.text = []
        self.plots = {}      # svg id -> {"data": bool, "points": int, "ticks": [text]}
        self.current = None  # id of the svg being read
        self.in_data = 0     # depth inside the data group
        self.in_text = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags[tag] = self.tags.get(tag, 0) + 1
        self.attributes.extend(attrs)
        if tag == "svg" and "plot" in (a.get("class") or "").split():
            self.current = a.get("id")
            self.plots[self.current] = {"data": False, "points": 0, "ticks": []}
        if self.current is None:
            return
        plot = self.plots[self.current]
        if tag == "g" and a.get("class") == "data":
            plot["data"] = True
            self.in_data = 1
        elif tag == "g" and self.in_data:
            self.in_data += 1
        if self.in_data:
            if tag == "polyline":
                plot["points"] += len(re.findall(r"-?[\d.]+,-?[\d.]+", a.get("points", "")))
            elif tag == "path":
                plot["points"] += len(re.findall(r"[MLHVhv]", a.get("d", "")))
            elif tag == "rect" and a.get("class") == "bar":
                plot["points"] += 4
        self.in_text = tag == "text"

    def handle_endtag(self, tag):
        if tag == "g" and self.in_data:
            self.in_data -= 1
        if tag == "svg":
            self.current = None
        if tag == "text":
            self.in_text = False

    def handle_data(self, data):
        self.text.append(data)
        if self.current is not None and self.in_text and not self.in_data:
            self.plots[self.current]["ticks"].append(data)


def parse(text):
    p = PageParser()
    p.feed(text)
    p.close()
    return p


def check_self_contained(page_text, parsed, name):
    fx.check(parsed.tags.get("script", 0) == 0, "%s: the report holds a script element" % name)
    for attribute, value in parsed.attributes:
        fx.check(attribute not in ("src", "href"), "%s: the report loads %s=%r" % (name, attribute, value))
    fx.check("http:" not in page_text and "https:" not in page_text, "%s: the report holds a URL" % name)
    fx.check(not re.search(r"url\([^#]", page_text), "%s: the report refers to something outside" % name)


def check_plots(parsed, expected_ids, name):
    fx.check(sorted(parsed.plots) == sorted(expected_ids), "%s: plots %s, expected %s" % (
        name, sorted(parsed.plots), sorted(expected_ids)))
    for plot_id, plot in parsed.plots.items():
        fx.check(plot["data"], "%s: plot %s drew nothing (no data group)" % (name, plot_id))
        fx.check(plot["points"] >= MIN_POINTS, "%s: plot %s has %d drawn points, expected >= %d" % (
            name, plot_id, plot["points"], MIN_POINTS))


def check_screenshot(png, layout, name):
    from PIL import Image  # python3-pil
    image = Image.open(png).convert("RGB")
    fx.check(image.width == WIDTH, "%s: screenshot is %d px wide, expected %d" % (name, image.width, WIDTH))
    # The page is not blank: a good share of it is not the white background.
    small = image.resize((image.width // 4, image.height // 4))
    ink = sum(1 for p in small.getdata() if min(p) < 235)
    fx.check(ink > 0.02 * small.width * small.height, "%s: the screenshot is nearly blank" % name)
    for plot in layout["plots"]:
        x, y, w, h = plot["frame"]
        box = (int(x) + 3, int(y) + 3, int(x + w) - 3, int(y + h) - 3)
        fx.check(box[3] <= image.height, "%s: plot %s lies below the screenshot" % (name, plot["id"]))
        region = image.crop(box)
        colored = sum(1 for p in region.getdata() if max(p) - min(p) > 50)
        fx.check(colored >= MIN_INK_PIXELS, "%s: plot %s shows %d coloured pixels in its frame, expected >= %d" % (
            name, plot["id"], colored, MIN_INK_PIXELS))
    return image


def render_and_check(binary, workdir, report, expected_ids, name, screenshot):
    """Checks the report file, Chromium's DOM of it and (if `screenshot`) its pixels; returns the layout."""
    with open(report, encoding="utf-8") as f:
        page_text = f.read()
    parsed = parse(page_text)
    check_self_contained(page_text, parsed, name)
    probe = report.replace(".html", ".probe.html")
    with open(probe, "w", encoding="utf-8") as f:
        f.write(page_text.replace("</body>", PROBE + "</body>"))
    dom = chromium(binary, workdir, "--window-size=%d,1000" % WIDTH, "--dump-dom", "file://" + probe)
    match = re.search(r"<title>(\{.*?\})</title>", dom, re.S)
    fx.check(match is not None, "%s: Chromium's DOM has no layout in its title (did the page load?)" % name)
    layout = json.loads(match.group(1))
    dumped = parse(dom.replace(PROBE.strip(), ""))
    check_plots(dumped, expected_ids, name + " (Chromium's DOM)")
    fx.check(sorted(p["id"] for p in layout["plots"]) == sorted(expected_ids),
             "%s: Chromium laid out plots %s" % (name, [p["id"] for p in layout["plots"]]))
    for plot in layout["plots"]:
        fx.check(plot["frame"][2] > 300 and plot["frame"][3] > 100,
                 "%s: plot %s is laid out %r, too small to read" % (name, plot["id"], plot["frame"]))
    if screenshot:
        png = report.replace(".html", ".png")
        chromium(binary, workdir, "--window-size=%d,%d" % (WIDTH, layout["height"]), "--screenshot=" + png,
                 "file://" + probe)
        check_screenshot(png, layout, name)
    return parsed, dumped


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--ogived", required=True)
    parser.add_argument("--ogive", required=True)
    parser.add_argument("--chromium", default=shutil.which("chromium") or "/usr/bin/chromium")
    parser.add_argument("--keep", help="copy the reports and screenshots into this directory")
    args = parser.parse_args()
    if not os.access(args.chromium, os.X_OK):
        print("SKIP: chromium not found (%s); install it with: apt-get install -y chromium "
              "(deploy/check.sh does)" % args.chromium)
        return SKIP
    try:
        import PIL  # noqa: F401
    except ImportError:
        print("FAIL: python3-pil is missing for %s; install it with: apt-get install -y python3-pil"
              % sys.executable)
        return 1

    started = time.monotonic()
    with fx.temporary_directory() as workdir, fx.Ogived(args.ogived, args.ogive, workdir) as server:
        note = fx.run_mixed_campaign(server, workdir)
        fx.run_graded_campaign(server, workdir)
        studied = time.monotonic()

        mixed = os.path.join(workdir, "mixed.html")
        server.run("campaign", "report", fx.CAMPAIGN, "-o", mixed)
        design_parameters = 5
        expected = ["plot-best", "plot-step-size", "plot-axis-ratio", "plot-states", "plot-staleness"] + [
            "plot-parameter-%d" % i for i in range(design_parameters)]
        parsed, _ = render_and_check(args.chromium, workdir, mixed, expected, "mixed campaign", screenshot=True)
        text = "".join(parsed.text)
        fx.check("Offset <script>alert('x')</script> & \"more\"" in text,
                 "the description is not shown as text")
        fx.check(note in text, "the late report's note is not shown as text in the best trials")
        fx.check("Caution: candidates are suggestions" in text, "the report has no safety caution")
        fx.check("done (budget)" in text, "the report does not show the phase and reason")
        fx.check("infeasible (ranked last)" in "".join(parsed.plots["plot-best"]["ticks"]),
                 "the best-outcome plot does not mark infeasible outcomes")
        for state in ("reported", "reported late", "voided", "lapsed"):
            fx.check(state in parsed.plots["plot-states"]["ticks"],
                     "the trial-state plot has no %r layer" % state)

        graded = os.path.join(workdir, "graded.html")
        server.run("campaign", "report", fx.GRADED, "-o", graded)
        expected = ["plot-best", "plot-step-size", "plot-axis-ratio", "plot-states", "plot-staleness",
                    "plot-parameter-0", "plot-parameter-1"]
        _, dumped = render_and_check(args.chromium, workdir, graded, expected, "graded campaign", screenshot=False)
        ticks = dumped.plots["plot-best"]["ticks"]
        for label in ("cracked", "poor", "fair", "good"):
            fx.check(label in ticks, "the graded best-outcome plot has no %r tick: %s" % (label, ticks))

        if args.keep:
            os.makedirs(args.keep, exist_ok=True)
            for name in ("mixed.html", "mixed.png", "graded.html"):
                shutil.copy(os.path.join(workdir, name), args.keep)
    print("report_render_test: campaigns %.1f s, reports and Chromium %.1f s" % (
        studied - started, time.monotonic() - studied))
    print("PASS")
    return 0


if __name__ == "__main__":
    try:
        sys.exit(main())
    except fx.TestFailure as e:
        print("FAIL: %s" % e)
        sys.exit(1)
