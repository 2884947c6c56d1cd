"""The project stands on its own: nothing it ships points outside the repository.

Every tracked file (outside `.ci/`, whose scripts set up the machine they run on) is
read as text and checked for

- absolute paths of a machine (a home, root or scratch folder);
- documents that are not in the repository (a design note, an interface note or a list
  of reference values kept elsewhere, or a folder shared beside the checkout);
- the history of the work instead of the product (issue numbers, numbered sessions,
  goals declared reached);

and every relative link in the Markdown files must name a tracked file inside the
repository.  The patterns are assembled from pieces so that this file does not match
itself.  Skipped when the tests do not run from a git checkout.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

#: Files whose text is not prose or code of the product: `.gitignore` holds patterns
#: relative to the repository root (a leading slash there means the checkout's own folder).
SKIP_FILES = {".gitignore"}
SKIP_DIRS = (".ci/",)

_S = "/"
ABSOLUTE = re.compile(r"(?<![\w.~-])" + _S + r"(?:work|home|root|tmp)" + _S)
OUTSIDE_DOCS = re.compile(
    r"\b(?:interface|design)\.md\b|\breference" + "-" + r"checks\b|(?:\.\./)+shared" + _S
    + r"|\bshared" + _S + r"[\w.-]+\.md\b")
HISTORY = re.compile(
    r"\bissue\s*#?\d+|\b(?:first|second|third|fourth|fifth|sixth|seventh|eighth|ninth|"
    r"tenth|\d+(?:st|nd|rd|th)|earlier|previous|last|next)\s+session\b"
    r"|\btargets?\b[^.\n]{0,40}?\bmet\b",
    re.I)
MD_LINK = re.compile(r"\]\(([^)\s]+)\)")


def _tracked() -> list[str]:
    if shutil.which("git") is None:
        pytest.skip("git is not installed")
    try:
        out = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True,
                             check=True, timeout=60).stdout
    except (subprocess.CalledProcessError, OSError):
        pytest.skip("not a git checkout")
    files = [f for f in out.decode("utf-8", "replace").split("\0") if f]
    if not files:
        pytest.skip("not a git checkout")
    return files


def _texts():
    for name in _tracked():
        if name in SKIP_FILES or name.startswith(SKIP_DIRS):
            continue
        path = ROOT / name
        try:
            data = path.read_bytes()
        except OSError:            # deleted in the working tree, not yet committed
            continue
        if b"\0" in data[:8192]:   # binary
            continue
        yield name, data.decode("utf-8", "replace")


def _hits(pattern: re.Pattern) -> list[str]:
    found = []
    for name, text in _texts():
        for m in pattern.finditer(text):
            line = text.count("\n", 0, m.start()) + 1
            found.append(f"{name}:{line}: {m.group(0)!r}")
    return found


def test_no_absolute_paths_of_a_machine():
    assert _hits(ABSOLUTE) == []


def test_no_documents_outside_the_repository():
    assert _hits(OUTSIDE_DOCS) == []


def test_no_history_of_the_work():
    assert _hits(HISTORY) == []


def test_markdown_links_stay_inside_and_resolve():
    tracked = set(_tracked())
    bad = []
    for name, text in _texts():
        if not name.endswith(".md"):
            continue
        for m in MD_LINK.finditer(text):
            target = m.group(1).split("#", 1)[0]
            if not target or re.match(r"^[a-z][a-z0-9+.-]*:", target, re.I):
                continue           # an anchor on the same page, or a web address
            resolved = (ROOT / name).parent.joinpath(target).resolve()
            line = text.count("\n", 0, m.start()) + 1
            try:
                rel = resolved.relative_to(ROOT).as_posix()
            except ValueError:
                bad.append(f"{name}:{line}: {target} leaves the repository")
                continue
            if rel not in tracked and not any(t.startswith(rel + "/") for t in tracked):
                bad.append(f"{name}:{line}: {target} is not a tracked file")
    assert bad == []


def test_the_checks_can_fail():
    """Each pattern matches the kind of text it is there to refuse."""
    assert ABSOLUTE.search("see " + _S + "work" + _S + "x") and not ABSOLUTE.search("~/.local/share/")
    assert OUTSIDE_DOCS.search("shapes in ../" + "shared" + _S + "notes.md")
    assert OUTSIDE_DOCS.search("as " + "interface" + ".md says")
    assert HISTORY.search("Hostile files (" + "issue" + " 8)")
    assert HISTORY.search("at the end of the " + "sixth" + " session")
    assert HISTORY.search("tar" + "get 1 s: met")
    assert HISTORY.search("The tar" + "get (10 s) is met on the benchmark")
    assert not HISTORY.search("sessionmaker(engine)")
