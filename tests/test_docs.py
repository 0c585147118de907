"""The science notes (docs/science.md) and the citations that point into them.

Code, tests and reports cite the notes as "docs/science.md, section N" (or "section N.M",
"sections N and M", "sections N to M"). These tests keep every such citation pointing at a
section that exists, keep the index in docs/README.md in step with the notes, and stop
new citations of the developers' brief that the project does not ship ("SCIENCE.md").
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

#: Files that still cite the old, unshipped "SCIENCE.md" (same section numbers: section N
#: there is section N of docs/science.md). The sweep that rewrites them is mechanical;
#: a file leaves this list when it is swept. A file not listed here must not cite it.
NOT_YET_SWEPT: frozenset[str] = frozenset()

_CITE = re.compile(
    r"docs/science\.md,?\s+(?:sections?|§)\s*"
    r"(\d+(?:\.\d+)?(?:(?:\s*,\s*|\s+and\s+|\s+to\s+|\s*-\s*)\d+(?:\.\d+)?)*)"
)
_OLD = re.compile(r"SCIENCE(?:\.md)?\s*(?:§|section)|SCIENCE\.md|DETECTORS\.md")


def _sources(repo_root: Path) -> list[Path]:
    files = [*sorted((repo_root / "gpctools").rglob("*.py")), *sorted((repo_root / "tests").rglob("*.py")),
             *sorted((repo_root / "gpctools").rglob("*.j2")), *sorted((repo_root / "gpctools" / "data").glob("*.csv")),
             repo_root / "README.md", repo_root / "DEVELOPERS.md", repo_root / "CHANGELOG.md",
             *sorted((repo_root / "gpctools" / "templates").glob("*.toml")), *sorted((repo_root / "gpctools" / "templates").glob("*.csv"))]
    return [f for f in files if f.is_file()]


def science_sections(text: str) -> set[str]:
    """Section numbers ("3", "3.2", ...) defined by headings of docs/science.md."""
    return set(re.findall(r"^#{2,3} (\d+(?:\.\d+)?)[ .]", text, flags=re.MULTILINE))


def cited_sections(text: str) -> list[str]:
    """Every section number a text cites as "docs/science.md, section(s) ..."."""
    found: list[str] = []
    for m in _CITE.finditer(text):
        numbers = re.findall(r"\d+(?:\.\d+)?", m.group(1))
        if re.search(r"\bto\b|-", m.group(1)) and len(numbers) == 2 and "." not in "".join(numbers):
            found += [str(n) for n in range(int(numbers[0]), int(numbers[1]) + 1)]
        else:
            found += numbers
    return found


@pytest.fixture(scope="module")
def science_text(repo_root: Path) -> str:
    return (repo_root / "docs" / "science.md").read_text(encoding="utf-8")


def test_citation_parser() -> None:
    text = ("see docs/science.md, section 2.3; docs/science.md, sections 3 to 5 and "
            "docs/science.md sections 1, 4 and 11.2 (docs/science.md §8)")
    assert cited_sections(text) == ["2.3", "3", "4", "5", "1", "4", "11.2", "8"]
    assert cited_sections("SCIENCE.md section 2") == []


def test_sections_are_numbered_without_gaps(science_text: str) -> None:
    top = sorted(int(s) for s in science_sections(science_text) if "." not in s)
    assert top == list(range(1, top[-1] + 1))
    # Sections 1-10 keep the numbers the code cited before the notes moved into docs/.
    titles = dict(re.findall(r"^## (\d+)\. (.+)$", science_text, flags=re.MULTILINE))
    for number, word in {"1": "averages", "2": "Calibration", "3": "Mayo", "4": "estimators",
                         "5": "drift", "6": "Temperature", "7": "Reference", "8": "Exact",
                         "9": "molar mass low", "10": "Safety"}.items():
        assert word in titles[number], (number, titles[number])


def test_every_citation_points_at_a_section(repo_root: Path, science_text: str) -> None:
    sections = science_sections(science_text)
    broken = [f"{f.relative_to(repo_root)}: section {s}" for f in _sources(repo_root)
              for s in cited_sections(f.read_text(encoding="utf-8", errors="replace"))
              if s not in sections]
    assert not broken, "\n".join(broken)


def test_no_new_citations_of_the_unshipped_brief(repo_root: Path) -> None:
    this = Path(__file__).resolve()
    citing = {str(f.relative_to(repo_root)) for f in _sources(repo_root)
              if f.resolve() != this and _OLD.search(f.read_text(encoding="utf-8", errors="replace"))}
    new = sorted(citing - NOT_YET_SWEPT)
    assert not new, ("cite docs/science.md (same section numbers) or docs/detectors.md instead of "
                     "SCIENCE.md / DETECTORS.md in: "
                     + ", ".join(new))


def test_index_lists_every_section(repo_root: Path, science_text: str) -> None:
    index = (repo_root / "docs" / "README.md").read_text(encoding="utf-8")
    listed = re.findall(r"^(\d+)\. ", index, flags=re.MULTILINE)
    top = sorted((s for s in science_sections(science_text) if "." not in s), key=int)
    assert listed == top
