-- People, projects, the set-up of a project, and the audit trail.
CREATE TABLE users (
    id INTEGER PRIMARY KEY,
    email TEXT NOT NULL UNIQUE,
    name TEXT NOT NULL DEFAULT '',
    password_hash TEXT NOT NULL,
    role TEXT NOT NULL CHECK (role IN ('admin', 'engineer', 'inspector', 'viewer')),
    created_at TEXT NOT NULL
);

CREATE TABLE projects (
    id INTEGER PRIMARY KEY,
    name TEXT NOT NULL,
    site TEXT NOT NULL DEFAULT '',
    datum TEXT NOT NULL DEFAULT '',
    engineer TEXT NOT NULL DEFAULT '',
    created_at TEXT NOT NULL
);

CREATE TABLE memberships (
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    user_id INTEGER NOT NULL REFERENCES users(id) ON DELETE CASCADE,
    PRIMARY KEY (project_id, user_id)
);

-- Versioned rule sets: the current one is the highest version of the project.
CREATE TABLE rule_sets (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    version INTEGER NOT NULL,
    rules_json TEXT NOT NULL,
    note TEXT NOT NULL DEFAULT '',
    created_by INTEGER REFERENCES users(id),
    created_at TEXT NOT NULL,
    UNIQUE (project_id, version)
);

CREATE TABLE ground_models (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    name TEXT NOT NULL,
    description TEXT NOT NULL DEFAULT '',
    water_level_m REAL NOT NULL,
    UNIQUE (project_id, name)
);

CREATE TABLE layers (
    id INTEGER PRIMARY KEY,
    ground_model_id INTEGER NOT NULL REFERENCES ground_models(id) ON DELETE CASCADE,
    position INTEGER NOT NULL,
    top_level_m REAL NOT NULL,
    bottom_level_m REAL NOT NULL,
    material TEXT NOT NULL CHECK (material IN ('cohesive', 'cohesionless', 'rock', 'ignore')),
    unit_weight_kn_m3 REAL NOT NULL,
    cu_kpa REAL,
    cu_bottom_kpa REAL,
    phi_deg REAL,
    shaft_friction_kpa REAL,
    base_pressure_kpa REAL,
    description TEXT NOT NULL DEFAULT '',
    UNIQUE (ground_model_id, position)
);

CREATE TABLE caps (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    mark TEXT NOT NULL,
    n_kn REAL NOT NULL DEFAULT 0,
    mx_knm REAL NOT NULL DEFAULT 0,
    my_knm REAL NOT NULL DEFAULT 0,
    hx_kn REAL NOT NULL DEFAULT 0,
    hy_kn REAL NOT NULL DEFAULT 0,
    UNIQUE (project_id, mark)
);

CREATE TABLE piles (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    mark TEXT NOT NULL,
    cap_id INTEGER REFERENCES caps(id) ON DELETE SET NULL,
    pile_type TEXT NOT NULL CHECK (pile_type IN ('bored', 'cfa', 'driven', 'screw')),
    easting_m REAL NOT NULL,
    northing_m REAL NOT NULL,
    cutoff_level_m REAL NOT NULL,
    toe_level_m REAL NOT NULL,
    diameter_mm REAL NOT NULL,
    ground_model_id INTEGER NOT NULL REFERENCES ground_models(id),
    compression_kn REAL NOT NULL DEFAULT 0,
    tension_kn REAL NOT NULL DEFAULT 0,
    shear_kn REAL NOT NULL DEFAULT 0,
    moment_knm REAL NOT NULL DEFAULT 0,
    n_bars INTEGER NOT NULL DEFAULT 0,
    bar_mm REAL NOT NULL DEFAULT 0,
    cage_length_m REAL NOT NULL DEFAULT 0,
    fc_mpa REAL NOT NULL DEFAULT 32,
    fy_mpa REAL NOT NULL DEFAULT 500,
    exposure_class TEXT NOT NULL DEFAULT 'XC2',
    cover_mm REAL NOT NULL DEFAULT 75,
    head TEXT NOT NULL DEFAULT 'free' CHECK (head IN ('free', 'fixed')),
    progress TEXT NOT NULL DEFAULT 'planned'
        CHECK (progress IN ('planned', 'boring', 'concreted', 'logged')),
    verdict TEXT CHECK (verdict IN ('meets design', 'needs engineer')),
    worst_utilisation REAL,
    current_version INTEGER NOT NULL DEFAULT 0,
    UNIQUE (project_id, mark)
);
CREATE INDEX piles_project ON piles(project_id);

-- Append-only: each entry carries the hash of the one before in its project's chain
-- (project_id NULL is the chain of site-wide events such as failed logins).
CREATE TABLE audit_log (
    id INTEGER PRIMARY KEY,
    project_id INTEGER REFERENCES projects(id),
    seq INTEGER NOT NULL,
    at TEXT NOT NULL,
    actor TEXT NOT NULL,
    action TEXT NOT NULL,
    subject TEXT NOT NULL DEFAULT '',
    payload_json TEXT NOT NULL,
    prev_hash TEXT NOT NULL,
    hash TEXT NOT NULL
);
CREATE UNIQUE INDEX audit_chain ON audit_log(COALESCE(project_id, 0), seq);

CREATE TRIGGER audit_no_update BEFORE UPDATE ON audit_log
BEGIN SELECT RAISE(ABORT, 'audit_log is append-only'); END;
CREATE TRIGGER audit_no_delete BEFORE DELETE ON audit_log
BEGIN SELECT RAISE(ABORT, 'audit_log is append-only'); END;

CREATE TABLE login_failures (
    id INTEGER PRIMARY KEY,
    email TEXT NOT NULL,
    at REAL NOT NULL
);
CREATE INDEX login_failures_email ON login_failures(email, at);
