-- porewise schema, version 3: outlier review.
--
-- A flag names the check (rule) that raised it, so a refreshed check finds its own open
-- suggestion instead of raising a second one, and says who made its last decision (the user
-- or the checks). Every status a flag takes is kept in flag_event, the audit trail: triggers
-- write it, so no code path can change a flag's status without leaving a record, and neither
-- flags nor their events can be deleted or rewritten.

-- The check that raised the flag: 'leave-one-out', 'saturation', 'monotonic', 'manual', or a
-- logger check. NULL on flags from version 2.
ALTER TABLE flag ADD COLUMN rule TEXT CHECK (rule IS NULL OR length(rule) > 0);
-- Who made the last status change: 'user' or 'checks' (a suggestion the checks withdrew).
ALTER TABLE flag ADD COLUMN decided_by TEXT CHECK (decided_by IS NULL OR decided_by IN ('user', 'checks'));

CREATE INDEX flag_reading_rule ON flag (reading_id, rule) WHERE reading_id IS NOT NULL;

-- One row per status a flag took: its creation (from_status NULL) and every change after.
CREATE TABLE flag_event (
    id INTEGER PRIMARY KEY,
    flag_id INTEGER NOT NULL REFERENCES flag (id),
    from_status TEXT CHECK (from_status IS NULL
        OR from_status IN ('suggested', 'accepted', 'dismissed', 'cleared')),
    to_status TEXT NOT NULL CHECK (to_status IN ('suggested', 'accepted', 'dismissed', 'cleared')),
    actor TEXT NOT NULL CHECK (actor IN ('user', 'checks')),
    note TEXT,
    at TEXT NOT NULL CHECK (julianday(at) IS NOT NULL)
) STRICT;
CREATE INDEX flag_event_flag ON flag_event (flag_id, id);

-- Flags of version 2 get one event: their creation with the status they have now.
INSERT INTO flag_event (flag_id, from_status, to_status, actor, note, at)
SELECT id, NULL, status,
       CASE WHEN origin = 'manual' OR status <> 'suggested' THEN 'user' ELSE 'checks' END,
       note, coalesce(decided_at, created_at)
FROM flag ORDER BY id;

CREATE TRIGGER flag_insert_logs_event AFTER INSERT ON flag BEGIN
    INSERT INTO flag_event (flag_id, from_status, to_status, actor, note, at)
    VALUES (NEW.id, NULL, NEW.status,
            coalesce(NEW.decided_by, CASE NEW.origin WHEN 'manual' THEN 'user' ELSE 'checks' END),
            NEW.note, coalesce(NEW.decided_at, NEW.created_at));
END;
CREATE TRIGGER flag_status_logs_event AFTER UPDATE OF status ON flag
WHEN NEW.status <> OLD.status BEGIN
    INSERT INTO flag_event (flag_id, from_status, to_status, actor, note, at)
    VALUES (NEW.id, OLD.status, NEW.status, coalesce(NEW.decided_by, 'user'), NEW.note,
            coalesce(NEW.decided_at, strftime('%Y-%m-%dT%H:%M:%SZ', 'now')));
END;
CREATE TRIGGER flag_is_never_deleted BEFORE DELETE ON flag BEGIN
    SELECT RAISE(ABORT, 'flags are never deleted: change their status instead');
END;
CREATE TRIGGER flag_event_is_never_changed BEFORE UPDATE ON flag_event BEGIN
    SELECT RAISE(ABORT, 'the flag audit trail is append-only');
END;
CREATE TRIGGER flag_event_is_never_deleted BEFORE DELETE ON flag_event BEGIN
    SELECT RAISE(ABORT, 'the flag audit trail is append-only');
END;
