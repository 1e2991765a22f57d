"""Every check code and every rule is documented."""

from pathlib import Path

from design_core import CHECK_CODES, Rules

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")


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
