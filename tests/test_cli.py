"""The eightfold command line: a full sweep, bad files, verification and exit codes."""

import csv
import io
import json
import os
import struct
import zlib

import pytest
from click.testing import CliRunner
from PIL import Image

from dct import report
from dct.cli import EXIT_UNMET, main
from tests.sets import noisy_photo, write_set

FAST = ["--workers", "1", "--cutoffs", "64,20", "--quiet"]


def huge_png_header(path):
    """A PNG whose IHDR declares 40000 x 40000 pixels (ISO/IEC 15948 chunk layout), without the pixels."""
    ihdr = struct.pack(">IIBBBBB", 40000, 40000, 8, 2, 0, 0, 0)
    chunk = lambda t, d: struct.pack(">I", len(d)) + t + d + struct.pack(">I", zlib.crc32(t + d))
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(b"\0" * 10)) + chunk(b"IEND", b""))


@pytest.fixture
def broken_set(tmp_path):
    root = write_set(tmp_path / "set", flat=2, photo=2)
    photo = root / "photo"
    buf = io.BytesIO()
    Image.fromarray(noisy_photo(9)).save(buf, "JPEG", quality=90)
    (photo / "truncated.jpg").write_bytes(buf.getvalue()[: len(buf.getvalue()) // 2])
    (photo / "notes.jpg").write_text("this is a text file, not a JPEG")
    (photo / "empty.jpg").write_bytes(b"")
    huge_png_header(photo / "huge.png")
    os.symlink(tmp_path / "nowhere.jpg", photo / "unreadable.jpg")  # a link to nothing: cannot be read
    return root


def run(args):
    result = CliRunner().invoke(main, args, catch_exceptions=False)
    return result


def test_broken_files_are_listed_and_the_rest_is_evaluated(broken_set, tmp_path):
    out = tmp_path / "doc.json"
    result = run(["sweep", str(broken_set), "--json", str(out), "--no-cache", *FAST])
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    rejected = {r["path"]: r["error"] for r in doc["rejected"]}
    assert set(rejected) == {"photo/truncated.jpg", "photo/notes.jpg", "photo/empty.jpg", "photo/huge.png", "photo/unreadable.jpg"}
    assert "truncated" in rejected["photo/truncated.jpg"]
    assert "not an image" in rejected["photo/notes.jpg"]
    assert "empty" in rejected["photo/empty.jpg"]
    assert "too large" in rejected["photo/huge.png"]
    assert {c["name"]: c["image_count"] for c in doc["classes"]} == {"flat": 2, "photo": 2}
    assert all(c["setting"] for c in doc["classes"])
    for path in rejected:
        assert path in result.output  # every rejected file is listed with its reason


def test_verify_matches_pillow(tmp_path):
    root = write_set(tmp_path / "set", flat=3, photo=3)
    out = tmp_path / "doc.json"
    result = run(["sweep", str(root), "--json", str(out), "--verify", "--no-cache", "--csv", str(tmp_path / "c.csv"), *FAST])
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    for c in doc["classes"]:
        imgs = [i for i in doc["images"] if i["class"] == c["name"]]
        # Actual Pillow bytes within ±3 % of the estimate, per image and per class.
        assert abs(c["verified"]["bytes_error"]) <= 0.03
        for i in imgs:
            assert abs(i["estimated_bytes"] - i["actual_bytes"]) / i["actual_bytes"] <= 0.03
        # The actual SSIM meets the target for the coverage share, within 0.003.
        share = sum(i["actual_ssim"] >= c["target_ssim"] - 0.003 for i in imgs) / len(imgs)
        assert share >= c["coverage"] - 1e-9
    rows = list(csv.DictReader(open(tmp_path / "c.csv")))
    assert [r["name"] for r in rows] == ["flat", "photo"]
    assert len(rows[0]["quant_table_luma"].split()) == 64
    assert "verified flat" in result.output


def test_unreachable_target_exits_with_its_own_code(tmp_path):
    root = write_set(tmp_path / "set", flat=1, photo=2)
    result = run(["sweep", str(root), "--target-ssim", "0.9999", "--coverage", "1", "--no-cache", "--no-refine", *FAST])
    assert result.exit_code == EXIT_UNMET
    assert "no setting in the grid reaches SSIM 0.9999" in result.output


def test_json_to_stdout_and_cache_reuse(tmp_path):
    root = write_set(tmp_path / "set", flat=1, photo=1)
    cache = tmp_path / "cache"
    first = run(["sweep", str(root), "--json", "-", "--cache-dir", str(cache), *FAST])
    assert json.loads(first.output)["schema_version"] == report.SCHEMA_VERSION == 2
    second = run(["sweep", str(root), "--cache-dir", str(cache), *FAST])
    assert "0 image passes computed" in second.output


@pytest.mark.parametrize(
    "args, message",
    [
        (["--target-ssim", "1.5"], "must be in (0, 1]"),
        (["--coverage", "0"], "must be in (0, 1]"),
        (["--local-floor", "-1"], "must be in [0, 1]"),
        (["--qualities", "abc"], "expected numbers like"),
        (["--subsamplings", "4:1:1"], "grid subsampling must be one of"),
        (["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"], "cannot be combined"),
    ],
)
def test_bad_options(tmp_path, args, message):
    root = write_set(tmp_path / "set", flat=1, photo=0)
    result = CliRunner().invoke(main, ["sweep", str(root), "--no-cache", "--quiet", *args])
    assert result.exit_code in (1, 2)
    assert message in result.output


def test_decide_again_from_saved_curves(tmp_path):
    root = write_set(tmp_path / "set", flat=2, photo=2)
    curves = tmp_path / "curves.json"
    first = run(["sweep", str(root), "--curves", str(curves), "--json", str(tmp_path / "a.json"), "--no-cache", *FAST])
    assert first.exit_code == 0, first.output
    same = run(["decide", str(curves), "--json", str(tmp_path / "b.json")])
    a, b = (json.loads((tmp_path / n).read_text()) for n in ("a.json", "b.json"))
    assert [c["setting"] for c in a["classes"]] == [c["setting"] for c in b["classes"]]
    stricter = run(["decide", str(curves), "--target-ssim", "0.98", "--json", "-"])
    doc = json.loads(stricter.output)
    for new, old in zip(doc["classes"], a["classes"]):
        assert new["target_ssim"] == 0.98
        assert new["setting"] is None or new["estimated_bytes"] >= old["estimated_bytes"]
    broken = tmp_path / "x.json"
    broken.write_text("{}")
    result = CliRunner().invoke(main, ["decide", str(broken)])
    assert result.exit_code == 2 and "is not a curves file" in result.output  # a usage error


def test_serve_starts_waitress_and_answers(tmp_path):
    import socket
    import subprocess
    import sys
    import time
    import urllib.request

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    proc = subprocess.Popen(
        [sys.executable, "-m", "dct.cli", "serve", "--port", str(port), "--data-dir", str(tmp_path / "data")],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
    )
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=2) as r:
                    assert r.status == 200 and "Eightfold" in r.read().decode()
                    break
            except OSError:
                assert proc.poll() is None, proc.stdout.read()
                assert time.monotonic() < deadline, "server did not answer within 60 s"
                time.sleep(0.3)
        assert (tmp_path / "data" / "eightfold.sqlite3").exists()
    finally:
        proc.terminate()
        proc.wait(timeout=20)


def test_total_line_counts_every_class_and_the_bar_counts_passes(tmp_path):
    root = write_set(tmp_path / "set", flat=1, photo=2)
    (root / "README.md").write_text("# notes beside the images\n")
    out = tmp_path / "doc.json"
    result = CliRunner().invoke(main, ["sweep", str(root), "--json", str(out), "--no-cache", "--no-refine",
                                       "--workers", "1", "--cutoffs", "64,20", "--current-cutoff", "20"])
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    assert doc["current"] == {"quality": 85, "cutoff": 20, "subsampling": "4:2:0"}
    # README.md is skipped quietly, not reported as a broken image.
    assert doc["rejected"] == [] and "skipped 1 text file (not images): README.md" in result.output
    assert "rejected" not in result.output
    # The bar counts image passes, and says so.
    assert "pass/s" in result.output or "s/pass" in result.output
    assert "img/s" not in result.output
    from dct.report import describe_saving, totals

    t = totals(doc)
    assert t["current_bytes"] == sum(c["current_bytes"] for c in doc["classes"])
    line = next(l for l in result.output.splitlines() if l.startswith("total: "))
    assert f"against {t['current_bytes'] / 1000:,.1f} KB at the current default (q85 k20 4:2:0)" in line
    assert describe_saving(t["saved_bytes"], t["savings"], digits=1) in line


def test_total_keeps_undecided_classes_at_their_current_size(tmp_path):
    root = write_set(tmp_path / "set", flat=1, photo=1)
    (root / "classes.toml").write_text('[[class]]\nname = "photo"\ntarget_ssim = 0.99999\ncoverage = 1\n')
    out = tmp_path / "doc.json"
    result = CliRunner().invoke(main, ["sweep", str(root), "--json", str(out), "--no-cache", "--no-refine", *FAST])
    assert result.exit_code == EXIT_UNMET
    doc = json.loads(out.read_text())
    flat, photo = (next(c for c in doc["classes"] if c["name"] == n) for n in ("flat", "photo"))
    assert photo["setting"] is None and flat["setting"] is not None
    from dct.report import totals

    t = totals(doc)
    assert t["current_bytes"] == flat["current_bytes"] + photo["current_bytes"]
    assert t["chosen_bytes"] == flat["estimated_bytes"] + photo["current_bytes"]
    assert t["undecided"] == ["photo"]
    assert "photo keeps the current default (no qualifying setting), counted at its current size" in result.output


@pytest.mark.parametrize("saved, share, words", [
    (258_700, 0.34, "saves 258.7 KB (\u221234 %)"),
    (-63_300, -2.09, "costs 63.3 KB more (+209 %)"),
    (20, 0.0001, "saves 20 bytes (0 %)"),
    (36, 0.025, "saves 36 bytes (\u22122 %)"),
    (0, 0.0, "same size (0 %)"),
])
def test_savings_in_words(saved, share, words):
    from dct.report import describe_estimate_error, describe_saving

    assert describe_saving(saved, share) == words
    assert describe_estimate_error(-0.0014) == "estimate 0.14 % under the real file"
    assert describe_estimate_error(0.02) == "estimate 2.00 % over the real file"


@pytest.mark.parametrize("command", ["serve", "demo"])
def test_busy_port_is_a_clear_error(tmp_path, command):
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        s.listen(1)
        port = s.getsockname()[1]
        result = CliRunner().invoke(main, [command, "--port", str(port), "--data-dir", str(tmp_path / "d")])
    assert result.exit_code == 1
    assert f"cannot listen on 127.0.0.1:{port}: the port is already in use" in result.output
    assert "--port" in result.output and "Traceback" not in result.output
