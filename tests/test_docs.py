"""The contributors' guide stays short, and its pointers to the experiment records hold.

DEVELOPERS.md is read by every newcomer; the records of experiments live in
docs/experiments/, one file per topic, each listed in that folder's README.md.
"""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GUIDE = ROOT / "DEVELOPERS.md"
RECORDS = ROOT / "docs" / "experiments"
INDEX = RECORDS / "README.md"

# A Markdown link's target: [text](target) or [text](target#part)
LINK = re.compile(r"\]\(([^)#\s]+)(?:#[^)\s]*)?\)")
# A record named anywhere in plain text (code comments, docstrings, README prose)
RECORD_NAME = re.compile(r"docs/experiments/[\w.-]+\.md")


def _linked(page: Path) -> set[Path]:
    """Every local file a Markdown page links to, resolved from the page's folder."""
    text = page.read_text(encoding="utf-8")
    return {(page.parent / t).resolve() for t in LINK.findall(text) if "://" not in t}


def test_guide_stays_under_30_kb():
    size = GUIDE.stat().st_size
    assert size < 30 * 1024, (
        f"DEVELOPERS.md is {size} bytes; move experiment records to docs/experiments/"
    )


def test_records_linked_from_the_guide_exist():
    records = [p for p in _linked(GUIDE) if RECORDS in p.parents]
    assert records, "DEVELOPERS.md links no experiment record"
    missing = sorted(str(p.relative_to(ROOT)) for p in records if not p.is_file())
    assert not missing, f"DEVELOPERS.md links records that do not exist: {missing}"


def test_every_record_is_in_the_index_and_the_index_points_at_records():
    linked = _linked(INDEX)
    files = {p.resolve() for p in RECORDS.glob("*.md") if p.name != "README.md"}
    assert files, "docs/experiments/ holds no record"
    unlisted = sorted(p.name for p in files - linked)
    assert not unlisted, f"records missing from docs/experiments/README.md: {unlisted}"
    dangling = sorted(p.name for p in linked if RECORDS == p.parent and not p.is_file())
    assert not dangling, f"docs/experiments/README.md lists missing records: {dangling}"


def test_record_names_are_dated():
    for p in RECORDS.glob("*.md"):
        if p.name != "README.md":
            assert re.fullmatch(r"\d{4}-\d{2}-\d{2}-[a-z0-9-]+\.md", p.name), p.name


def test_local_links_of_the_docs_resolve():
    pages = [GUIDE, ROOT / "README.md", *sorted((ROOT / "docs").rglob("*.md"))]
    broken = [
        f"{page.relative_to(ROOT)} -> {target.relative_to(ROOT)}"
        for page in pages
        for target in _linked(page)
        if ROOT in target.parents and not target.exists()
    ]
    assert not broken, f"links to missing files: {broken}"


def test_records_named_in_code_and_docs_exist():
    sources = [ROOT / "README.md", *(ROOT / "tests").rglob("*.md")]
    for folder in ("wordspot", "tests", "recordings"):
        sources += (ROOT / folder).rglob("*.py")
    missing = sorted(
        f"{src.relative_to(ROOT)}: {name}"
        for src in sources
        for name in RECORD_NAME.findall(src.read_text(encoding="utf-8"))
        if not (ROOT / name).is_file()
    )
    assert not missing, f"pointers to records that do not exist: {missing}"
