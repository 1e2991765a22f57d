-- Tests after installation: the register of integrity, dynamic and static load tests per pile.
-- A result file is kept by its SHA-256 under the data folder (test_files/); the row holds the
-- result in the method's terms (result_json) and the check it gives (check_json: code
-- integrity or load_test, as the record's checks). record_version is the pile's record version
-- the register wrote to carry the check (NULL while the pile has no record yet).
CREATE TABLE pile_tests (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    pile_id INTEGER NOT NULL REFERENCES piles(id) ON DELETE CASCADE,
    kind TEXT NOT NULL,
    tested_on TEXT NOT NULL,
    tested_by TEXT NOT NULL,
    file_sha256 TEXT,
    file_name TEXT NOT NULL DEFAULT '',
    file_ext TEXT NOT NULL DEFAULT '',
    file_bytes INTEGER,
    result_json TEXT NOT NULL,
    check_json TEXT NOT NULL,
    record_version INTEGER,
    created_by INTEGER REFERENCES users(id),
    created_at TEXT NOT NULL
);
CREATE INDEX pile_tests_pile ON pile_tests(pile_id);
CREATE INDEX pile_tests_project ON pile_tests(project_id);
