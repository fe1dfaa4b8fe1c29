"""Parses an OpenMetrics text exposition with the Python prometheus-client's own
OpenMetrics parser (an implementation independent of the Rust crate that wrote it), and
prints what it read as JSON: each family's type and unit, and its samples with their
labels and values. Exits 1, saying why, when the parser refuses the text.

Usage: python3 tests/metrics/parse_openmetrics.py FILE
Needs: pip install prometheus_client (.ci/run installs it).
"""

import json
import sys

from prometheus_client.openmetrics.parser import text_string_to_metric_families


def main():
    with open(sys.argv[1], encoding="utf-8") as f:
        text = f.read()
    try:
        families = list(text_string_to_metric_families(text))
    except ValueError as e:
        print(f"the OpenMetrics parser refused the text: {e}", file=sys.stderr)
        sys.exit(1)
    out = {
        fam.name: {
            "type": fam.type,
            "unit": fam.unit,
            "samples": [
                {"name": s.name, "labels": s.labels, "value": s.value} for s in fam.samples
            ],
        }
        for fam in families
    }
    json.dump(out, sys.stdout, indent=1, sort_keys=True)


if __name__ == "__main__":
    main()
