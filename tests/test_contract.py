"""dct.contract: the budget document's schema and loading, the encoder exports, and the per-image check.

References: Pillow 13 (``Image.save`` ``qtables``/``subsampling``, ``Image.quantization`` in natural
order, ``JpegImagePlugin.get_sampling``); libjpeg-turbo 2.1's ``cjpeg`` and its ``wizard.txt`` (the
``-qtables`` file format, ``-qslots``, ``-sample``); JSON Schema draft 2020-12 via ``jsonschema``.
"""

import copy
from dataclasses import replace
import io
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PIL import Image, JpegImagePlugin

from dct import budget, contract, io as dio
from dct.evaluate import VerifyJob, verify_image
from dct.grid import Grid
from dct.pipeline import run_sweep
from dct.runner import make_runner
from dct.sampleset import discover
from dct.tables import Setting
from tests.sets import flat_graphic, noisy_photo, write_set

GRID = Grid(qualities=tuple(range(30, 91)), cutoffs=(64, 28), subsamplings=("4:4:4", "4:2:0"))
# get_sampling: Pillow's codes for the luma sampling factors (JpegImagePlugin, Pillow 13)
PILLOW_SAMPLING = {"4:4:4": 0, "4:2:2": 1, "4:2:0": 2}


@pytest.fixture(scope="module")
def doc(tmp_path_factory):
    sample = discover(write_set(tmp_path_factory.mktemp("set"), flat=3, photo=3))
    classes = {n: replace(s, target_ssim=0.9, coverage=0.6) for n, s in sample.classes.items()}
    return run_sweep(sample.jobs, classes, grid=GRID, runner=make_runner(workers=1)).document


def entry_for(setting: Setting, name="product") -> contract.ClassBudget:
    luma, chroma = setting.tables()
    return contract.ClassBudget(name, None, setting, tuple(luma.ravel().tolist()), tuple(chroma.ravel().tolist()),
                                budget.Targets())


# --- schema and loading ----------------------------------------------------------------------------


