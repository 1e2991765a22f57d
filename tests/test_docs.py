"""Every check code, rule, API route and file column is documented, and the project's documents
point only at themselves and at published sources (DEVELOPERS.md: docs ship with the change)."""

import re
import shutil
import subprocess
from dataclasses import fields
from pathlib import Path

import pytest

from design_core import CHECK_CODES, Rules

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")
DOCS = ROOT / "docs"


def _doc(name: str) -> str:
    return (DOCS / name).read_text(encoding="utf-8")


def test_every_check_code_is_in_the_readme():
    missing = [code for code in CHECK_CODES if f"`{code}`" not in README]
    assert missing == []


def test_every_rule_is_in_the_readme_with_its_source():
    missing = [doc.name for doc in Rules.describe_defaults() if f"`{doc.name}`" not in README]
    assert missing == []


def test_every_rule_names_its_source_label_and_unit():
    for doc in Rules.describe_defaults():
        assert doc.label and len(doc.source) > 20, doc.name
        assert doc.unit is not None, doc.name


def test_readme_rules_table_is_up_to_date():
    from design_core.rules import rules_markdown_table

    start, end = "<!-- rules:start -->\n", "\n<!-- rules:end -->"
    assert start in README and end in README
    block = README.split(start, 1)[1].split(end, 1)[0]
    assert block.strip() == rules_markdown_table().strip(), (
        "README's rules table is stale: regenerate it with "
        "python -c 'from design_core.rules import rules_markdown_table as t; print(t())'")


def test_every_schedule_column_is_in_the_readme():
    from fieldapp.schedule_io import COLUMNS

    missing = [c for c in COLUMNS if f"| `{c}` |" not in README]
    assert missing == []


# ---- docs/ -------------------------------------------------------------------------------------

def _named_rows(text: str) -> dict[str, str]:
    """{code: plain-words name} from table rows that read ``| Words | `code` | ...``."""
    return {m.group(2): m.group(1).strip()
            for m in re.finditer(r"^\| ([^|`]+?) \| `([a-z_]+)` \|", text, re.MULTILINE)}


@pytest.mark.parametrize("where", ["docs/checks.md", "README.md"])
def test_every_check_code_has_its_plain_words_beside_it(where):
    rows = _named_rows((ROOT / where).read_text(encoding="utf-8"))
    missing = [code for code in CHECK_CODES if code not in rows]
    assert missing == [], f"{where} has no '| Words | `code` |' row for {missing}"
    # the words are words, not the code again
    assert all(rows[code] and rows[code] != code for code in CHECK_CODES)


def test_plain_words_of_the_checks_agree_between_readme_and_docs():
    docs, readme = _named_rows(_doc("checks.md")), _named_rows(README)
    assert {c: docs[c] for c in CHECK_CODES} == {c: readme[c] for c in CHECK_CODES}


def test_the_plain_words_of_the_checks_are_the_labels_the_screens_show():
    from design_core import CHECK_LABELS

    docs = _named_rows(_doc("checks.md"))
    assert {c: docs[c] for c in CHECK_CODES} == {c: CHECK_LABELS.get(c) for c in CHECK_CODES}


def test_the_checks_said_to_run_on_a_saved_record_are_those_the_recheck_runs():
    """docs/checks.md's first table is what a saved record carries; every other code is in the
    table of checks not yet run by the recheck (a code moving into AS_BUILT_CODES moves rows)."""
    from design_core.checks import AS_BUILT_CODES

    text = _doc("checks.md")
    first, later = text.split("## Checks computed by design_core, not yet run by the recheck", 1)
    assert list(_named_rows(first)) == list(AS_BUILT_CODES)
    assert sorted(_named_rows(later)) == sorted(set(CHECK_CODES) - set(AS_BUILT_CODES))


def test_docs_name_no_check_code_that_does_not_exist():
    rows = _named_rows(_doc("checks.md"))
    assert sorted(set(rows) - set(CHECK_CODES)) == []


def test_every_rule_is_in_the_engineering_basis():
    text = _doc("engineering.md")
    missing = [f.name for f in fields(Rules) if f"`{f.name}`" not in text]
    assert missing == [], f"docs/engineering.md does not mention the rule(s) {missing}"


def test_the_rule_index_lists_every_rule_and_no_other():
    text = _doc("engineering.md")
    index = text.split("## 16. Rule index", 1)[1]
    listed = re.findall(r"^\| `([a-z0-9_]+)` \|", index, re.MULTILINE)
    assert sorted(listed) == sorted(f.name for f in fields(Rules))


def _api_routes(app) -> set[str]:
    """Every JSON API route as "METHOD /path", the path without /api/v1 and with <id>."""
    out = set()
    for rule in app.url_map.iter_rules():
        if not rule.rule.startswith("/api/v1/"):
            continue
        path = rule.rule[len("/api/v1"):]
        path = re.sub(r"<int:project_id>", "<id>", path)
        path = re.sub(r"<(?:int:)?(\w+)>", r"<\1>", path)
        for method in rule.methods - {"HEAD", "OPTIONS"}:
            out.add(f"{method} {path}")
    return out


def test_every_api_route_is_in_the_api_document(app):
    text = _doc("api.md")
    routes = _api_routes(app)
    assert len(routes) >= 12
    missing = sorted(r for r in routes if f"### `{r}`" not in text)
    assert missing == [], f"docs/api.md has no section for {missing}"


def test_the_planned_preview_is_documented_with_its_answer_keys():
    text = _doc("api.md")
    assert "`POST /projects/<id>/piles/<mark>/preview`" in text
    for key in ("verdict", "checks", "required_toe_level", "more_needed_m"):
        assert f"`{key}`" in text.split("preview`", 1)[1], key


