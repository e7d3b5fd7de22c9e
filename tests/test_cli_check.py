"""``eightfold check`` and ``eightfold export`` on the command line, and ``decide`` given the wrong file.

The per-image verdicts are the sweep's own rule (dct.budget.accepts) on real Pillow files, so they
are compared with what ``sweep --verify`` measures on the same files; the thresholds are the
budget's own targets.
"""

import json
import shutil
import subprocess
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from click.testing import CliRunner
from PIL import Image, ImageDraw, JpegImagePlugin

from dct import budget, contract
from dct.cli import main
from tests.sets import flat_graphic, write_set

SWEEP = ["--workers", "1", "--no-cache", "--quiet", "--qualities", "30-90", "--cutoffs", "64,28",
         "--target-ssim", "0.9", "--coverage", "0.6"]


def run(args):
    return CliRunner().invoke(main, args, catch_exceptions=False)


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """A small sample set and the budget swept from it (with --verify's real-file figures)."""
    root = tmp_path_factory.mktemp("made")
    sample = write_set(root / "set", flat=3, photo=3)
    out = root / "budget.json"
    result = run(["sweep", str(sample), "--json", str(out), "--verify", *SWEEP])
    assert result.exit_code == 0, result.output
    return sample, out, json.loads(out.read_text())


def hard_set(root):
    """Flat graphics with fine noise added, and small text: what the flat class's setting was not made for."""
    flat = root / "flat"
    flat.mkdir(parents=True)
    rng = np.random.default_rng(11)
    for i in range(2):
        noisy = flat_graphic(i).astype(float) + rng.normal(0, 14, (112, 136, 1))
        Image.fromarray(np.clip(noisy, 0, 255).astype(np.uint8)).save(flat / f"grain{i}.png")
    text = Image.new("RGB", (136, 112), (250, 250, 246))
    draw = ImageDraw.Draw(text)
    for row in range(9):
        draw.text((4, 4 + 12 * row), "Fernridge trail 4.5 km", fill=(30, 30, 30))
    text.save(flat / "smalltext.png")
    return root


def test_check_passes_on_the_set_the_budget_came_from(made, tmp_path):
    sample, budget_file, doc = made
    junit = tmp_path / "j.xml"
    result = run(["check", str(budget_file), str(sample), "--workers", "1", "--quiet", "--json", str(tmp_path / "c.json"),
                  "--junit", str(junit)])
    assert result.exit_code == 0, result.output
    assert "PASSED: 6 image check(s)" in result.output
    report = json.loads((tmp_path / "c.json").read_text())
    assert report["passed"] and all(c["meets_coverage"] for c in report["classes"])
    # the same verdicts as the sweep's own rule on --verify's real files (same bytes, same figures)
    verified = {i["path"]: i for i in doc["images"]}
    entries = {c["name"]: c for c in doc["classes"]}
    for r in report["images"]:
        key = r["path"].split("/set/", 1)[1]
        v, c = verified[key], entries[r["class"]]
        targets = budget.Targets(c["target_ssim"], c["coverage"], c["chroma_floor"], c["local_floor"])
        assert r["actual_bytes"] == v["actual_bytes"]
        assert r["ssim"] == pytest.approx(v["actual_ssim"], abs=1e-6)
        assert r["passes"] == budget.accepts(contract.measure_of(v), targets)
    tree = ET.parse(junit).getroot()
    assert sum(int(s.get("failures")) + int(s.get("errors")) for s in tree) == 0
    assert sum(int(s.get("tests")) for s in tree) == 6 + 2  # one per image, one per class


def test_check_fails_on_harder_images_and_names_each_with_figures(made, tmp_path):
    _, budget_file, doc = made
    hard = hard_set(tmp_path / "hard")
    junit = tmp_path / "j.xml"
    result = run(["check", str(budget_file), str(hard), "--workers", "1", "--quiet", "--junit", str(junit),
                  "--json", str(tmp_path / "c.json")])
    assert result.exit_code == 1, result.output
    assert "MISSES its coverage" in result.output and "FAILED" in result.output
    report = json.loads((tmp_path / "c.json").read_text())
    failing = [r for r in report["images"] if not r["passes"]]
    assert {r["path"].rsplit("/", 1)[1] for r in failing} == {"grain0.png", "grain1.png", "smalltext.png"}
    cases = {c.get("name"): c for c in ET.parse(junit).getroot().iter("testcase")}
    for r in failing:
        failure = cases[r["path"]].find("failure")
        assert failure is not None
        assert failure.get("message") == "; ".join(r["reasons"])
        # the figures: bytes and every SSIM the checks read
        assert f"bytes {r['actual_bytes']}" in failure.text and f"luma SSIM {r['ssim']:.4f}" in failure.text
        assert f"local SSIM {r['ssim_local']:.4f}" in failure.text
        assert r["path"] in result.output
    coverage = cases["coverage"].find("failure")
    assert coverage is not None and "0 of 3 images pass" in coverage.get("message")


