-- Ground investigation data read from AGS4 files: the files kept by hash, the locations
-- (boreholes, soundings) with their strata as proposals the engineer confirms, and the in situ
-- readings (SPT, CPT, water strikes) the in situ design methods read.
CREATE TABLE ags_files (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    sha256 TEXT NOT NULL,
    filename TEXT NOT NULL DEFAULT '',
    size_bytes INTEGER NOT NULL,
    ags_edition TEXT NOT NULL DEFAULT '',
    imported_at TEXT NOT NULL,
    imported_by TEXT NOT NULL,
    UNIQUE (project_id, sha256)
);

CREATE TABLE locations (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
    loca_id TEXT NOT NULL,
    loca_type TEXT NOT NULL DEFAULT '',
    easting_m REAL NOT NULL,
    northing_m REAL NOT NULL,
    ground_level_m REAL NOT NULL,
    final_depth_m REAL,
    remarks TEXT NOT NULL DEFAULT '',
    ags_file_id INTEGER REFERENCES ags_files(id),
    ground_model_id INTEGER REFERENCES ground_models(id) ON DELETE SET NULL,
    UNIQUE (project_id, loca_id)
);
CREATE INDEX locations_project ON locations(project_id);

-- Strata as logged (GEOL), depths below the location's ground level; the material is a
-- proposal (from the legend code and the description) until the engineer makes a ground
-- model from them; strength parameters are never stored here.
CREATE TABLE location_strata (
    id INTEGER PRIMARY KEY,
    location_id INTEGER NOT NULL REFERENCES locations(id) ON DELETE CASCADE,
    position INTEGER NOT NULL,
    top_depth_m REAL NOT NULL,
    base_depth_m REAL NOT NULL,
    description TEXT NOT NULL DEFAULT '',
    legend_code TEXT NOT NULL DEFAULT '',
    geology_code TEXT NOT NULL DEFAULT '',
    proposed_material TEXT NOT NULL
        CHECK (proposed_material IN ('cohesive', 'cohesionless', 'rock', 'ignore')),
    material_reason TEXT NOT NULL DEFAULT '',
    UNIQUE (location_id, position)
);

CREATE TABLE spt_readings (
    id INTEGER PRIMARY KEY,
    location_id INTEGER NOT NULL REFERENCES locations(id) ON DELETE CASCADE,
    depth_m REAL NOT NULL,
    n_value INTEGER,
    reported TEXT NOT NULL DEFAULT '',
    energy_ratio_pct REAL,
    n60 REAL,
    UNIQUE (location_id, depth_m)
);

CREATE TABLE cpt_tests (
    id INTEGER PRIMARY KEY,
    location_id INTEGER NOT NULL REFERENCES locations(id) ON DELETE CASCADE,
    test_ref TEXT NOT NULL,
    cone_type TEXT NOT NULL DEFAULT '',
    remarks TEXT NOT NULL DEFAULT '',
    UNIQUE (location_id, test_ref)
);

CREATE TABLE cpt_readings (
    id INTEGER PRIMARY KEY,
    cpt_test_id INTEGER NOT NULL REFERENCES cpt_tests(id) ON DELETE CASCADE,
    depth_m REAL NOT NULL,
    qc_mpa REAL NOT NULL,
    fs_kpa REAL,
    u2_kpa REAL,
    UNIQUE (cpt_test_id, depth_m)
);

CREATE TABLE water_strikes (
    id INTEGER PRIMARY KEY,
    location_id INTEGER NOT NULL REFERENCES locations(id) ON DELETE CASCADE,
    depth_m REAL NOT NULL,
    sealed_depth_m REAL,
    remarks TEXT NOT NULL DEFAULT '',
    UNIQUE (location_id, depth_m)
);

CREATE TABLE water_rises (
    id INTEGER PRIMARY KEY,
    water_strike_id INTEGER NOT NULL REFERENCES water_strikes(id) ON DELETE CASCADE,
    minutes INTEGER NOT NULL,
    depth_m REAL NOT NULL,
    UNIQUE (water_strike_id, minutes)
);
