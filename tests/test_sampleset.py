"""Tests for dct.sampleset: finding files, folder classes, classes.toml rules and validation.

The checks here are against the documented format and against Python's own ``fnmatch``/``tomllib``
semantics; sample folders are built in ``tmp_path``.
"""

from __future__ import annotations

import os
import pickle
import textwrap

import pytest

from dct.sampleset import (
    UNCLASSIFIED,
    ClassSpec,
    ImageJob,
    Rejection,
    SampleSet,
    assign_class,
    discover,
    folder_class,
    load_classes_file,
    load_classes_toml,
    parse_classes_toml,
)
from dct.tables import Setting


def make_tree(root, paths):
    for rel in paths:
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(b"x")  # discovery never decodes, so content does not matter


def write_toml(path, text):
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


# --------------------------------------------------------------------------------------------------
# Folder classes


def test_folder_classes_and_unclassified(tmp_path):
    make_tree(tmp_path, ["hero/b.jpg", "hero/a.jpg", "hero/2024/deep/c.png", "product/x.webp", "top.jpg"])
    s = discover(tmp_path)
    assert isinstance(s, SampleSet) and s.root == str(tmp_path)
    assert [j.key for j in s.jobs] == sorted(j.key for j in s.jobs)
    assert [(j.key, j.class_name) for j in s.jobs] == [
        ("hero/2024/deep/c.png", "hero"),
        ("hero/a.jpg", "hero"),
        ("hero/b.jpg", "hero"),
        ("product/x.webp", "product"),
        ("top.jpg", UNCLASSIFIED),
    ]
    assert list(s.classes) == ["hero", "product", UNCLASSIFIED]
    assert s.classes["hero"] == ClassSpec("hero")
    assert s.rejected == []
    job = s.jobs[1]
    assert job.source == os.path.join(str(tmp_path), "hero", "a.jpg") and os.path.isabs(job.source)
    assert job.widths == (None,) and job.background == (255, 255, 255) and job.settings is None


def test_every_non_hidden_file_is_a_candidate(tmp_path):
    make_tree(
        tmp_path,
        ["a/photo.jpg", "a/notes.txt", "a/README", "a/.DS_Store", ".git/config", "a/.hidden/x.jpg", "classes.toml"],
    )
    (tmp_path / "classes.toml").write_text("")
    found = discover(tmp_path)
    # Documentation beside the images is listed as skipped, not sent to the decoder as a broken image.
    assert [j.key for j in found.jobs] == ["a/photo.jpg"]
    assert found.skipped == ["a/README", "a/notes.txt"] and found.rejected == []


@pytest.mark.parametrize("name, text", [("README", True), ("readme.md", True), ("LICENSE.txt", True),
                                        ("notes.TXT", True), ("classes.json", True), ("photo.jpg", False),
                                        ("readme.png", False), ("scan.tif", False), ("noext", False)])
def test_text_files_are_known_by_name(name, text):
    from dct.sampleset import is_text_file

    assert is_text_file(name) is text


def test_empty_folder_gives_an_empty_set(tmp_path):
    s = discover(tmp_path)
    assert s.jobs == [] and s.classes == {} and s.rejected == []


def test_class_only_listed_when_it_has_files(tmp_path):
    make_tree(tmp_path, ["hero/a.jpg"])
    (tmp_path / "empty").mkdir()
    write_toml(tmp_path / "classes.toml", '[[class]]\nname = "banner"\npatterns = ["banner/*"]\n')
    assert list(discover(tmp_path).classes) == ["hero"]


def test_bad_sample_folder_raises(tmp_path):
    with pytest.raises(ValueError, match="does not exist"):
        discover(tmp_path / "missing")
    (tmp_path / "file.jpg").write_bytes(b"x")
    with pytest.raises(ValueError, match="is not a folder"):
        discover(tmp_path / "file.jpg")


