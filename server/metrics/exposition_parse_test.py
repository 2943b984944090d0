"""Reads our text exposition back with Debian's python3-prometheus-client (run with /usr/bin/python3).

The reference is the Prometheus text exposition format 0.0.4 as that parser implements it
(prometheus_client.parser.text_string_to_metric_families); label values must come back exactly as
they were set, after the escaping of backslash, double quote and newline.

    exposition_parse_test.py PATH/TO/exposition_sample
"""
import math
import subprocess
import sys

from prometheus_client.parser import text_string_to_metric_families


def main():
    text = subprocess.run([sys.argv[1]], check=True, capture_output=True, timeout=20).stdout.decode("utf-8")
    families = {f.name: f for f in text_string_to_metric_families(text)}
    # The parser names a counter family without its _total suffix; its samples keep it.
    assert set(families) == {"sample_events", "sample_ratio", "sample_duration_seconds"}, sorted(families)

    events = families["sample_events"]
    assert events.type == "counter", events.type
    assert events.documentation == "Help with a \\ backslash\nand a second line.", repr(events.documentation)
    got = {s.labels["value"]: s.value for s in events.samples}
    want = {
        'quote " inside': 1,
        "back\\slash": 2,
        "new\nline": 3,
        'all three \\"\n end': 4,
        "unicode \u00e9t\u00e9": 5,
    }
    assert got == want, got
    assert all(s.name == "sample_events_total" for s in events.samples)

    ratio = families["sample_ratio"]
    assert ratio.type == "gauge" and [s.value for s in ratio.samples] == [0.1], ratio.samples

    hist = families["sample_duration_seconds"]
    assert hist.type == "histogram", hist.type
    buckets = [(s.labels["le"], s.value) for s in hist.samples if s.name.endswith("_bucket")]
    assert buckets == [("0.001", 1), ("0.25", 2), ("1", 3), ("+Inf", 4)], buckets
    [count] = [s.value for s in hist.samples if s.name.endswith("_count")]
    [total] = [s.value for s in hist.samples if s.name.endswith("_sum")]
    assert count == 4, count
    assert math.isclose(total, 7.4005), total
    print("exposition_parse_test: OK (%d families)" % len(families))


if __name__ == "__main__":
    main()
