DROP INDEX "deliveries_due_idx";--> statement-breakpoint
CREATE INDEX "deliveries_endpoint_due_idx" ON "deliveries" USING btree ("endpoint_id","next_attempt_at") WHERE status = 'pending';--> statement-breakpoint
-- Room on each page for the claim's update of a delivery's lease (no indexed column changes),
-- so PostgreSQL can make it a heap-only update instead of new entries in every index.
ALTER TABLE "deliveries" SET (fillfactor = 70);
