"""Make the figure shown in README.md (docs/kestrel-iv-cooling.svg).

The scenario is invented: the magma ocean of the fictional planet Kestrel IV, with an
invented peridotite-like bulk composition (examples/kestrel-iv-cooling.json). The figure is
made by the same code that serves ``Accept: image/svg+xml`` (service/plots.py), from the
result of ``POST /v1/cooling-paths`` computed in this process (an in-process client).

    .venv/bin/python scripts/make_docs_figures.py [--request FILE.json] [--out FILE.svg]
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from service.client import HeatpathClient  # noqa: E402
from service.plots import render  # noqa: E402


def cooling_result(body: dict) -> dict:
    """The body of ``POST /v1/cooling-paths`` for ``body``, computed in this process through the API."""
    with HeatpathClient.in_process() as hp:
        return hp.post("/v1/cooling-paths", body)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--request", default=str(REPO / "examples" / "kestrel-iv-cooling.json"))
    parser.add_argument("--out", default=str(REPO / "docs" / "kestrel-iv-cooling.svg"))
    args = parser.parse_args()
    body = json.loads(Path(args.request).read_text(encoding="utf-8"))
    started = time.perf_counter()
    result = cooling_result(body)
    Path(args.out).write_bytes(render(result, "cooling_path", Path(args.out).suffix.lstrip(".")))
    print(f"wrote {args.out} ({len(result['steps'])} steps, {time.perf_counter() - started:.1f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