def test_every_schedule_column_is_in_the_file_formats():
    from fieldapp.schedule_io import COLUMNS, REQUIRED_COLUMNS

    text = _doc("file-formats.md")
    for column in COLUMNS:
        required = "yes" if column in REQUIRED_COLUMNS else ""
        assert re.search(rf"^\| `{column}` \|\s*{required}\s*\|", text, re.MULTILINE), column


def test_every_as_built_schedule_column_is_in_the_file_formats():
    from fieldapp.record.data import ScheduleRow

    text = _doc("file-formats.md")
    missing = [c for c in ScheduleRow.CSV_HEADER if f"`{c}`" not in text]
    assert missing == []


def test_every_validation_file_is_in_the_validation_document():
    text = _doc("validation.md")
    files = sorted(p.name for p in (ROOT / "tests" / "validation").glob("test_*.py"))
    assert files
    missing = [name for name in files if f"`{name}`" not in text]
    assert missing == []


def test_every_validation_test_is_accounted_for():
    text = _doc("validation.md")
    missing = []
    for path in sorted((ROOT / "tests" / "validation").glob("test_*.py")):
        for name in re.findall(r"^def (test_\w+)\(", path.read_text(encoding="utf-8"), re.MULTILINE):
            if f"`{name}`" not in text:
                missing.append(f"{path.name}::{name}")
    assert missing == [], f"docs/validation.md does not say how these get their values: {missing}"


def _links(text: str) -> list[str]:
    return re.findall(r"\]\(([^)#\s]+)(?:#[^)]*)?\)", text)


@pytest.mark.parametrize("path", ["README.md"] + [f"docs/{p.name}" for p in sorted(DOCS.glob("*.md"))])
def test_relative_links_lead_to_files(path):
    source = ROOT / path
    broken = [link for link in _links(source.read_text(encoding="utf-8"))
              if "://" not in link and not (source.parent / link).exists()]
    assert broken == []


# ---- the project stands on its own -------------------------------------------------------------

# Documents outside the repository that the project once pointed at. The names are put together
# here so that this file does not name them itself.
OUTSIDE = re.compile(r"\b(?:" + "|".join(("PRODUCT", "REFERENCES", "STYLE", "TESTING")) + r")\.md\b")
WORDING = re.compile("computed" + " there", re.IGNORECASE)   # an expected value taken from them


def _tracked_files() -> list[Path]:
    if shutil.which("git") is None or not (ROOT / ".git").exists():
        pytest.skip("not a git checkout: the tracked files cannot be listed")
    out = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True, check=True)
    return [ROOT / name for name in out.stdout.decode("utf-8").split("\0") if name]


def _mentions(paths) -> list[str]:
    found = []
    for path in paths:
        if not path.is_file():
            continue
        text = path.read_bytes().decode("utf-8", errors="replace")
        for number, line in enumerate(text.splitlines(), start=1):
            if OUTSIDE.search(line) or WORDING.search(line):
                found.append(f"{path.relative_to(ROOT)}:{number}")
    return found


def test_readme_docs_and_tests_point_at_no_document_outside_the_repository():
    paths = [p for p in _tracked_files()
             if p.relative_to(ROOT).parts[0] in ("README.md", "docs", "tests")]
    paths += [p for p in DOCS.glob("*.md") if p not in paths]   # new docs not yet committed
    assert paths
    assert _mentions(paths) == []


def test_no_tracked_file_points_at_a_document_outside_the_repository():
    assert _mentions(_tracked_files()) == []


# ---- DEVELOPERS.md: the map of the code -----------------------------------------------------------

DEVELOPERS = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
MAPPED = ("design_core", "fieldapp", "static")


def _map_entries() -> set[str]:
    """Paths named in DEVELOPERS.md's architecture map: one entry a line, two spaces of indent
    a level (a folder ends with "/"); lines indented 24 or more continue the line above."""
    block = DEVELOPERS.split("## Architecture map", 1)[1].split("```", 2)[1]
    stack: list[str] = []
    found = set()
    for line in block.splitlines():
        if not line.strip():
            continue
        indent = len(line) - len(line.lstrip(" "))
        if indent >= 24:
            continue
        level, name = indent // 2, line.split()[0]
        stack = stack[:level]
        found.add("".join(stack) + name)
        if name.endswith("/"):
            stack.append(name)
    return found


def _modules() -> set[str]:
    """Every module of design_core/, fieldapp/ (Python, empty __init__ files aside) and static/
    (JS and CSS), as a path from the top of the repository."""
    out = set()
    for top in MAPPED:
        for path in (ROOT / top).rglob("*"):
            if "__pycache__" in path.parts or not path.is_file():
                continue
            if top == "static" and path.suffix not in (".js", ".css"):
                continue
            if top != "static" and (path.suffix != ".py" or
                                    (path.name == "__init__.py" and not path.read_text().strip())):
                continue
            out.add(path.relative_to(ROOT).as_posix())
    return out


def test_the_architecture_map_names_every_module():
    entries = _map_entries()
    assert sorted(_modules() - entries) == [], "DEVELOPERS.md's architecture map lacks these"


def test_the_architecture_map_names_nothing_that_is_not_there():
    stale = [e for e in _map_entries()
             if e.split("/", 1)[0] in MAPPED and not (ROOT / e.rstrip("/")).exists()]
    assert stale == [], "DEVELOPERS.md's architecture map names files that do not exist"


def test_every_module_over_600_lines_says_why_in_developers():
    section = DEVELOPERS.split("## Modules over 600 lines", 1)[1].split("\n## ", 1)[0]
    long = sorted(m for m in _modules()
                  if len((ROOT / m).read_text(encoding="utf-8").splitlines()) > 600)
    assert [m for m in long if f"`{m}`" not in section] == []
