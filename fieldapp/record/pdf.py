"""The certification record as a PDF, built in parts and joined, from one read snapshot.

Contents, in order: the certificate (cover), the table of revisions, the site plan, the as-built
schedule; one sheet per recorded pile (record fields, every stored check, pictures drawn from
the stored version, photos, history); the non-conformance register; the rules; the audit head.
Every page carries the safety caution, the revision, "page x of y" and, while any pile is
unsigned or a non-conformance is open, the DRAFT mark (``pdf_layout.Doc``).

Bounded memory at any size: the front matter, every ``PILES_PER_PART`` pile sheets and the back
matter are each a separate reportlab document written to disk, their pile sheets read from the
snapshot one at a time as reportlab reaches them. The parts are then joined with qpdf (pikepdf, see ``_join``) and the
audit head (project, seq, hash) and revision are written into the document information, where
the signature (``signing``) covers them. The total page count is known only once every part is
laid out: each footer prints a fixed-width placeholder that is then written over byte for byte
(page streams are left uncompressed for that; the fonts are embedded subsets).

This module computes nothing and writes no SQL.
"""

from __future__ import annotations

import os
import re
import shutil
import sqlite3
import tempfile
from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path
from typing import Callable, Iterator

import pikepdf
from reportlab.platypus import Flowable, PageBreak

from fieldapp.record import pdf_sections as sections
from fieldapp.record import signing, snapshot
from fieldapp.record.pdf_layout import TOTAL_PLACEHOLDER, Doc, PageSpec, Tick, styles
from fieldapp.record.words import local_time, now_local

PILES_PER_PART = 200
_PLACEHOLDER = re.compile(rb"\(page (\d+) of " + re.escape(TOTAL_PLACEHOLDER.encode("ascii")) + rb"\) Tj")


class LazyStory(list):
    """A story list that pulls flowables from an iterator as reportlab consumes it.

    reportlab's build loop asks ``len(story)`` before each flowable, indexes ``story[0]``, deletes
    it and may insert split parts at the front; keeping a short buffer filled from the iterator
    in ``__len__`` is enough for all of that.
    """

    def __init__(self, source: Iterator[Flowable], ahead: int = 12):
        super().__init__()
        self._source = source
        self._ahead = ahead
        self._done = False

    def __len__(self) -> int:
        while not self._done and super().__len__() < self._ahead:
            try:
                self.append(next(self._source))
            except StopIteration:
                self._done = True
        return super().__len__()


@dataclass(frozen=True)
class BuildResult:
    """What a build produced (the file is not signed yet: ``issue.issue`` signs it)."""

    path: str
    pages: int
    piles: int
    head_seq: int
    head_hash: str
    chain_ok: bool
    revision: int
    draft: bool
    changes: str
    state: dict
    issued_at: datetime


def _patch_total(path: Path, total: int) -> None:
    """Write the total page count over the placeholder of every footer in one part."""
    text = str(total).ljust(len(TOTAL_PLACEHOLDER)).encode("ascii")
    body = path.read_bytes()
    patched = _PLACEHOLDER.sub(lambda m: b"(page " + m.group(1) + b" of " + text + b") Tj", body)
    if len(patched) != len(body):
        raise RuntimeError("the page count did not fit its placeholder")
    path.write_bytes(patched)


def _join(parts: list[Path], out: Path, info: dict[str, str]) -> None:
    """Join the parts into one PDF with qpdf (pikepdf); the page streams are compressed on the
    way out. Measured (tests/perf/bench_record.py): the parts are built at a flat ~227 MB for
    20,000 piles, but this join and the signing after it peak at ~2 GB for a 394 MB file, so
    memory is not yet bounded here: a streamed join (or signing each part) is still to do."""
    sources = []
    try:
        whole = pikepdf.new()
        for path in parts:
            src = pikepdf.open(path)
            sources.append(src)
            whole.pages.extend(src.pages)
        for key, value in info.items():
            whole.docinfo[pikepdf.Name(key)] = pikepdf.String(value)
        whole.save(out, compress_streams=True, object_stream_mode=pikepdf.ObjectStreamMode.preserve,
                   linearize=False)
        whole.close()
    finally:
        for src in sources:
            src.close()


