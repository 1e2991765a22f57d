-- Client ids are kept apart per project: the id a tablet makes for a save or a photo must be
-- unique within its project, not across every project of the site, so a save in one project
-- can never be taken for a repeat of (or refused because of) a save in another. SQLite cannot
-- change a UNIQUE constraint in place: each table is made again with the same columns in the
-- same order, its rows copied, and its index made again.
CREATE TABLE pile_records_scoped (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    pile_id INTEGER NOT NULL REFERENCES piles(id) ON DELETE CASCADE,
    version INTEGER NOT NULL CHECK (version >= 1),
    client_id TEXT NOT NULL,
    record_json TEXT NOT NULL,
    progress TEXT NOT NULL CHECK (progress IN ('planned', 'boring', 'concreted', 'logged')),
    verdict TEXT NOT NULL CHECK (verdict IN ('meets design', 'needs engineer')),
    worst_utilisation REAL,
    checks_json TEXT NOT NULL,
    borrowed_json TEXT NOT NULL DEFAULT '[]',
    notes_json TEXT NOT NULL DEFAULT '[]',
    rules_version INTEGER NOT NULL,
    created_by INTEGER REFERENCES users(id),
    created_at TEXT NOT NULL,
    UNIQUE (pile_id, version),
    UNIQUE (project_id, client_id)
);
INSERT INTO pile_records_scoped SELECT * FROM pile_records;
DROP TABLE pile_records;
ALTER TABLE pile_records_scoped RENAME TO pile_records;
CREATE INDEX pile_records_project ON pile_records(project_id);

CREATE TABLE photos_scoped (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    pile_id INTEGER NOT NULL REFERENCES piles(id) ON DELETE CASCADE,
    client_id TEXT NOT NULL,
    kind TEXT NOT NULL CHECK (kind IN ('base', 'cage', 'pour', 'finished', 'other')),
    caption TEXT NOT NULL DEFAULT '',
    sha256 TEXT NOT NULL,
    format TEXT NOT NULL,
    taken_at TEXT,
    uploaded_at TEXT NOT NULL,
    uploaded_by INTEGER REFERENCES users(id),
    width INTEGER NOT NULL,
    height INTEGER NOT NULL,
    size_bytes INTEGER NOT NULL,
    display_width INTEGER NOT NULL,
    display_height INTEGER NOT NULL,
    thumb_width INTEGER NOT NULL,
    thumb_height INTEGER NOT NULL,
    UNIQUE (project_id, client_id)
);
INSERT INTO photos_scoped SELECT * FROM photos;
DROP TABLE photos;
ALTER TABLE photos_scoped RENAME TO photos;
CREATE INDEX photos_pile ON photos(pile_id);