def test_unusable_entries_are_rejected_with_a_reason(tmp_path):
    make_tree(tmp_path, ["hero/ok.jpg"])
    os.symlink(tmp_path / "nowhere.jpg", tmp_path / "hero" / "dangling.jpg")
    os.mkfifo(tmp_path / "hero" / "pipe.jpg")
    os.symlink(tmp_path / "hero", tmp_path / "hero" / "loop")  # a folder link back to itself
    s = discover(tmp_path)
    assert [j.key for j in s.jobs] == ["hero/ok.jpg"]
    assert s.rejected == [
        Rejection("hero/dangling.jpg", "broken symbolic link"),
        Rejection("hero/loop", "folder link skipped: same folder as 'hero'"),
        Rejection("hero/pipe.jpg", "not a regular file"),
    ]


def test_file_links_are_followed_and_folder_links_listed_once(tmp_path):
    make_tree(tmp_path, ["store/a.jpg", "store/b.jpg"])
    os.symlink(tmp_path / "store" / "a.jpg", tmp_path / "alias.jpg")
    os.symlink(tmp_path / "store", tmp_path / "zstore")  # a second way into 'store'
    s = discover(tmp_path)
    assert [j.key for j in s.jobs] == ["alias.jpg", "store/a.jpg", "store/b.jpg"]
    assert s.rejected == [Rejection("zstore", "folder link skipped: same folder as 'store'")]


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root lists folders regardless of mode")
def test_unlistable_folder_is_rejected(tmp_path):
    make_tree(tmp_path, ["locked/a.jpg", "open/b.jpg"])
    (tmp_path / "locked").chmod(0)
    try:
        s = discover(tmp_path)
    finally:
        (tmp_path / "locked").chmod(0o755)
    assert [j.key for j in s.jobs] == ["open/b.jpg"]
    assert s.rejected == [Rejection("locked", "cannot list folder: permission denied")]


def test_unlistable_folder_is_rejected_even_as_root(tmp_path, monkeypatch):
    # Root ignores permission bits, so make listing fail the way the kernel would for others.
    make_tree(tmp_path, ["locked/a.jpg", "open/b.jpg"])
    real_scandir = os.scandir

    def scandir(path):
        if os.path.basename(path) == "locked":
            raise PermissionError(13, "Permission denied", path)
        return real_scandir(path)

    monkeypatch.setattr(os, "scandir", scandir)
    s = discover(tmp_path)
    assert [j.key for j in s.jobs] == ["open/b.jpg"]
    assert s.rejected == [Rejection("locked", "cannot list folder: permission denied")]
    monkeypatch.setattr(os, "scandir", lambda path: (_ for _ in ()).throw(PermissionError(13, "Permission denied")))
    with pytest.raises(ValueError, match="cannot be listed: permission denied"):
        discover(tmp_path)


def test_folder_name_that_cannot_be_a_class_is_rejected_not_fatal(tmp_path):
    make_tree(tmp_path, ["bad\tname/a.jpg", "bad\tname/b.jpg", "good/c.jpg"])
    s = discover(tmp_path)
    assert [j.key for j in s.jobs] == ["good/c.jpg"]
    assert [r.path for r in s.rejected] == ["bad\tname/a.jpg", "bad\tname/b.jpg"]
    assert all("control characters" in r.error for r in s.rejected)


def test_discovery_is_deterministic(tmp_path):
    make_tree(tmp_path, [f"c{i % 3}/f{(i * 7) % 11}.jpg" for i in range(20)])
    a, b = discover(tmp_path), discover(tmp_path)
    assert a == b
    assert [j.key for j in a.jobs] == sorted(j.key for j in a.jobs)


def test_job_pickles_and_carries_settings():
    job = ImageJob("a/b.jpg", "a", b"\xff\xd8bytes", (600, None), (0, 0, 0), (Setting(80), Setting(60, 20, "4:4:4")))
    assert pickle.loads(pickle.dumps(job)) == job
    # A path job is a few hundred bytes of plain values: no file contents, no open handles.
    assert len(pickle.dumps(ImageJob("a/b.jpg", "a", "/x/a/b.jpg", (None,), (255, 255, 255)))) < 400


# --------------------------------------------------------------------------------------------------
# Pattern matching


