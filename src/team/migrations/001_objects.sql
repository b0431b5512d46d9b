-- emend team store, migration 1: the objects of a local store, on a PostgreSQL server.
-- Run by `emend init --team` inside one transaction, in the schema `emend`.
--
-- The same objects as a local store (src/store/schema.sql), byte for byte: compressed pieces,
-- stored files, and the signed commit bodies with their signatures, so every check a local
-- store runs on them runs the same on what the server holds. Nothing here is trusted: ids are
-- hashes, bodies are signed, and `emend verify --team` rebuilds everything from them.
--
-- Every object is append-only: triggers refuse UPDATE, DELETE and TRUNCATE for every role,
-- the owner's included (only a superuser, or the owner dropping a trigger, can get round them,
-- and then `verify` finds what was changed). The one row that moves is `team`'s head, and it
-- only moves forward onto a commit that is here.

CREATE TABLE emend.migration (
    version    integer PRIMARY KEY,
    applied_at timestamptz NOT NULL DEFAULT now()
);

-- The team's head: one row, locked by every publish (SELECT ... FOR UPDATE), so two analysts
-- publishing at once are served one after the other and the second is told the team moved on.
CREATE TABLE emend.team (
    one        boolean PRIMARY KEY DEFAULT true CHECK (one),
    created_at timestamptz NOT NULL DEFAULT now(),
    head_seq   bigint NOT NULL DEFAULT 0 CHECK (head_seq >= 0),
    head_id    bytea CHECK (length(head_id) = 32),
    CHECK ((head_seq = 0) = (head_id IS NULL))
);

-- A compressed piece, addressed by BLAKE3 of its uncompressed bytes (codec 0 stored, 1 zstd,
-- 2 zstd delta against the bytes [base_lo, base_hi) of an earlier stored file).
CREATE TABLE emend.chunk (
    id        bytea PRIMARY KEY CHECK (length(id) = 32),
    raw_len   bigint NOT NULL CHECK (raw_len >= 0),
    codec     smallint NOT NULL CHECK (codec IN (0, 1, 2)),
    base_blob bytea,
    base_lo   bigint,
    base_hi   bigint,
    data      bytea NOT NULL,
    CHECK ((codec = 2) = (base_blob IS NOT NULL AND base_lo IS NOT NULL AND base_hi IS NOT NULL))
);

-- A stored file (an extract or an evidence file), addressed by BLAKE3 of its bytes; `n` is the
-- order files arrived in, so a delta's reference always arrives before the delta.
CREATE TABLE emend.blob (
    n        bigserial UNIQUE,
    id       bytea PRIMARY KEY CHECK (length(id) = 32),
    n_bytes  bigint NOT NULL CHECK (n_bytes >= 0),
    n_chunks bigint NOT NULL CHECK (n_chunks >= 0)
);

CREATE TABLE emend.blob_chunk (
    blob  bytea NOT NULL REFERENCES emend.blob (id),
    idx   bigint NOT NULL CHECK (idx >= 0),
    chunk bytea NOT NULL REFERENCES emend.chunk (id),
    PRIMARY KEY (blob, idx)
);

-- The hash chain: `body` is the canonical encoding, `id` = BLAKE3(body), `signature` is
-- Ed25519 over `id` by the key the body names. `parent` repeats the body's parent so the
-- server can refuse a commit that does not follow its head (the body is checked by clients).
CREATE TABLE emend.commit_log (
    seq          bigint PRIMARY KEY CHECK (seq >= 1),
    id           bytea NOT NULL UNIQUE CHECK (length(id) = 32),
    parent       bytea CHECK (length(parent) = 32),
    body         bytea NOT NULL,
    signature    bytea NOT NULL CHECK (length(signature) = 64),
    published_by text NOT NULL DEFAULT current_user,
    published_at timestamptz NOT NULL DEFAULT now(),
    CHECK ((seq = 1) = (parent IS NULL))
);

