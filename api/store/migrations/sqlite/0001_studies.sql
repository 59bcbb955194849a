-- Study records: studies, their tags, revisions (0 is the study as saved)
-- and signatures. Times are microseconds since 1970-01-01 UTC. Records are
-- never changed or deleted; the triggers refuse it.
CREATE TABLE studies (
	id           TEXT PRIMARY KEY,
	kind         TEXT NOT NULL,
	label        TEXT NOT NULL,
	created      INTEGER NOT NULL,
	who          TEXT NOT NULL,
	input        BLOB NOT NULL,
	content_type TEXT NOT NULL,
	query        TEXT NOT NULL,
	input_sha256 BLOB NOT NULL,
	options      BLOB NOT NULL,
	seed         INTEGER NOT NULL,
	version      TEXT NOT NULL,
	vcs_revision TEXT NOT NULL,
	result       BLOB NOT NULL
);
CREATE INDEX studies_created ON studies (created DESC, id DESC);
CREATE INDEX studies_kind ON studies (kind, created DESC, id DESC);
CREATE INDEX studies_label ON studies (label, created DESC, id DESC);

CREATE TABLE study_tags (
	study_id TEXT NOT NULL REFERENCES studies (id),
	key      TEXT NOT NULL,
	value    TEXT NOT NULL,
	created  INTEGER NOT NULL, -- the study's, so that a tag's index lists newest first
	PRIMARY KEY (study_id, key)
);
CREATE INDEX study_tags_pair ON study_tags (key, value, created DESC, study_id DESC);

CREATE TABLE revisions (
	study_id  TEXT NOT NULL REFERENCES studies (id),
	number    INTEGER NOT NULL,
	based_on  INTEGER NOT NULL,
	reason    TEXT NOT NULL,
	who       TEXT NOT NULL,
	at        INTEGER NOT NULL,
	change    BLOB NOT NULL,
	result    BLOB, -- NULL for revision 0: the study's result
	prev_hash BLOB NOT NULL,
	hash      BLOB NOT NULL,
	PRIMARY KEY (study_id, number)
);

CREATE TABLE signatures (
	study_id      TEXT NOT NULL,
	revision      INTEGER NOT NULL,
	meaning       TEXT NOT NULL,
	signer        TEXT NOT NULL,
	at            INTEGER NOT NULL,
	comment       TEXT NOT NULL,
	revision_hash BLOB NOT NULL,
	PRIMARY KEY (study_id, revision, meaning, signer),
	FOREIGN KEY (study_id, revision) REFERENCES revisions (study_id, number)
);

CREATE TRIGGER studies_no_update BEFORE UPDATE ON studies BEGIN SELECT RAISE(ABORT, 'study records are never changed'); END;
CREATE TRIGGER studies_no_delete BEFORE DELETE ON studies BEGIN SELECT RAISE(ABORT, 'study records are never deleted'); END;
CREATE TRIGGER study_tags_no_update BEFORE UPDATE ON study_tags BEGIN SELECT RAISE(ABORT, 'study records are never changed'); END;
CREATE TRIGGER study_tags_no_delete BEFORE DELETE ON study_tags BEGIN SELECT RAISE(ABORT, 'study records are never deleted'); END;
CREATE TRIGGER revisions_no_update BEFORE UPDATE ON revisions BEGIN SELECT RAISE(ABORT, 'study records are never changed'); END;
CREATE TRIGGER revisions_no_delete BEFORE DELETE ON revisions BEGIN SELECT RAISE(ABORT, 'study records are never deleted'); END;
CREATE TRIGGER signatures_no_update BEFORE UPDATE ON signatures BEGIN SELECT RAISE(ABORT, 'study records are never changed'); END;
CREATE TRIGGER signatures_no_delete BEFORE DELETE ON signatures BEGIN SELECT RAISE(ABORT, 'study records are never deleted'); END;
