"""The demo sweep through the web app: from storing demo_images/ to the finished result.

What `eightfold demo` does before the first page can show a decision: ingest the 25 demo images
(`webapp.server.load_demo`), run the sweep in the app's background worker (default workers: every
core), and poll the JSON API until it is done. Prints the wall time; compare it with the CLI figure
of `bench/bench_decide.py`.

    python bench/bench_demo_web.py
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from webapp import create_app  # noqa: E402
from webapp.server import load_demo  # noqa: E402


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        app = create_app({"TESTING": True, "DATA_DIR": tmp})
        client = app.test_client()
        t = time.perf_counter()
        sweep_id = load_demo(app)
        while True:
            body = client.get(f"/api/sweeps/{sweep_id}").get_json()
            if body["status"] not in ("queued", "running"):
                break
            time.sleep(0.1)
        elapsed = time.perf_counter() - t
        print(f"demo sweep through the web app (25 images, ingest included): {elapsed:.1f} s, "
              f"status {body['status']}")
        for c in body["result"]["classes"]:
            s = c["setting"]
            print(f"  {c['name']:12s} q{s['quality']} k{s['cutoff']} {s['subsampling']}  {c['estimated_bytes']} B")
        app.extensions["eightfold_worker"].stop()


if __name__ == "__main__":
    main()
