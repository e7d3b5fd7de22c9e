"""Six uploads of small PNGs that decode to 49 Mpx each, at once: server memory and page latency.

    python -m bench.upload_storm --port 8117

Loopback only. Starts the app under waitress in a child process (a fresh data directory), sends
``--uploads`` concurrent uploads of one ~160 KB PNG of 7000x7000 pixels each, and meanwhile reads a
small page every 0.2 s. Prints the server's peak resident memory (sampled every 50 ms with psutil),
each upload's status and time, and the small page's latencies. Stops by itself.
"""

from __future__ import annotations

import argparse
import http.client
import io
import os
import subprocess
import sys
import tempfile
import threading
import time
import uuid
from pathlib import Path

import numpy as np
import psutil
from PIL import Image

ROOT = Path(__file__).resolve().parent.parent
SERVER = """
import logging, sys
from waitress import serve
from webapp import create_app
from webapp.server import WAITRESS_LIMITS
logging.getLogger("waitress.queue").setLevel(logging.ERROR)
app = create_app({"DATA_DIR": sys.argv[1], "SWEEP_AUTORESUME": False})
serve(app, host="127.0.0.1", port=int(sys.argv[2]), threads=12, **WAITRESS_LIMITS)
"""


def big_png(seed: int) -> bytes:
    # smooth gradients with a little structure compress to ~160 KB yet decode to 7000x7000x3
    rng = np.random.default_rng(seed)
    img = np.zeros((7000, 7000, 3), np.uint8)
    img[..., 0] = (np.arange(7000) // 28).astype(np.uint8)[None, :]
    img[..., 1] = (np.arange(7000) // 28).astype(np.uint8)[:, None]
    img[..., 2] = int(rng.integers(0, 255))
    buf = io.BytesIO()
    Image.fromarray(img).save(buf, "PNG", optimize=True)
    return buf.getvalue()


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--port", type=int, default=8117)
    ap.add_argument("--uploads", type=int, default=6)
    args = ap.parse_args(argv)
    if not 1 <= args.uploads <= 12:
        raise SystemExit("keep it bounded: 1-12 uploads")
    files = [big_png(i) for i in range(args.uploads)]
    print(f"{args.uploads} PNGs of 7000x7000 px, {np.mean([len(f) for f in files]) / 1000:.0f} KB each on average")
    server = subprocess.Popen([sys.executable, "-c", SERVER, tempfile.mkdtemp(prefix="eightfold-storm-"),
                               str(args.port)], env={**os.environ, "PYTHONPATH": str(ROOT)}, cwd=str(ROOT))
    try:
        for _ in range(200):
            try:
                c = http.client.HTTPConnection("127.0.0.1", args.port, timeout=5)
                c.request("GET", "/login")
                c.getresponse().read()
                token_conn = c
                break
            except OSError:
                time.sleep(0.1)
        else:
            raise SystemExit("server did not start")
        token_conn.request("POST", "/api/login", body=b"{}", headers={"Content-Type": "application/json"})
        import json

        token = json.loads(token_conn.getresponse().read())["token"]
        proc = psutil.Process(server.pid)
        base_rss = proc.memory_info().rss
        peak = [base_rss]
        done = threading.Event()

        def sample():
            while not done.is_set():
                try:
                    peak[0] = max(peak[0], proc.memory_info().rss)
                except psutil.Error:
                    return
                time.sleep(0.05)

        probes = []

        def probe():
            c = http.client.HTTPConnection("127.0.0.1", args.port, timeout=120)
            while not done.is_set():
                t = time.perf_counter()
                c.request("GET", "/login")
                c.getresponse().read()
                probes.append(time.perf_counter() - t)
                time.sleep(0.2)

        results = []

        def send(i):
            boundary = uuid.uuid4().hex
            body = (f"--{boundary}\r\nContent-Disposition: form-data; name=\"files\"; filename=\"storm/{i}.png\"\r\n"
                    "Content-Type: image/png\r\n\r\n").encode() + files[i] + f"\r\n--{boundary}--\r\n".encode()
            c = http.client.HTTPConnection("127.0.0.1", args.port, timeout=300)
            t = time.perf_counter()
            c.request("POST", "/api/sample-sets", body=body, headers={
                "Content-Type": f"multipart/form-data; boundary={boundary}", "Authorization": f"Bearer {token}"})
            resp = c.getresponse()
            resp.read()
            results.append((i, resp.status, time.perf_counter() - t))

        helpers = [threading.Thread(target=sample, daemon=True), threading.Thread(target=probe, daemon=True)]
        for h in helpers:
            h.start()
        time.sleep(0.5)
        senders = [threading.Thread(target=send, args=(i,)) for i in range(args.uploads)]
        for s in senders:
            s.start()
        for s in senders:
            s.join(600)
        time.sleep(0.5)
        done.set()
        for h in helpers:
            h.join(10)
        print(f"server memory: {base_rss / 2**20:.0f} MB before, {peak[0] / 2**20:.0f} MB peak")
        for i, status, took in sorted(results):
            print(f"upload {i}: HTTP {status} in {took:.1f} s")
        lat = sorted(probes)
        print(f"small page during the uploads: {len(lat)} reads, median {1000 * lat[len(lat) // 2]:.0f} ms, "
              f"max {1000 * lat[-1]:.0f} ms")
    finally:
        server.terminate()
        try:
            server.wait(timeout=20)
        except subprocess.TimeoutExpired:
            server.kill()


if __name__ == "__main__":
    main()
