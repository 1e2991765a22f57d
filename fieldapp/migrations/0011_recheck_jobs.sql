-- Rechecks of many recorded piles after the rules or a ground model changed, run outside the
-- request in chunks of one transaction each. ``after_pile_id`` is where the next chunk starts
-- (piles are taken in order of id), so a job left unfinished by a stopped server resumes there.
CREATE TABLE recheck_jobs (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    reason TEXT NOT NULL,
    actor TEXT NOT NULL,
    user_id INTEGER REFERENCES users(id) ON DELETE SET NULL,
    ground_model_id INTEGER,
    state TEXT NOT NULL DEFAULT 'waiting' CHECK (state IN ('waiting', 'running', 'done', 'failed')),
    total INTEGER NOT NULL,
    done INTEGER NOT NULL DEFAULT 0,
    changed INTEGER NOT NULL DEFAULT 0,
    after_pile_id INTEGER NOT NULL DEFAULT 0,
    error TEXT,
    created_at TEXT NOT NULL,
    finished_at TEXT
);
CREATE INDEX recheck_jobs_project ON recheck_jobs(project_id, id);
