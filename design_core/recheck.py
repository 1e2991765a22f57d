"""Temporary, removed at merge: the recheck moved to ``design_core.verdict`` (and the modules it
names). These names stay importable from here until fieldapp imports them from their new homes.
"""

from design_core.memo import MEMO
from design_core.verdict import ProjectItem, recheck, recheck_project

__all__ = ["MEMO", "ProjectItem", "clear_shared_analyses", "recheck", "recheck_project"]


def clear_shared_analyses() -> None:
    """Temporary, removed at merge: ``design_core.memo.MEMO.clear()``."""
    MEMO.clear()