def test_broken_and_unknown_files_are_listed_not_crashed(made, tmp_path):
    _, budget_file, _ = made
    root = tmp_path / "new"
    (root / "flat").mkdir(parents=True)
    (root / "posters").mkdir()
    Image.fromarray(flat_graphic(0)).save(root / "flat" / "ok.png")
    (root / "flat" / "half.png").write_bytes((root / "flat" / "ok.png").read_bytes()[:200])
    Image.fromarray(flat_graphic(1)).save(root / "posters" / "p.png")
    result = run(["check", str(budget_file), str(root), "--workers", "1", "--quiet", "--junit", str(tmp_path / "j.xml")])
    assert result.exit_code == 1, result.output
    assert "ERROR: truncated or corrupt PNG data" in result.output
    assert "class 'posters' is not in this budget (it has: flat, photo)" in result.output
    errors = [c for c in ET.parse(tmp_path / "j.xml").getroot().iter("testcase") if c.find("error") is not None]
    assert sorted(c.get("name").rsplit("/", 1)[1] for c in errors) == ["half.png", "p.png"]
    # --class puts every file in one class; a file argument takes its parent folder's name
    one = run(["check", str(budget_file), str(root / "posters" / "p.png"), "--class", "flat", "--workers", "1", "--quiet"])
    assert "p.png" in one.output and "not in this budget" not in one.output
    own = run(["check", str(budget_file), str(root / "flat" / "ok.png"), "--workers", "1", "--quiet", "--json", "-"])
    assert json.loads(own.output)["images"][0]["class"] == "flat"


def test_nothing_usable_exits_4(made, tmp_path):
    _, budget_file, _ = made
    (tmp_path / "flat").mkdir()
    (tmp_path / "flat" / "x.jpg").write_text("not a picture")
    result = run(["check", str(budget_file), str(tmp_path / "flat"), "--workers", "1", "--quiet"])
    assert result.exit_code == 4, result.output
    assert "NO USABLE IMAGE" in result.output


@pytest.mark.parametrize(
    "content, message",
    [
        ("{oops", "invalid JSON at line 1"),
        (json.dumps({"classes": {"flat": {}}, "images": []}), "curves file"),
        (json.dumps({"schema_version": 9}), "schema_version 9, newer than this Eightfold reads"),
    ],
)
def test_bad_budget_is_a_usage_error(tmp_path, content, message):
    (tmp_path / "b.json").write_text(content)
    (tmp_path / "flat").mkdir()
    result = CliRunner().invoke(main, ["check", str(tmp_path / "b.json"), str(tmp_path / "flat")])
    assert result.exit_code == 2 and message in result.output
    assert isinstance(result.exception, SystemExit)  # a message, not a traceback


def test_unknown_class_option_is_a_usage_error(made):
    sample, budget_file, _ = made
    result = CliRunner().invoke(main, ["check", str(budget_file), str(sample), "--class", "hero"])
    assert result.exit_code == 2 and "no class 'hero' in this budget (it has: flat, photo)" in result.output


def test_export_pillow_and_schema(made, tmp_path):
    _, budget_file, doc = made
    result = run(["export", str(budget_file), "--format", "pillow", "--class", "flat"])
    assert result.exit_code == 0, result.output
    kwargs = json.loads(result.output.splitlines()[2])
    flat = next(c for c in doc["classes"] if c["name"] == "flat")
    assert kwargs == {"qtables": [sum(flat["quant_tables"]["luma"], []), sum(flat["quant_tables"]["chroma"], [])],
                      "subsampling": flat["setting"]["subsampling"], "optimize": True}
    schema = run(["export", "--format", "schema"])
    assert json.loads(schema.output) == contract.schema()
    assert run(["export", "--format", "cjpeg"]).exit_code == 2  # needs a budget


