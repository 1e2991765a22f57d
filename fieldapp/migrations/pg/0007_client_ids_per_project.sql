-- PostgreSQL variant of 0007_client_ids_per_project.sql: client ids unique within a project,
-- not across every project. PostgreSQL changes the constraint in place (the UNIQUE of 0002
-- took its default name, <table>_client_id_key).
ALTER TABLE pile_records DROP CONSTRAINT pile_records_client_id_key;
ALTER TABLE pile_records ADD CONSTRAINT pile_records_project_client_key UNIQUE (project_id, client_id);
ALTER TABLE photos DROP CONSTRAINT photos_client_id_key;
ALTER TABLE photos ADD CONSTRAINT photos_project_client_key UNIQUE (project_id, client_id);