def test_folder_class_of_a_key():
    assert folder_class("a.jpg") == UNCLASSIFIED
    assert folder_class("hero/a.jpg") == "hero"
    assert folder_class("hero/x/y/a.jpg") == "hero"


def test_assign_class_rules():
    rules = [("product/*", "product"), ("*-packshot.*", "packshot"), ("banners/201?/*", "old-banners")]
    assert assign_class("product/shoe.jpg", rules) == "product"
    assert assign_class("product/deep/shoe.jpg", rules) == "product"  # fnmatch '*' crosses '/'
    assert assign_class("misc/tent-packshot.png", rules) == "packshot"  # no '/': name only
    assert assign_class("product/tent-packshot.png", rules) == "product"  # first match wins
    assert assign_class("banners/2019/a.jpg", rules) == "old-banners"
    assert assign_class("banners/2020/a.jpg", rules) == "banners"  # unmatched: folder class
    assert assign_class("Product/SHOE.JPG", [("product/*.jpg", "p")]) == "p"  # case ignored
    assert assign_class("loose.jpg", rules) == UNCLASSIFIED
    assert assign_class("x/a-packshot", rules) == "x"  # '.' in the pattern is literal


# --------------------------------------------------------------------------------------------------
# classes.toml


EXAMPLE = """
[defaults]
target_ssim = 0.94
coverage = 0.8
widths = [1600, "original"]

[[class]]
name = "product"
patterns = ["product/*", "*-packshot.*"]
target_ssim = 0.96
widths = [1200, 600]
local_floor = 0.8
background = "#f0e0d0"

[[class]]
name = "hero"
chroma_floor = 0.9
local_floor = 0
background = "#000"
"""


def test_classes_toml_rules_and_specs(tmp_path):
    make_tree(tmp_path, ["product/boot.jpg", "misc/tent-packshot.jpg", "hero/sky.jpg", "lifestyle/camp.jpg", "x.jpg"])
    write_toml(tmp_path / "classes.toml", EXAMPLE)
    s = discover(tmp_path)
    assert [(j.key, j.class_name) for j in s.jobs] == [
        ("hero/sky.jpg", "hero"),
        ("lifestyle/camp.jpg", "lifestyle"),
        ("misc/tent-packshot.jpg", "product"),
        ("product/boot.jpg", "product"),
        ("x.jpg", UNCLASSIFIED),
    ]
    assert list(s.classes) == ["hero", "lifestyle", "product", UNCLASSIFIED]
    assert s.classes["product"] == ClassSpec(
        "product", target_ssim=0.96, coverage=0.8, local_floor=0.8, widths=(1200, 600), background=(240, 224, 208)
    )
    # hero: no patterns, so it only sets options for the folder class; "#000" is short hex.
    assert s.classes["hero"] == ClassSpec(
        "hero", target_ssim=0.94, coverage=0.8, chroma_floor=0.9, local_floor=0.0, widths=(1600, None), background=(0, 0, 0)
    )
    # Folder classes not listed take the file's [defaults].
    assert s.classes["lifestyle"] == ClassSpec("lifestyle", target_ssim=0.94, coverage=0.8, widths=(1600, None))
    product_job = next(j for j in s.jobs if j.key == "product/boot.jpg")
    assert product_job.widths == (1200, 600) and product_job.background == (240, 224, 208)
    assert "classes.toml" not in [j.key for j in s.jobs]


def test_load_classes_toml_returns_rules_in_order(tmp_path):
    rules, specs = load_classes_toml(write_toml(tmp_path / "c.toml", EXAMPLE))
    assert rules == [("product/*", "product"), ("*-packshot.*", "product")]
    assert list(specs) == ["product", "hero"]
    assert specs["product"].target_ssim == 0.96


def test_layering_of_defaults(tmp_path):
    path = write_toml(tmp_path / "c.toml", '[defaults]\ncoverage = 0.7\n[[class]]\nname = "a"\ntarget_ssim = 0.99\n')
    parsed = load_classes_file(path, defaults=ClassSpec("ignored", target_ssim=0.9, coverage=0.5, widths=(800,)))
    assert parsed.specs["a"] == ClassSpec("a", target_ssim=0.99, coverage=0.7, widths=(800,))
    assert parsed.spec_for("other") == ClassSpec("other", target_ssim=0.9, coverage=0.7, widths=(800,))