def test_exported_cjpeg_file_runs_as_is(made, tmp_path):
    """`export --format cjpeg -o FILE` writes a file cjpeg reads; its comment holds the command that is run."""
    exe = shutil.which("cjpeg")
    if exe is None:
        pytest.skip("cjpeg not installed (Debian: libjpeg-turbo-progs)")
    _, budget_file, doc = made
    out = tmp_path / "eightfold-qtables.txt"
    assert run(["export", str(budget_file), "--format", "cjpeg", "--class", "photo", "-o", str(out)]).exit_code == 0
    command = next(line for line in out.read_text().splitlines() if line.startswith("#   cjpeg "))[4:]
    Image.fromarray(flat_graphic(2)).save(tmp_path / "in.ppm")
    subprocess.run(command, shell=True, cwd=tmp_path, check=True)
    photo = next(c for c in doc["classes"] if c["name"] == "photo")
    with Image.open(tmp_path / "out.jpg") as im:
        assert list(im.quantization[0]) == sum(photo["quant_tables"]["luma"], [])
        assert list(im.quantization[1]) == sum(photo["quant_tables"]["chroma"], [])
        assert JpegImagePlugin.get_sampling(im) == {"4:4:4": 0, "4:2:0": 2}[photo["setting"]["subsampling"]]
    # two entries cannot share one -qtables file
    assert run(["export", str(budget_file), "--format", "cjpeg", "-o", str(out)]).exit_code == 2


def test_decide_on_a_result_document_says_so(made):
    _, budget_file, _ = made
    result = CliRunner().invoke(main, ["decide", str(budget_file)])
    assert result.exit_code == 2
    assert "is a result document ('eightfold sweep --json'), not a curves file" in result.output
    assert not isinstance(result.exception, AttributeError)


def test_sweep_plain_quality_chooses_cutoff_64_only(tmp_path):
    sample = write_set(tmp_path / "set", flat=2, photo=2)
    out = tmp_path / "doc.json"
    result = run(["sweep", str(sample), "--json", str(out), "--plain-quality", *SWEEP])
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    contract.validate_document(doc)
    assert doc["choice"] == "plain_quality"
    assert all(c["setting"]["cutoff"] == 64 and c["plain_fallback"]["extra_bytes"] == 0 for c in doc["classes"])
    assert "quality number only" in result.output


def test_a_stray_text_file_is_skipped_but_a_broken_jpeg_is_an_error(made, tmp_path):
    _, budget_file, _ = made
    root = tmp_path / "new"
    (root / "flat").mkdir(parents=True)
    Image.fromarray(flat_graphic(0)).save(root / "flat" / "ok.png")
    (root / "README.md").write_text("# new images for the autumn range\n")
    result = run(["check", str(budget_file), str(root), "--workers", "1", "--quiet", "--junit", str(tmp_path / "j.xml")])
    assert result.exit_code == 0, result.output
    assert "skipped: " + str(root / "README.md") + ": not an image file" in result.output
    skipped = [c for c in ET.parse(tmp_path / "j.xml").getroot().iter("testcase") if c.find("skipped") is not None]
    assert [c.get("name") for c in skipped] == [str(root / "README.md")]
    (root / "flat" / "bad.jpg").write_text("not a jpeg at all")
    result = run(["check", str(budget_file), str(root), "--workers", "1", "--quiet"])
    assert result.exit_code == 1 and "ERROR: not an image file" in result.output


def test_every_delivery_width_is_checked(tmp_path):
    sample = write_set(tmp_path / "set", flat=2, photo=0)
    (sample / "photo").rmdir()
    (sample / "classes.toml").write_text('[defaults]\nwidths = [96, "original"]\n')
    out = tmp_path / "b.json"
    assert run(["sweep", str(sample), "--json", str(out), *SWEEP]).exit_code == 0
    junit = tmp_path / "j.xml"
    result = run(["check", str(out), str(sample), "--workers", "1", "--quiet", "--junit", str(junit), "--json", "-"])
    report = json.loads(result.output)
    assert sorted((r["path"].rsplit("/", 1)[1], r["width"] or 0) for r in report["images"]) == [
        ("card0.png", 0), ("card0.png", 96), ("card1.png", 0), ("card1.png", 96)]
    assert sorted(c["width"] or 0 for c in report["classes"]) == [0, 96]
    names = {c.get("name") for c in ET.parse(junit).getroot().iter("testcase")}
    assert {"coverage", "coverage @ 96 px"} <= names
    assert any(n.endswith("card0.png @ 96 px") for n in names)
