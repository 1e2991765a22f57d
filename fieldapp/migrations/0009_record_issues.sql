-- Issued certification records and the non-conformance register.
--
-- record_issues: one row per issued record, with the audit head it printed (project_id,
-- head_seq, head_hash): a table with these columns is an anchor that verify-audit checks the
-- chain against, so a chain cut short after an issue is seen. The revision increments per issue.
CREATE TABLE record_issues (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    revision INTEGER NOT NULL,
    head_seq INTEGER NOT NULL,
    head_hash TEXT NOT NULL,
    file_sha256 TEXT NOT NULL,
    file_name TEXT NOT NULL DEFAULT '',
    issued_at TEXT NOT NULL,
    issued_by TEXT NOT NULL DEFAULT '',
    draft INTEGER NOT NULL DEFAULT 1,
    piles INTEGER NOT NULL DEFAULT 0,
    pages INTEGER NOT NULL DEFAULT 0,
    changes TEXT NOT NULL DEFAULT '',
    state_json TEXT NOT NULL DEFAULT '{}',
    UNIQUE (project_id, revision)
);

-- One row per non-conformance: raised by the first record version of a pile with a short check
-- (whatever its progress); numbered per project (NC-001), never reused (rows are never deleted).
CREATE TABLE nonconformances (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    number INTEGER NOT NULL,
    pile_id INTEGER REFERENCES piles(id) ON DELETE SET NULL,
    mark TEXT NOT NULL,
    raised_version INTEGER NOT NULL,
    raised_at TEXT NOT NULL,
    UNIQUE (project_id, number),
    UNIQUE (pile_id, raised_version)
);
CREATE INDEX nonconformances_project ON nonconformances(project_id, number);
