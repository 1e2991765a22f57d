-- The engineer's side: a disposition and sign-off per pile record version, amendments of signed
-- records, and the background builds of the certification record.
--
-- A pile is locked when its current record version has a sign-off; a later change is an
-- amendment (with its reason) that makes a new version needing its own sign-off.
CREATE TABLE signoffs (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    pile_id INTEGER NOT NULL REFERENCES piles(id) ON DELETE CASCADE,
    version INTEGER NOT NULL CHECK (version >= 1),
    disposition TEXT NOT NULL
        CHECK (disposition IN ('accepted', 'accepted with conditions', 'remedial', 'rejected')),
    reasons TEXT NOT NULL DEFAULT '',
    -- the earlier sign-off (disposition 'remedial', this pile or another) that this one resolves
    remedial_of INTEGER REFERENCES signoffs(id),
    verdict TEXT NOT NULL CHECK (verdict IN ('meets design', 'needs engineer')),
    rules_version INTEGER NOT NULL,
    signed_by INTEGER NOT NULL REFERENCES users(id),
    signed_at TEXT NOT NULL,
    -- the canonical JSON that was signed, and its SHA-256
    signed_json TEXT NOT NULL,
    record_hash TEXT NOT NULL,
    batch INTEGER NOT NULL DEFAULT 0 CHECK (batch IN (0, 1)),
    UNIQUE (pile_id, version)
);
CREATE INDEX signoffs_project ON signoffs(project_id);

CREATE TRIGGER signoffs_no_update BEFORE UPDATE ON signoffs
BEGIN SELECT RAISE(ABORT, 'a sign-off cannot be changed: amend the record instead'); END;

-- An amendment of a signed record: from the signed version to the new one, and why.
CREATE TABLE amendments (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    pile_id INTEGER NOT NULL REFERENCES piles(id) ON DELETE CASCADE,
    from_version INTEGER NOT NULL,
    version INTEGER NOT NULL,
    reason TEXT NOT NULL,
    amended_by INTEGER REFERENCES users(id),
    amended_at TEXT NOT NULL,
    UNIQUE (pile_id, version)
);

-- Background builds of the certification record; progress is stored so a reload finds it.
CREATE TABLE record_jobs (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    status TEXT NOT NULL CHECK (status IN ('queued', 'running', 'done', 'failed')),
    done INTEGER NOT NULL DEFAULT 0,
    total INTEGER NOT NULL DEFAULT 0,
    path TEXT NOT NULL DEFAULT '',
    error TEXT NOT NULL DEFAULT '',
    head_hash TEXT NOT NULL DEFAULT '',
    size_bytes INTEGER NOT NULL DEFAULT 0,
    started_by INTEGER REFERENCES users(id),
    created_at TEXT NOT NULL,
    updated_at TEXT NOT NULL,
    finished_at TEXT
);
CREATE INDEX record_jobs_project ON record_jobs(project_id, id);