def test_schema_is_draft_2020_12_and_ships_in_the_package():
    import jsonschema

    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib

    s = contract.schema()
    assert s["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(s)
    assert (Path(contract.__file__).parent / contract.SCHEMA_FILE).is_file()
    pyproject = tomllib.loads((Path(__file__).parents[1] / "pyproject.toml").read_text())
    assert contract.SCHEMA_FILE in pyproject["tool"]["setuptools"]["package-data"]["dct"]


def test_sweep_documents_validate_and_load(doc):
    contract.validate_document(doc)
    b = contract.parse_document(doc)
    assert b.version == 2 and b.choice == "custom_tables" and b.notes == []
    assert {c.name for c in b.classes} | set(b.undecided) == {"flat", "photo"}
    for c in b.classes:
        luma, chroma = c.setting.tables()
        assert c.luma == tuple(luma.ravel()) and c.chroma == tuple(chroma.ravel())


def test_version_1_documents_still_load(doc):
    old = copy.deepcopy(doc)
    old["schema_version"] = 1
    del old["choice"]
    for c in old["classes"]:
        del c["plain_fallback"]
    b = contract.parse_document(old)
    assert b.version == 1 and b.choice == "custom_tables"
    assert all(c.plain_fallback is None for c in b.classes)
    assert "schema_version 1" in b.notes[0]


def test_version_2_needs_its_new_keys(doc):
    broken = copy.deepcopy(doc)
    del broken["classes"][0]["plain_fallback"]
    with pytest.raises(contract.BudgetError, match=r"at classes/0: 'plain_fallback' is a required property"):
        contract.parse_document(broken)


def test_newer_version_is_refused_with_the_reason(doc):
    newer = dict(doc, schema_version=3)
    with pytest.raises(contract.BudgetError, match=r"schema_version 3, newer than this Eightfold reads \(1, 2\)"):
        contract.parse_document(newer)


@pytest.mark.parametrize(
    "mutate, message",
    [
        (lambda d: d["classes"][0]["quant_tables"]["luma"][0].__setitem__(0, 300), r"classes/0/quant_tables/luma/0/0: 300 is greater than the maximum of 255"),
        (lambda d: d["classes"][0]["setting"].__setitem__("subsampling", "4:1:1"), r"classes/0/setting"),
        (lambda d: d.__setitem__("surprise", 1), r"Additional properties are not allowed \('surprise'"),
        (lambda d: d["classes"][0]["quant_tables"]["luma"][0].__setitem__(0, 1), r"are not the tables of its setting"),
    ],
)
def test_bad_documents_say_where(doc, mutate, message):
    bad = copy.deepcopy(doc)
    decided = [c for c in bad["classes"] if c["setting"]]
    bad["classes"] = decided + [c for c in bad["classes"] if not c["setting"]]
    mutate(bad)
    with pytest.raises(contract.BudgetError, match=message):
        contract.parse_document(bad)


def test_not_a_document(tmp_path):
    (tmp_path / "a.json").write_text("[1, 2]")
    with pytest.raises(contract.BudgetError, match="expected a JSON object, got a JSON array"):
        contract.load_document(tmp_path / "a.json")
    (tmp_path / "b.json").write_text("{not json")
    with pytest.raises(contract.BudgetError, match="invalid JSON at line 1"):
        contract.load_document(tmp_path / "b.json")
    (tmp_path / "c.json").write_text(json.dumps({"classes": {"flat": {}}, "images": []}))
    with pytest.raises(contract.BudgetError, match="curves file"):
        contract.load_document(tmp_path / "c.json")


# --- Pillow export ------------------------------------------------------------------------------------


@pytest.mark.parametrize("setting", [Setting(43, 28, "4:4:4"), Setting(71, 64, "4:2:0"), Setting(25, 10, "4:2:2")])
def test_pillow_kwargs_reproduce_the_tables_and_the_verify_bytes(setting, tmp_path):
    pixels = noisy_photo(2)
    e = entry_for(setting)
    kwargs = contract.pillow_kwargs(e)
    assert "quality" not in kwargs  # Pillow would scale the tables by it
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "JPEG", **kwargs)
    with Image.open(io.BytesIO(buf.getvalue())) as im:
        assert [list(im.quantization[0]), list(im.quantization[1])] == kwargs["qtables"]
        assert JpegImagePlugin.get_sampling(im) == PILLOW_SAMPLING[setting.subsampling]
    # the same bytes as dct.io's encoder, and as what --verify reports
    assert buf.getvalue() == dio.encode_jpeg(pixels, quality=setting.quality, cutoff=setting.cutoff,
                                             subsampling=setting.subsampling)
    Image.fromarray(pixels).save(tmp_path / "src.png")
    verified = verify_image(VerifyJob("k", str(tmp_path / "src.png"), (255, 255, 255), ((None, setting),)))
    assert verified["widths"][0]["actual_bytes"] == len(buf.getvalue())


def test_pillow_snippet_runs_and_writes_the_budget(tmp_path):
    e = entry_for(Setting(52, 28, "4:2:0"))
    Image.fromarray(flat_graphic(4)).save(tmp_path / "in.png")
    subprocess.run([sys.executable, "-c", contract.pillow_snippet(e)], cwd=tmp_path, check=True)
    with Image.open(tmp_path / "out.jpg") as im:
        assert list(im.quantization[0]) == list(e.luma) and list(im.quantization[1]) == list(e.chroma)
        assert JpegImagePlugin.get_sampling(im) == 2


# --- cjpeg export -------------------------------------------------------------------------------------


def cjpeg():
    path = shutil.which("cjpeg")
    if path is None:
        if os.environ.get("CI"):
            pytest.fail("cjpeg missing under CI: scripts/test.sh installs Debian's libjpeg-turbo-progs")
        pytest.skip("cjpeg not installed (Debian: apt-get install libjpeg-turbo-progs)")
    return path


@pytest.mark.parametrize("setting", [Setting(43, 28, "4:4:4"), Setting(71, 64, "4:2:0"), Setting(25, 10, "4:2:2")])
def test_cjpeg_round_trip(setting, tmp_path):
    """cjpeg run with the exported file and command writes exactly the budget's tables and sampling."""
    exe = cjpeg()
    e = entry_for(setting)
    (tmp_path / "q.txt").write_text(contract.cjpeg_tables_text(e))
    Image.fromarray(noisy_photo(1)).save(tmp_path / "in.ppm")
    args = contract.cjpeg_args(e, tables_file="q.txt", source="in.ppm", output="out.jpg")
    assert "-quality" not in args  # with -quality cjpeg would scale the tables (wizard.txt)
    subprocess.run([exe, *args], cwd=tmp_path, check=True, capture_output=True)
    with Image.open(tmp_path / "out.jpg") as im:
        assert list(im.quantization[0]) == list(e.luma)
        assert list(im.quantization[1]) == list(e.chroma)
        assert JpegImagePlugin.get_sampling(im) == PILLOW_SAMPLING[setting.subsampling]
        assert im.size == (136, 112)
    assert contract.cjpeg_command(e).startswith("cjpeg -qtables eightfold-qtables.txt -qslots 0,1 -sample ")


