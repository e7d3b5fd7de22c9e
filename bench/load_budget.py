"""Load test: many readers of one frozen budget while a sweep runs, on loopback only.

    python -m bench.load_budget --clients 50 --seconds 20 --port 8111

What it does, all on 127.0.0.1:

1. Starts the app under waitress (the limits ``eightfold serve`` uses) in a child process, on a fresh
   data directory, with a small grid so the setup sweep is quick.
2. Uploads the demo set (25 images) as 7 classes, sweeps it, freezes it: one budget, one view link.
3. Starts a second sweep of the same set at another delivery width, so the engine is busy.
4. Runs ``--clients`` reader threads for ``--seconds`` seconds; each reads the budget page (HTML)
   and its JSON in turn over its own keep-alive connection.
5. Prints requests/s, p50/p95/p99 latency, errors, and whether the sweep was still running at the end.

It stops by itself: the readers stop at the deadline, and the server is terminated on exit. The
client threads share the machine's cores with the server and the sweep, so on a small machine the
figures include that contention; say so when quoting them.
"""

from __future__ import annotations

import argparse
import http.client
import json
import os
import subprocess
import sys
import tempfile
import threading
import time
import uuid
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
HOST = "127.0.0.1"
SETUP_GRID = {"qualities": [40, 60, 75, 85, 92], "cutoffs": [64], "subsamplings": ["4:2:0"], "coarse_step": 20}
SERVER = """
import json, sys
import logging
from waitress import serve
logging.getLogger("waitress.queue").setLevel(logging.ERROR)  # the queue warning would flood the output
from webapp import create_app
from webapp.server import WAITRESS_LIMITS
app = create_app({"DATA_DIR": sys.argv[1], "SWEEP_WORKERS": 1, "SWEEP_GRID": json.loads(sys.argv[3])})
serve(app, host="127.0.0.1", port=int(sys.argv[2]), threads=12, **WAITRESS_LIMITS)
"""


def request(conn, method, path, body=None, headers=None):
    conn.request(method, path, body=body, headers=headers or {})
    resp = conn.getresponse()
    data = resp.read()
    return resp.status, data


def multipart(files):
    boundary = uuid.uuid4().hex
    out = []
    for name, data in files:
        out.append(f"--{boundary}\r\nContent-Disposition: form-data; name=\"files\"; filename=\"{name}\"\r\n"
                   "Content-Type: application/octet-stream\r\n\r\n".encode() + data + b"\r\n")
    out.append(f"--{boundary}--\r\n".encode())
    return b"".join(out), f"multipart/form-data; boundary={boundary}"


def seven_classes():
    """The 25 demo images; product and banner split in two, so the budget has 7 classes."""
    files = []
    for path in sorted((ROOT / "demo_images").rglob("*")):
        if not path.is_file() or path.suffix.lower() not in (".jpg", ".jpeg", ".png", ".webp"):
            continue
        folder = path.parent.name
        if folder in ("product", "banner") and len([f for f in files if f[0].startswith(folder)]) % 2:
            folder += "-detail"
        files.append((f"{folder}/{path.name}", path.read_bytes()))
    return files


def wait_sweep(conn, sweep_id, timeout):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        status, data = request(conn, "GET", f"/api/sweeps/{sweep_id}")
        body = json.loads(data)
        if body["status"] not in ("queued", "running"):
            return body
        time.sleep(0.5)
    raise SystemExit(f"setup sweep {sweep_id} did not finish in {timeout} s")


