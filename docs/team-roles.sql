-- The roles of a team store (docs/team.md). An administrator runs this once per server, as a
-- superuser or a role with CREATEROLE and CREATEDB:
--     psql -h HOST -U postgres -v ON_ERROR_STOP=1 -f docs/team-roles.sql
-- then gives each login a password (\password ana) unless the server authenticates otherwise.
-- The names below are examples: writers and auditors are the defaults of 'emend init --team'
-- (--writers, --auditors), the rest are one login per person.

-- Group roles: who may publish, and who may only read.
CREATE ROLE emend_writer NOLOGIN;
CREATE ROLE emend_auditor NOLOGIN;

-- The data manager owns the database and makes the team store in it ('emend init --team').
CREATE ROLE survey_owner LOGIN;
-- Analysts publish; the auditor reads.
CREATE ROLE ana LOGIN IN ROLE emend_writer;
CREATE ROLE ben LOGIN IN ROLE emend_writer;
CREATE ROLE auditor LOGIN IN ROLE emend_auditor;

-- One database per team store, owned by the data manager; nobody else may make objects in it.
CREATE DATABASE survey2026 OWNER survey_owner;
REVOKE ALL ON DATABASE survey2026 FROM PUBLIC;
GRANT CONNECT ON DATABASE survey2026 TO emend_writer, emend_auditor;