def test_cjpeg_grayscale_takes_table_0(tmp_path):
    exe = cjpeg()
    e = entry_for(Setting(60, 40, "4:2:0"))
    (tmp_path / "q.txt").write_text(contract.cjpeg_tables_text(e))
    Image.fromarray(noisy_photo(1)[:, :, 1]).save(tmp_path / "in.pgm")
    subprocess.run([exe, *contract.cjpeg_args(e, tables_file="q.txt", source="in.pgm")], cwd=tmp_path, check=True)
    with Image.open(tmp_path / "out.jpg") as im:
        assert im.mode == "L" and list(im.quantization[0]) == list(e.luma)


# --- the per-image check --------------------------------------------------------------------------------


def test_failed_checks_agree_with_accepts():
    rng = np.random.default_rng(7)
    t = budget.Targets(target_ssim=0.95, chroma_floor=0.93, local_floor=0.85)
    for _ in range(500):
        v = rng.uniform(0.8, 1.0, 4)
        gray = rng.random() < 0.2
        m = budget.Measure(1000, v[0], None if gray else v[1], None if gray else v[2], v[3])
        assert (budget.failed_checks(m, t) == []) == budget.accepts(m, t)


def test_check_image_uses_the_real_file_and_names_the_failing_check():
    e = entry_for(Setting(20, 64, "4:2:0"))
    e = contract.ClassBudget(e.name, e.width, e.setting, e.luma, e.chroma,
                             budget.Targets(target_ssim=0.99, chroma_floor=0.5, local_floor=0))
    r = contract.check_image(noisy_photo(3), e, path="p.png")
    assert not r.passes and r.reasons[0] == f"luma SSIM {r.ssim:.4f} < 0.99"
    # q20 also rings at the edges: the visible-damage check names itself too (dct.damage)
    assert r.reasons[1:] == [f"edge SSIM {r.edge_ssim:.4f} < 0.92"]
    data = dio.encode_jpeg(noisy_photo(3), quality=20, cutoff=64, subsampling="4:2:0")
    assert r.actual_bytes == len(data)


def test_plain_fallback_is_the_cheapest_qualifying_cutoff_64_setting():
    """Against a brute-force oracle over random curves."""
    rng = np.random.default_rng(3)
    settings = [Setting(q, k, s) for q in (30, 50, 70, 90) for k in (64, 28) for s in ("4:4:4", "4:2:0")]
    t = budget.Targets(target_ssim=0.9, coverage=0.6, local_floor=0)
    for _ in range(50):
        table = {f"i{i}": {s: budget.Measure(int(rng.integers(500, 5000)), float(rng.uniform(0.8, 1)), None, None, 1.0)
                           for s in settings} for i in range(4)}
        d = budget.decide_class(table, t)
        qual = [budget.summarize(s, [table[k][s] for k in sorted(table)], t) for s in settings]
        plain = [q for q in qual if q.qualifies and q.setting.cutoff == 64]
        if not plain:
            assert d.plain is None
            continue
        cheapest = min(q.total_bytes for q in plain)
        assert d.plain.total_bytes == cheapest and d.plain.setting.cutoff == 64
        assert d.plain_extra_bytes == cheapest - d.summary.total_bytes >= 0
        only = budget.decide_class(table, t, plain_only=True)
        assert only.summary.total_bytes == cheapest and only.plain_extra_bytes == 0


def test_grayscale_images_are_checked_on_luma_alone():
    gray = noisy_photo(4)[:, :, 0]
    e = entry_for(Setting(60, 64, "4:2:0"))
    r = contract.check_image(gray, e, path="g.png")
    assert r.ssim_cb is None and r.ssim_cr is None and r.ssim is not None
    # one component, the luma table alone: the bytes dct.io writes for grayscale
    assert r.actual_bytes == len(dio.encode_jpeg(gray, quality=60, cutoff=64))
