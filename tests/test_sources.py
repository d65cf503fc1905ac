"""The repository stands alone: every citation points to a publication or to docs/sources.md.

Comments and docs cite publications themselves or `docs/sources.md#<key>` (project rule, see docs/sources.md);
a pointer to a notes file outside the repository or to an issue number cannot be followed by anyone who
clones the project.
"""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SOURCES = ROOT / "docs" / "sources.md"

# Pointers that lead outside the repository: the team's former notes files, the shared folder they lived
# in, and issue numbers used as sources ("issue N", "(Issue #N)").
OUTSIDE_POINTERS = {
    "notes file outside the repository": re.compile(r"\b(?:REFERENCES|DESIGN)\.md\b"),
    "shared folder outside the repository": re.compile(r"\.\./shared\b"),
    "issue number used as a source": re.compile(r"\bissue\s+#?\d+", re.IGNORECASE),
}
SOURCES_LINK = re.compile(r"docs/sources\.md#([A-Za-z0-9_-]+)")
LOCAL_LINK = re.compile(r"\]\(#([A-Za-z0-9_-]+)\)")
HEADING = re.compile(r"^#{1,6}\s+(.+?)\s*#*\s*$", re.MULTILINE)
EXPLICIT_ANCHOR = re.compile(r"""<a\s+(?:id|name)=["']([^"']+)["']""")
TAGS = ("checked", "from memory", "common practice, no source")


def tracked_files() -> list[Path]:
    try:
        listing = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True, check=True).stdout
    except (OSError, subprocess.CalledProcessError):
        pytest.skip("not a git checkout: the tracked files cannot be listed")
    return [ROOT / name for name in listing.decode().split("\0") if name and (ROOT / name).is_file()]


def text_of(path: Path) -> str | None:
    data = path.read_bytes()
    return None if b"\0" in data else data.decode("utf-8", errors="replace")


def github_anchor(heading: str) -> str:
    """The anchor GitHub gives a Markdown heading: lower case, punctuation dropped, spaces to hyphens."""
    return re.sub(r"[^\w\- ]", "", heading.strip().lower()).replace(" ", "-")


def anchors_of_sources() -> set[str]:
    text = SOURCES.read_text(encoding="utf-8")
    return {github_anchor(h) for h in HEADING.findall(text)} | set(EXPLICIT_ANCHOR.findall(text))


def test_the_patterns_catch_what_they_are_meant_to():
    # the checks below are only as good as these patterns (common practice, no source)
    issue = OUTSIDE_POINTERS["issue number used as a source"]
    assert issue.search("target ≤ 0.6, issue " + "3") and issue.search("(Issue " + "#12)")
    assert not issue.search("the issue's bar") and not issue.search("tissue 3")
    assert OUTSIDE_POINTERS["notes file outside the repository"].search("see " + "REFERENCES" + ".md §1a")
    assert OUTSIDE_POINTERS["notes file outside the repository"].search("(" + "DESIGN" + ".md)")
    assert SOURCES_LINK.findall("docs/sources.md#yang2007-tau4 [V]") == ["yang2007-tau4"]
    assert github_anchor("yang2007-tau4") == "yang2007-tau4"
    assert github_anchor("fourfold defaults") == "fourfold-defaults"


def test_no_tracked_file_points_outside_the_repository():
    found = []
    for path in tracked_files():
        text = text_of(path)
        if text is None:
            continue
        for number, line in enumerate(text.splitlines(), 1):
            for what, pattern in OUTSIDE_POINTERS.items():
                if pattern.search(line):
                    found.append(f"{path.relative_to(ROOT)}:{number}: {what}: {line.strip()}")
    assert not found, "cite the publication or docs/sources.md#<key> instead:\n" + "\n".join(found)


def test_every_cited_sources_entry_exists():
    anchors = anchors_of_sources()
    missing = []
    for path in tracked_files():
        text = text_of(path)
        if text is None:
            continue
        keys = SOURCES_LINK.findall(text) + (LOCAL_LINK.findall(text) if path == SOURCES else [])
        missing += [f"{path.relative_to(ROOT)}: #{key}" for key in keys if key not in anchors]
    assert not missing, "no such entry in docs/sources.md:\n" + "\n".join(missing)


def test_every_sources_entry_has_a_tag():
    # an entry is a level-3 heading (its key); its "- Tag:" line starts with one of the tags the file explains
    text = SOURCES.read_text(encoding="utf-8")
    entries = re.split(r"^### ", text, flags=re.MULTILINE)[1:]
    assert len(entries) >= 40
    untagged = []
    for entry in entries:
        key = entry.splitlines()[0].strip()
        tag = re.search(r"^- Tag: (.+)$", entry.split("\n## ")[0], re.MULTILINE)
        if not tag or not tag.group(1).startswith(TAGS):
            untagged.append(key)
    assert not untagged, f"entries without a tag of {TAGS}: {untagged}"
