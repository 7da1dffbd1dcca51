-- The audit log is append-only for the app: rows are inserted, never changed or removed.
-- A retention purge is an operator's act: the table owner disables the triggers for it
-- (ALTER TABLE audit_log DISABLE TRIGGER USER), purges, and enables them again.
CREATE FUNCTION "audit_log_refuse_change"() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  RAISE EXCEPTION 'audit_log is append-only: % refused', TG_OP USING ERRCODE = 'insufficient_privilege';
END
$$;--> statement-breakpoint
CREATE TRIGGER "audit_log_no_update_delete" BEFORE UPDATE OR DELETE ON "audit_log"
  FOR EACH ROW EXECUTE FUNCTION "audit_log_refuse_change"();--> statement-breakpoint
CREATE TRIGGER "audit_log_no_truncate" BEFORE TRUNCATE ON "audit_log"
  FOR EACH STATEMENT EXECUTE FUNCTION "audit_log_refuse_change"();
