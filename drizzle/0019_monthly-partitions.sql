-- Issue 23, point 4: deliveries and delivery_attempts partitioned by month (PostgreSQL
-- declarative partitioning, RANGE on the delivery's created_at, months in UTC). Written by
-- hand: drizzle-kit cannot say PARTITION BY; the snapshot beside it is drizzle-kit's for the
-- schema files (composite primary keys, the attempts' composite foreign key), so a later
-- `drizzle-kit generate` finds nothing to do. The drizzle migrator runs this in one
-- transaction: the rows are copied into the new tables and counted before the old ones go,
-- and any failure leaves the database as it was. Ids do not change (partners' webhook-ids).
-- Months after the current one are made by server/services/partitions (worker processes and
-- `npm run db:partitions`); a DEFAULT partition takes any row no month holds, so no insert fails.
ALTER TABLE "delivery_attempts" RENAME TO "delivery_attempts_unpartitioned";--> statement-breakpoint
ALTER TABLE "deliveries" RENAME TO "deliveries_unpartitioned";--> statement-breakpoint
CREATE TABLE "deliveries" (
	"id" uuid DEFAULT gen_random_uuid() NOT NULL,
	"endpoint_id" uuid NOT NULL,
	"event_id" uuid,
	"event_type" text NOT NULL,
	"test_payload" jsonb,
	"status" "delivery_status" DEFAULT 'pending' NOT NULL,
	"replay_requested" boolean DEFAULT false NOT NULL,
	"attempts" integer DEFAULT 0 NOT NULL,
	"next_attempt_at" timestamp with time zone DEFAULT now() NOT NULL,
	"lease_owner" text,
	"lease_until" timestamp with time zone,
	"last_class" text,
	"last_status_code" integer,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"finished_at" timestamp with time zone
) PARTITION BY RANGE ("created_at");--> statement-breakpoint
CREATE TABLE "delivery_attempts" (
	"id" bigint NOT NULL,
	"delivery_id" uuid NOT NULL,
	"delivery_created_at" timestamp with time zone NOT NULL,
	"number" integer NOT NULL,
	"at" timestamp with time zone DEFAULT now() NOT NULL,
	"duration_ms" integer NOT NULL,
	"class" text NOT NULL,
	"status_code" integer,
	"error" text,
	"response_excerpt" text,
	"request_headers" jsonb NOT NULL,
	"request_body" text,
	"replay" boolean DEFAULT false NOT NULL
) PARTITION BY RANGE ("delivery_created_at");--> statement-breakpoint
-- The attempts' id sequence (bigserial) moves to the new column, so dropping the old table
-- keeps it and numbering carries on.
ALTER TABLE "delivery_attempts" ALTER COLUMN "id" SET DEFAULT nextval('delivery_attempts_id_seq');--> statement-breakpoint
ALTER SEQUENCE "delivery_attempts_id_seq" OWNED BY "delivery_attempts"."id";--> statement-breakpoint
-- One partition per month from the oldest delivery's month to two months after this one,
-- both tables alike (partitions named <table>_YYYY_MM), and each table's DEFAULT partition.
DO $$
DECLARE
	first_month timestamp;
	last_month timestamp := date_trunc('month', now() AT TIME ZONE 'UTC') + interval '2 months';
	m timestamp;
	parent text;
BEGIN
	SELECT coalesce(date_trunc('month', min(created_at) AT TIME ZONE 'UTC'), last_month - interval '2 months')
		INTO first_month FROM deliveries_unpartitioned;
	FOREACH parent IN ARRAY ARRAY['deliveries', 'delivery_attempts'] LOOP
		m := first_month;
		WHILE m <= last_month LOOP
			EXECUTE format('CREATE TABLE %I PARTITION OF %I FOR VALUES FROM (%L) TO (%L)',
				parent || '_' || to_char(m, 'YYYY_MM'), parent,
				to_char(m, 'YYYY-MM-DD') || ' 00:00:00+00', to_char(m + interval '1 month', 'YYYY-MM-DD') || ' 00:00:00+00');
			m := m + interval '1 month';
		END LOOP;
		EXECUTE format('CREATE TABLE %I PARTITION OF %I DEFAULT', parent || '_default', parent);
	END LOOP;
END $$;--> statement-breakpoint
INSERT INTO "deliveries" ("id", "endpoint_id", "event_id", "event_type", "test_payload", "status", "replay_requested", "attempts", "next_attempt_at", "lease_owner", "lease_until", "last_class", "last_status_code", "created_at", "finished_at")
	SELECT "id", "endpoint_id", "event_id", "event_type", "test_payload", "status", "replay_requested", "attempts", "next_attempt_at", "lease_owner", "lease_until", "last_class", "last_status_code", "created_at", "finished_at"
	FROM "deliveries_unpartitioned";--> statement-breakpoint
-- Every old attempt has its delivery (the old foreign key held), so the join loses none; the
-- counts below say so before anything is dropped.
INSERT INTO "delivery_attempts" ("id", "delivery_id", "delivery_created_at", "number", "at", "duration_ms", "class", "status_code", "error", "response_excerpt", "request_headers", "request_body", "replay")
	SELECT a."id", a."delivery_id", d."created_at", a."number", a."at", a."duration_ms", a."class", a."status_code", a."error", a."response_excerpt", a."request_headers", a."request_body", a."replay"
	FROM "delivery_attempts_unpartitioned" a JOIN "deliveries_unpartitioned" d ON d."id" = a."delivery_id";--> statement-breakpoint
DO $$
BEGIN
	IF (SELECT count(*) FROM deliveries) <> (SELECT count(*) FROM deliveries_unpartitioned)
		OR (SELECT count(*) FROM delivery_attempts) <> (SELECT count(*) FROM delivery_attempts_unpartitioned) THEN
		RAISE EXCEPTION 'monthly partitions: row counts differ after the copy; nothing was changed';
	END IF;
END $$;--> statement-breakpoint
DROP TABLE "delivery_attempts_unpartitioned";--> statement-breakpoint
DROP TABLE "deliveries_unpartitioned";--> statement-breakpoint
ALTER TABLE "deliveries" ADD CONSTRAINT "deliveries_id_created_at_pk" PRIMARY KEY("id","created_at");--> statement-breakpoint
ALTER TABLE "deliveries" ADD CONSTRAINT "deliveries_endpoint_id_webhook_endpoints_id_fk" FOREIGN KEY ("endpoint_id") REFERENCES "public"."webhook_endpoints"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "deliveries" ADD CONSTRAINT "deliveries_event_id_events_id_fk" FOREIGN KEY ("event_id") REFERENCES "public"."events"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "deliveries_endpoint_due_idx" ON "deliveries" USING btree ("endpoint_id","next_attempt_at") WHERE status = 'pending';--> statement-breakpoint
CREATE INDEX "deliveries_endpoint_leased_idx" ON "deliveries" USING btree ("endpoint_id","lease_until") WHERE status = 'pending' and lease_until is not null;--> statement-breakpoint
CREATE INDEX "deliveries_endpoint_order_idx" ON "deliveries" USING btree ("endpoint_id","created_at") WHERE status = 'pending';--> statement-breakpoint
CREATE INDEX "deliveries_endpoint_idx" ON "deliveries" USING btree ("endpoint_id","created_at");--> statement-breakpoint
CREATE UNIQUE INDEX "deliveries_event_endpoint_idx" ON "deliveries" USING btree ("event_id","endpoint_id","created_at");--> statement-breakpoint
ALTER TABLE "delivery_attempts" ADD CONSTRAINT "delivery_attempts_id_delivery_created_at_pk" PRIMARY KEY("id","delivery_created_at");--> statement-breakpoint
ALTER TABLE "delivery_attempts" ADD CONSTRAINT "delivery_attempts_delivery_fk" FOREIGN KEY ("delivery_id","delivery_created_at") REFERENCES "public"."deliveries"("id","created_at") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "delivery_attempts_delivery_idx" ON "delivery_attempts" USING btree ("delivery_id","number");--> statement-breakpoint
ANALYZE "deliveries";--> statement-breakpoint
ANALYZE "delivery_attempts";
