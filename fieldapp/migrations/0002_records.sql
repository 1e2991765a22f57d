-- The pile as built: every saved version of each pile's record, and the photos.
--
-- pile_records keeps every version ever saved (history); piles.current_version points at the
-- newest. client_id is the id the tablet made for the save: a repeat of the same save finds
-- its row here and gets the same answer, never a second version.
CREATE TABLE pile_records (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    pile_id INTEGER NOT NULL REFERENCES piles(id) ON DELETE CASCADE,
    version INTEGER NOT NULL CHECK (version >= 1),
    client_id TEXT NOT NULL UNIQUE,
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
    UNIQUE (pile_id, version)
);
CREATE INDEX pile_records_project ON pile_records(project_id);

-- Photos of a pile. The original is kept on disk by its SHA-256 under the data folder's
-- photos/ (never by the client's file name); a 1600 px display copy and a 320 px thumbnail
-- sit beside it. taken_at is the EXIF capture time when the camera wrote one.
CREATE TABLE photos (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    pile_id INTEGER NOT NULL REFERENCES piles(id) ON DELETE CASCADE,
    client_id TEXT NOT NULL UNIQUE,
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
    thumb_height INTEGER NOT NULL
);
CREATE INDEX photos_pile ON photos(pile_id);