def test_explicit_classes_file_and_defaults_argument(tmp_path):
    sample = tmp_path / "sample"
    make_tree(sample, ["a/one.jpg", "b/two.jpg"])
    write_toml(sample / "classes.toml", '[[class]]\nname = "ignored"\npatterns = ["*"]\n')
    other = write_toml(tmp_path / "other.toml", '[[class]]\nname = "all-b"\npatterns = ["b/*"]\n')
    s = discover(sample, classes_file=other, defaults=ClassSpec("x", target_ssim=0.97))
    assert [(j.key, j.class_name) for j in s.jobs] == [("a/one.jpg", "a"), ("b/two.jpg", "all-b")]
    assert s.classes["a"].target_ssim == 0.97 and s.classes["all-b"].target_ssim == 0.97
    # Without a classes file the defaults argument still applies.
    (sample / "classes.toml").unlink()
    assert discover(sample, defaults=ClassSpec("x", coverage=0.6)).classes["b"].coverage == 0.6


def test_classes_file_inside_a_subfolder_is_not_an_image(tmp_path):
    make_tree(tmp_path, ["a/one.jpg"])
    cfg = write_toml(tmp_path / "a" / "rules.toml", '[[class]]\nname = "z"\npatterns = ["*.jpg"]\n')
    s = discover(tmp_path, classes_file=cfg)
    assert [(j.key, j.class_name) for j in s.jobs] == [("a/one.jpg", "z")]


def test_the_documented_example_parses():
    import dct.sampleset as module

    doc = module.__doc__
    start = doc.index("    # Applies to every class")
    example = textwrap.dedent(doc[start : doc.index("Patterns use")])
    parsed = parse_classes_toml(example)
    assert parsed.rules == (("product/*", "product"), ("*-packshot.*", "product"))
    assert parsed.defaults.widths == (1200, 600, None) and parsed.defaults.chroma_floor == 0.93
    assert parsed.specs["product"].target_ssim == 0.96 and parsed.specs["product"].widths == (1200, 600)


def test_parse_classes_toml_from_text():
    parsed = parse_classes_toml(b'[[class]]\nname = "p"\npatterns = ["p/*"]\n')
    assert parsed.rules == (("p/*", "p"),) and parsed.defaults == ClassSpec(UNCLASSIFIED)


