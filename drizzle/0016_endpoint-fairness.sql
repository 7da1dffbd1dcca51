ALTER TABLE "webhook_endpoints" ADD COLUMN "max_in_flight" integer;--> statement-breakpoint
ALTER TABLE "webhook_endpoints" ADD COLUMN "rate_per_second" double precision;--> statement-breakpoint
ALTER TABLE "webhook_endpoints" ADD COLUMN "rate_next_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "webhook_endpoints" ADD COLUMN "ordered" boolean DEFAULT false NOT NULL;--> statement-breakpoint
ALTER TABLE "webhook_endpoints" ADD COLUMN "blocked_until" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "webhook_endpoints" ADD COLUMN "consecutive_failures" integer DEFAULT 0 NOT NULL;--> statement-breakpoint
CREATE INDEX "deliveries_endpoint_leased_idx" ON "deliveries" USING btree ("endpoint_id","lease_until") WHERE status = 'pending' and lease_until is not null;--> statement-breakpoint
CREATE INDEX "deliveries_endpoint_order_idx" ON "deliveries" USING btree ("endpoint_id","created_at") WHERE status = 'pending';