def build(conn: sqlite3.Connection, project_id: int, out_path: str | Path, *, photo_dir: str | Path | None = None,
          progress: Callable[[int, int], None] | None = None, issued_by: str = "toeline",
          issued_role: str = "", issued_at: datetime | None = None,
          before_sheets: Callable[[], None] | None = None) -> BuildResult:
    """Write the (unsigned) record of a project to ``out_path`` from one read snapshot of
    ``conn`` (which must be outside any transaction; progress must be written on another
    connection). ``progress(done, total)`` is called as each pile's sheet is placed;
    ``before_sheets`` (tests) runs once the front matter is read."""
    st = styles()
    out_path = Path(out_path)
    work = Path(tempfile.mkdtemp(prefix=".record-parts-", dir=out_path.parent))
    try:
        with snapshot.read_snapshot(conn):
            front = snapshot.front(conn, project_id, issued_by, issued_role, issued_at or now_local())
            if before_sheets is not None:
                before_sheets()
            spec = PageSpec(front.project.name, front.revision, local_time(front.issued_at), front.draft, 1)
            parts: list[Path] = []
            total = len(front.statuses)
            done = [0]

            def tick():
                done[0] += 1
                if progress:
                    progress(done[0], total)

            nonlocal_spec = [spec]

            def front_story() -> Iterator[Flowable]:
                yield from sections.cover(st, front)
                yield PageBreak()
                yield from sections.revisions(st, front)
                yield PageBreak()
                yield from sections.site_plan(st, front)
                yield PageBreak()
                yield from sections.schedule(st, front.rows)

            def sheets_story(chunk) -> Iterator[Flowable]:
                for i, status in enumerate(chunk):
                    if i:
                        yield PageBreak()
                    sheet = snapshot.pile_sheet(conn, project_id, status)
                    yield from sections.pile_sheet(st, sheet, photo_dir)
                    yield Tick(tick)

            def back_story() -> Iterator[Flowable]:
                yield from sections.register(st, front.register)
                yield PageBreak()
                yield from sections.rules(st, front)
                yield from sections.audit_page(st, front)

            def run(story) -> None:
                spec_now = nonlocal_spec[0]
                path = work / f"part-{len(parts):05d}.pdf"
                doc = Doc(str(path), spec_now, st, title=f"Certification record: {front.project.name}",
                          author="Toeline", subject="Pile certification record")
                doc.build(LazyStory(story))
                parts.append(path)
                nonlocal_spec[0] = replace(spec_now, first_page=spec_now.first_page + doc.page)

            run(front_story())
            recorded = []
            for status in front.statuses:
                if status.current_version == 0:       # listed in the schedule, no sheet
                    tick()
                else:
                    recorded.append(status)
            for start in range(0, len(recorded), PILES_PER_PART):
                run(sheets_story(recorded[start:start + PILES_PER_PART]))
            run(back_story())
        pages = nonlocal_spec[0].first_page - 1
        for path in parts:
            _patch_total(path, pages)
        tmp = out_path.with_name(out_path.name + ".part")
        _join(parts, tmp, {"/Title": f"Certification record: {front.project.name}, revision {front.revision}",
                           "/Author": "Toeline", "/Subject": "Pile certification record",
                           signing.META_PROJECT: str(project_id), signing.META_SEQ: str(front.head_seq),
                           signing.META_HASH: front.head_hash, signing.META_REVISION: str(front.revision)})
        os.replace(tmp, out_path)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return BuildResult(str(out_path), pages, total, front.head_seq, front.head_hash, front.chain.ok,
                       front.revision, front.draft, front.changes, front.state, front.issued_at)