-- The keys the team trusts without a trust commit (the store's roots), as the first publisher's
-- store held them. An auditor decides trust with `verify --team ... --trust FILE` instead.
CREATE TABLE emend.root_signer (
    key      bytea PRIMARY KEY CHECK (length(key) = 32),
    name     text NOT NULL,
    email    text,
    added_at text NOT NULL
);

-- A signed receipt of the head after each publish (the text `emend receipt` prints): a record
-- of every head the team had, which shows a history later cut on the server.
CREATE TABLE emend.receipt (
    n            bigserial PRIMARY KEY,
    head_seq     bigint NOT NULL CHECK (head_seq >= 1),
    text         text NOT NULL,
    published_by text NOT NULL DEFAULT current_user,
    published_at timestamptz NOT NULL DEFAULT now()
);

CREATE FUNCTION emend.refuse_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'emend team store: % on %.% is refused: its objects are append-only',
        TG_OP, TG_TABLE_SCHEMA, TG_TABLE_NAME
        USING ERRCODE = 'insufficient_privilege';
END
$$;

CREATE FUNCTION emend.follow_head() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF NEW.seq <> 1 AND NOT EXISTS (
        SELECT 1 FROM emend.commit_log WHERE seq = NEW.seq - 1 AND id = NEW.parent
    ) THEN
        RAISE EXCEPTION 'emend team store: commit % does not follow commit % of the team''s chain',
            NEW.seq, NEW.seq - 1
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    RETURN NEW;
END
$$;

CREATE FUNCTION emend.move_head() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF NEW.created_at <> OLD.created_at OR NEW.one <> OLD.one THEN
        RAISE EXCEPTION 'emend team store: only the head moves'
            USING ERRCODE = 'insufficient_privilege';
    END IF;
    IF NEW.head_seq <= OLD.head_seq OR NOT EXISTS (
        SELECT 1 FROM emend.commit_log WHERE seq = NEW.head_seq AND id = NEW.head_id
    ) THEN
        RAISE EXCEPTION 'emend team store: the head only moves forward, onto a commit the store holds'
            USING ERRCODE = 'insufficient_privilege';
    END IF;
    RETURN NEW;
END
$$;

CREATE TRIGGER commit_follows_head BEFORE INSERT ON emend.commit_log
    FOR EACH ROW EXECUTE FUNCTION emend.follow_head();
CREATE TRIGGER team_head_moves_forward BEFORE UPDATE ON emend.team
    FOR EACH ROW EXECUTE FUNCTION emend.move_head();
CREATE TRIGGER team_no_delete BEFORE DELETE ON emend.team
    FOR EACH ROW EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER team_no_truncate BEFORE TRUNCATE ON emend.team
    FOR EACH STATEMENT EXECUTE FUNCTION emend.refuse_change();

CREATE TRIGGER chunk_append_only BEFORE UPDATE OR DELETE ON emend.chunk
    FOR EACH ROW EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER chunk_no_truncate BEFORE TRUNCATE ON emend.chunk
    FOR EACH STATEMENT EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER blob_append_only BEFORE UPDATE OR DELETE ON emend.blob
    FOR EACH ROW EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER blob_no_truncate BEFORE TRUNCATE ON emend.blob
    FOR EACH STATEMENT EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER blob_chunk_append_only BEFORE UPDATE OR DELETE ON emend.blob_chunk
    FOR EACH ROW EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER blob_chunk_no_truncate BEFORE TRUNCATE ON emend.blob_chunk
    FOR EACH STATEMENT EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER commit_append_only BEFORE UPDATE OR DELETE ON emend.commit_log
    FOR EACH ROW EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER commit_no_truncate BEFORE TRUNCATE ON emend.commit_log
    FOR EACH STATEMENT EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER root_signer_append_only BEFORE UPDATE OR DELETE ON emend.root_signer
    FOR EACH ROW EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER root_signer_no_truncate BEFORE TRUNCATE ON emend.root_signer
    FOR EACH STATEMENT EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER receipt_append_only BEFORE UPDATE OR DELETE ON emend.receipt
    FOR EACH ROW EXECUTE FUNCTION emend.refuse_change();
CREATE TRIGGER receipt_no_truncate BEFORE TRUNCATE ON emend.receipt
    FOR EACH STATEMENT EXECUTE FUNCTION emend.refuse_change();

INSERT INTO emend.team (one) VALUES (true);