def percentile(sorted_values, p):
    if not sorted_values:
        return float("nan")
    k = min(len(sorted_values) - 1, max(0, int(round(p / 100 * (len(sorted_values) - 1)))))
    return sorted_values[k]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--clients", type=int, default=50)
    ap.add_argument("--seconds", type=float, default=20.0)
    ap.add_argument("--port", type=int, default=8111)
    ap.add_argument("--no-sweep", action="store_true", help="read without a sweep running")
    args = ap.parse_args(argv)
    if not 1 <= args.clients <= 200 or not 1 <= args.seconds <= 120:
        raise SystemExit("keep it bounded: 1-200 clients, 1-120 seconds")

    data_dir = tempfile.mkdtemp(prefix="eightfold-load-")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    server = subprocess.Popen([sys.executable, "-c", SERVER, data_dir, str(args.port), json.dumps(SETUP_GRID)],
                              env=env, cwd=str(ROOT))
    try:
        conn = None
        for _ in range(200):
            try:
                conn = http.client.HTTPConnection(HOST, args.port, timeout=30)
                request(conn, "GET", "/login")
                break
            except OSError:
                conn = None
                time.sleep(0.1)
        if conn is None:
            raise SystemExit("server did not start")
        json_headers = {"Content-Type": "application/json"}
        body, ctype = multipart(seven_classes())
        token = json.loads(request(conn, "POST", "/api/login", b"{}", json_headers)[1])["token"]
        status, data = request(conn, "POST", "/api/sample-sets", body,
                               {"Content-Type": ctype, "Authorization": f"Bearer {token}"})
        assert status == 201, data[:300]
        set_id = json.loads(data)["id"]
        t0 = time.monotonic()
        sweep_id = json.loads(request(conn, "POST", f"/api/sample-sets/{set_id}/sweeps", b"{}", json_headers)[1])["id"]
        wait_sweep(conn, sweep_id, 900)
        setup_s = time.monotonic() - t0
        links = json.loads(request(conn, "POST", f"/api/sweeps/{sweep_id}/freeze", b"{}", json_headers)[1])
        view = "/budgets/" + links["token"]
        budget = json.loads(request(conn, "GET", "/api" + view)[1])
        classes = len({c["name"] for c in budget["classes"]})
        busy_id = None
        if not args.no_sweep:
            spec = {"classes": {}, "target_ssim": 0.95}
            req = {**spec, "classes": {name: {"widths": [320]} for name in {c["name"] for c in budget["classes"]}}}
            busy_id = json.loads(request(conn, "POST", f"/api/sample-sets/{set_id}/sweeps",
                                         json.dumps(req).encode(), json_headers)[1])["id"]
            time.sleep(1.0)

        latencies, errors, lock = [], [], threading.Lock()
        deadline = time.monotonic() + args.seconds

        def reader(i):
            c = http.client.HTTPConnection(HOST, args.port, timeout=30)
            paths = [view, "/api" + view]
            n = i
            while time.monotonic() < deadline:
                path = paths[n % 2]
                n += 1
                start = time.perf_counter()
                try:
                    status, _ = request(c, "GET", path)
                    ok = status == 200
                except (OSError, http.client.HTTPException) as exc:
                    ok, status = False, type(exc).__name__
                    c.close()
                    c = http.client.HTTPConnection(HOST, args.port, timeout=30)
                took = time.perf_counter() - start
                with lock:
                    (latencies if ok else errors).append(took if ok else status)
            c.close()

        threads = [threading.Thread(target=reader, args=(i,), daemon=True) for i in range(args.clients)]
        started = time.monotonic()
        for t in threads:
            t.start()
        for t in threads:
            t.join(args.seconds + 60)
        elapsed = time.monotonic() - started
        still = None
        if busy_id:
            still = json.loads(request(conn, "GET", f"/api/sweeps/{busy_id}")[1])
        lat = sorted(latencies)
        print(f"budget: {len(budget['images'])} images in {classes} classes; setup sweep {setup_s:.1f} s")
        print(f"{args.clients} clients x {args.seconds:.0f} s on {HOST}:{args.port} "
              f"({'a sweep running' if busy_id else 'no sweep running'})")
        print(f"requests: {len(lat)} ok, {len(errors)} errors"
              + (f" ({sorted(set(map(str, errors)))})" if errors else "")
              + f"; throughput {len(lat) / elapsed:.1f} req/s")
        print(f"latency ms: p50 {1000 * percentile(lat, 50):.0f}  p95 {1000 * percentile(lat, 95):.0f}  "
              f"p99 {1000 * percentile(lat, 99):.0f}  max {1000 * (lat[-1] if lat else float('nan')):.0f}")
        if still is not None:
            print(f"background sweep at the end: {still['status']} ({still['done']}/{still['total']} passes)")
    finally:
        server.terminate()
        try:
            server.wait(timeout=20)
        except subprocess.TimeoutExpired:
            server.kill()


if __name__ == "__main__":
    main()
