-- PostgreSQL roles and database for brayscope, least privilege (docs/deployment.md).
--
--   sudo -u postgres psql -f deploy/postgresql/setup.sql
--   sudo -u postgres psql -v db=kestrel -v owner=kestrel_owner -v daemon=kestrel_daemon -f ...
--
-- Two roles:
--   owner   (default brayscope_owner) owns the database and its schema; runs the migrations
--           (`brayscope db upgrade`, by the operator at install and upgrade time); never used
--           by the running daemon.
--   daemon  (default brayscope) what `brayscope run` connects as: reads and writes rows
--           (SELECT, INSERT, UPDATE, DELETE; sequences), cannot create, alter or drop
--           anything.  At start the daemon finds the schema at its newest revision and
--           migrates nothing; a daemon newer than the schema waits (not ready, logged) until
--           the owner has run `brayscope db upgrade`.
-- Privileges on the tables the owner creates (the first and every later migration) are granted
-- to the daemon by ALTER DEFAULT PRIVILEGES below, so an upgrade needs no new GRANT.  Run this
-- file once, on a new cluster or one without these roles and database (it stops at the first
-- error).
--
-- Neither role gets a password here: with the daemon on the database host, use peer
-- authentication over the local socket (pg_hba.conf: `local brayscope brayscope peer`, the
-- system user brayscope maps to the role brayscope).  For a remote daemon set a password
-- (\password brayscope) and give it to the daemon in ~/.pgpass or PGPASSFILE, never in the
-- plant file, and require TLS (pg_hba.conf `hostssl`).
\set ON_ERROR_STOP on
\if :{?db}
\else
  \set db brayscope
\endif
\if :{?owner}
\else
  \set owner brayscope_owner
\endif
\if :{?daemon}
\else
  \set daemon brayscope
\endif

CREATE ROLE :"owner" LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE NOINHERIT;
CREATE ROLE :"daemon" LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE NOINHERIT;

CREATE DATABASE :"db" OWNER :"owner" ENCODING 'UTF8' TEMPLATE template0;
REVOKE ALL ON DATABASE :"db" FROM PUBLIC;
GRANT CONNECT ON DATABASE :"db" TO :"daemon";

\connect :"db"
-- the tables live in the schema public, owned by the database owner (PostgreSQL 15); nobody
-- else may create objects in it
ALTER SCHEMA public OWNER TO :"owner";
REVOKE ALL ON SCHEMA public FROM PUBLIC;
GRANT USAGE ON SCHEMA public TO :"daemon";
ALTER DEFAULT PRIVILEGES FOR ROLE :"owner" IN SCHEMA public
    GRANT SELECT, INSERT, UPDATE, DELETE ON TABLES TO :"daemon";
ALTER DEFAULT PRIVILEGES FOR ROLE :"owner" IN SCHEMA public
    GRANT USAGE, SELECT ON SEQUENCES TO :"daemon";