@pytest.mark.parametrize(
    "text, match",
    [
        ("[defaults]\ntarget_ssim = 1.5\n", r"defaults: target_ssim: target_ssim must be in \(0, 1\], got 1\.5"),
        ("[defaults]\ntarget_ssim = 0\n", r"target_ssim must be in \(0, 1\], got 0\.0"),
        ("[defaults]\ntarget_ssim = true\n", r"target_ssim must be a number, got True"),
        ("[defaults]\ncoverage = 0\n", r"defaults: coverage: coverage must be in \(0, 1\]"),
        ("[defaults]\ncoverage = -0.5\n", r"coverage must be in \(0, 1\], got -0\.5"),
        ("[defaults]\nlocal_floor = -0.1\n", r"local_floor must be in \[0, 1\] \(0 turns it off\)"),
        ("[defaults]\nchroma_floor = 0\n", r"chroma_floor must be in \(0, 1\]"),
        ("[defaults]\nwidths = [1200, 0]\n", r"widths: widths must be positive integers .* got 0"),
        ("[defaults]\nwidths = [12.5]\n", r"widths must be positive integers .* got 12\.5"),
        ("[defaults]\nwidths = []\n", r"widths must not be empty"),
        ("[defaults]\nwidths = 600\n", r"widths must be a list, got 600"),
        ("[defaults]\nwidths = [600, 600]\n", r"widths must not repeat"),
        ("[defaults]\nwidths = [\"full\"]\n", r"got 'full'"),
        ('[defaults]\nbackground = "white"\n', r"background: background must be a hex colour .* got 'white'"),
        ('[defaults]\nbackground = "#12345"\n', r"got '#12345'"),
        ("[defaults]\nbackground = [1, 2, 3]\n", r"must be a hex colour"),
        ("[defaults]\ntarget_ssm = 0.9\n", r"defaults: unknown key 'target_ssm'"),
        ("[[class]]\nname = \"a\"\npattern = [\"a/*\"]\n", r"class 'a': unknown key 'pattern'"),
        ("[[class]]\npatterns = [\"a/*\"]\n", r"class #1: 'name' must be a string, got None"),
        ("[[class]]\nname = \"\"\n", r"class '': name must be a non-empty string"),
        ("[[class]]\nname = \"a/b\"\n", r"name must not contain '/'"),
        ("[[class]]\nname = \"a\"\n[[class]]\nname = \"a\"\n", r"class 'a': name is listed twice"),
        ("[[class]]\nname = \"a\"\npatterns = \"a/*\"\n", r"'patterns' must be a list of strings"),
        ("[[class]]\nname = \"a\"\npatterns = [\"\"]\n", r"'patterns' must hold non-empty strings"),
        ("[[class]]\nname = \"a\"\ntarget_ssim = 2\n", r"class 'a': target_ssim: target_ssim must be in \(0, 1\]"),
        ("[classes]\nname = \"a\"\n", r"unknown top-level key 'classes'"),
        ("class = 3\n", r"'class' must be an array of tables"),
        ("defaults = 3\n", r"'defaults' must be a table"),
        ("[defaults\n", r"invalid TOML"),
    ],
)
def test_bad_classes_toml_values(tmp_path, text, match):
    path = write_toml(tmp_path / "classes.toml", text)
    with pytest.raises(ValueError, match=match) as info:
        load_classes_toml(path)
    assert str(path) in str(info.value)  # the message names the file


def test_bad_classes_toml_stops_discovery(tmp_path):
    make_tree(tmp_path, ["a/x.jpg"])
    write_toml(tmp_path / "classes.toml", "[defaults]\ncoverage = 2\n")
    with pytest.raises(ValueError, match=r"classes\.toml: defaults: coverage"):
        discover(tmp_path)


def test_missing_or_non_utf8_classes_file(tmp_path):
    with pytest.raises(ValueError, match="classes file not found"):
        load_classes_toml(tmp_path / "nope.toml")
    (tmp_path / "latin1.toml").write_bytes(b'[[class]]\nname = "caf\xe9"\n')
    with pytest.raises(ValueError, match="not UTF-8 text"):
        load_classes_toml(tmp_path / "latin1.toml")


# --------------------------------------------------------------------------------------------------
# ClassSpec validation


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"target_ssim": 1.01}, r"target_ssim must be in \(0, 1\], got 1\.01"),
        ({"coverage": 0.0}, r"coverage must be in \(0, 1\], got 0\.0"),
        ({"chroma_floor": 1.2}, r"chroma_floor must be in \(0, 1\]"),
        ({"local_floor": 2}, r"local_floor must be in \[0, 1\]"),
        ({"widths": ()}, r"widths must not be empty"),
        ({"widths": (600, -1)}, r"got -1"),
        ({"widths": "600"}, r"widths must be a sequence"),
        ({"background": (0, 0, 256)}, r"background must be three integers 0\.\.255"),
        ({"background": (0, 0)}, r"background must be three integers"),
        ({"target_ssim": float("nan")}, r"target_ssim must be a number, got nan"),
    ],
)
def test_class_spec_validation(kwargs, match):
    with pytest.raises(ValueError, match=match):
        ClassSpec("a", **kwargs)


def test_class_spec_normalises_types():
    spec = ClassSpec("a", target_ssim=1, widths=[800, None], background=[1, 2, 3])
    assert spec.target_ssim == 1.0 and isinstance(spec.target_ssim, float)
    assert spec.widths == (800, None) and spec.background == (1, 2, 3)
    hash(spec)  # frozen and hashable after normalising lists to tuples
