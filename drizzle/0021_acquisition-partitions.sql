-- Issue 23, point 4 (second half): acquisitions and results partitioned by month, as
-- deliveries and attempts are (0019_monthly-partitions.sql: hand-written, one transaction,
-- rows copied and counted before the old tables go, ids unchanged, UTC months, a DEFAULT
-- partition). Acquisitions by created_at; results by their acquisition's created_at
-- (acquisition_created_at, in the foreign key), so an acquisition and every version of its
-- result share a month and a month of both is made (and could be dropped) together.
-- A lab's run ids stay unique across months in acquisition_runs (unpartitioned: a unique
-- index of a partitioned table must hold the partition key). Peaks, reprocess items,
-- sequence items and uploads stay unpartitioned and carry the acquisition's created_at in
-- composite foreign keys. The snapshot beside it is drizzle-kit's for the schema files.
ALTER TABLE "peaks" DROP CONSTRAINT "peaks_result_id_results_id_fk";--> statement-breakpoint
ALTER TABLE "uploads" DROP CONSTRAINT "uploads_acquisition_id_acquisitions_id_fk";--> statement-breakpoint
ALTER TABLE "sequence_items" DROP CONSTRAINT "sequence_items_acquisition_id_acquisitions_id_fk";--> statement-breakpoint
ALTER TABLE "reprocess_items" DROP CONSTRAINT "reprocess_items_acquisition_id_acquisitions_id_fk";--> statement-breakpoint
ALTER TABLE "reprocess_items" DROP CONSTRAINT "reprocess_items_old_result_id_results_id_fk";--> statement-breakpoint
ALTER TABLE "reprocess_items" DROP CONSTRAINT "reprocess_items_new_result_id_results_id_fk";--> statement-breakpoint
ALTER TABLE "results" RENAME TO "results_unpartitioned";--> statement-breakpoint
ALTER TABLE "acquisitions" RENAME TO "acquisitions_unpartitioned";--> statement-breakpoint
CREATE TABLE "acquisitions" (
	"id" uuid DEFAULT gen_random_uuid() NOT NULL,
	"lab_id" uuid NOT NULL,
	"instrument_id" uuid NOT NULL,
	"external_id" text NOT NULL,
	"acquired_at" timestamp with time zone NOT NULL,
	"sample_ref" text,
	"status" "acquisition_status" NOT NULL,
	"body_hash" text NOT NULL,
	"payload" jsonb,
	"raw_sha256" text,
	"raw_bytes" bigint,
	"raw_content_type" text,
	"arrays_sha256" text,
	"arrays_bytes" bigint,
	"raw_removed_at" timestamp with time zone,
	"point_count" integer NOT NULL,
	"submitted_by" uuid,
	"request_id" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
) PARTITION BY RANGE ("created_at");--> statement-breakpoint
CREATE TABLE "results" (
	"id" uuid DEFAULT gen_random_uuid() NOT NULL,
	"acquisition_id" uuid NOT NULL,
	"acquisition_created_at" timestamp with time zone NOT NULL,
	"lab_id" uuid NOT NULL,
	"geometry_version_id" uuid NOT NULL,
	"calibration_id" uuid,
	"engine_version" text NOT NULL,
	"summary" jsonb NOT NULL,
	"version" integer DEFAULT 1 NOT NULL,
	"supersedes" uuid,
	"superseded_by" uuid,
	"correction_reason" text,
	"reprocess_job_id" uuid,
	"review_state" "review_state" DEFAULT 'held' NOT NULL,
	"reviewed_by" uuid,
	"reviewed_at" timestamp with time zone,
	"review_comment" text,
	"released_at" timestamp with time zone,
	"retracted_by" uuid,
	"retracted_at" timestamp with time zone,
	"retraction_reason" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
) PARTITION BY RANGE ("acquisition_created_at");--> statement-breakpoint
CREATE TABLE "acquisition_runs" (
	"lab_id" uuid NOT NULL,
	"external_id" text NOT NULL,
	"acquisition_id" uuid NOT NULL,
	"acquisition_created_at" timestamp with time zone NOT NULL,
	CONSTRAINT "acquisition_runs_lab_id_external_id_pk" PRIMARY KEY("lab_id","external_id")
);--> statement-breakpoint
-- One partition per month from the oldest acquisition's month to two months after this one,
-- both tables alike (<table>_YYYY_MM), and each table's DEFAULT partition (as 0019).
DO $$
DECLARE
	first_month timestamp;
	last_month timestamp := date_trunc('month', now() AT TIME ZONE 'UTC') + interval '2 months';
	m timestamp;
	parent text;
BEGIN
	SELECT coalesce(date_trunc('month', min(created_at) AT TIME ZONE 'UTC'), last_month - interval '2 months')
		INTO first_month FROM acquisitions_unpartitioned;
	FOREACH parent IN ARRAY ARRAY['acquisitions', 'results'] LOOP
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
INSERT INTO "acquisitions" ("id", "lab_id", "instrument_id", "external_id", "acquired_at", "sample_ref", "status", "body_hash", "payload", "raw_sha256", "raw_bytes", "raw_content_type", "arrays_sha256", "arrays_bytes", "raw_removed_at", "point_count", "submitted_by", "request_id", "created_at")
	SELECT "id", "lab_id", "instrument_id", "external_id", "acquired_at", "sample_ref", "status", "body_hash", "payload", "raw_sha256", "raw_bytes", "raw_content_type", "arrays_sha256", "arrays_bytes", "raw_removed_at", "point_count", "submitted_by", "request_id", "created_at"
	FROM "acquisitions_unpartitioned";--> statement-breakpoint
-- Every old result has its acquisition (the old foreign key held), so the join loses none; the
-- counts below say so before anything is dropped.
INSERT INTO "results" ("id", "acquisition_id", "acquisition_created_at", "lab_id", "geometry_version_id", "calibration_id", "engine_version", "summary", "version", "supersedes", "superseded_by", "correction_reason", "reprocess_job_id", "review_state", "reviewed_by", "reviewed_at", "review_comment", "released_at", "retracted_by", "retracted_at", "retraction_reason", "created_at")
	SELECT r."id", r."acquisition_id", a."created_at", r."lab_id", r."geometry_version_id", r."calibration_id", r."engine_version", r."summary", r."version", r."supersedes", r."superseded_by", r."correction_reason", r."reprocess_job_id", r."review_state", r."reviewed_by", r."reviewed_at", r."review_comment", r."released_at", r."retracted_by", r."retracted_at", r."retraction_reason", r."created_at"
	FROM "results_unpartitioned" r JOIN "acquisitions_unpartitioned" a ON a."id" = r."acquisition_id";--> statement-breakpoint
-- The old unique index (lab_id, external_id) held, so every run id is taken once.
INSERT INTO "acquisition_runs" ("lab_id", "external_id", "acquisition_id", "acquisition_created_at")
	SELECT "lab_id", "external_id", "id", "created_at" FROM "acquisitions_unpartitioned";--> statement-breakpoint
-- The tables pointing at them get the acquisition's created_at. Peaks are the big one: their
-- indexes go and come back after the update (one build instead of an insert per row each).
DROP INDEX "peaks_mz_idx";--> statement-breakpoint
DROP INDEX "peaks_result_idx";--> statement-breakpoint
ALTER TABLE "peaks" ADD COLUMN "acquisition_created_at" timestamp with time zone;--> statement-breakpoint
UPDATE "peaks" p SET "acquisition_created_at" = a."created_at"
	FROM "results_unpartitioned" r JOIN "acquisitions_unpartitioned" a ON a."id" = r."acquisition_id" WHERE r."id" = p."result_id";--> statement-breakpoint
ALTER TABLE "peaks" ALTER COLUMN "acquisition_created_at" SET NOT NULL;--> statement-breakpoint
CREATE INDEX "peaks_mz_idx" ON "peaks" USING btree ("mz");--> statement-breakpoint
CREATE INDEX "peaks_result_idx" ON "peaks" USING btree ("result_id");--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD COLUMN "acquisition_created_at" timestamp with time zone;--> statement-breakpoint
UPDATE "reprocess_items" i SET "acquisition_created_at" = a."created_at" FROM "acquisitions_unpartitioned" a WHERE a."id" = i."acquisition_id";--> statement-breakpoint
ALTER TABLE "reprocess_items" ALTER COLUMN "acquisition_created_at" SET NOT NULL;--> statement-breakpoint
ALTER TABLE "sequence_items" ADD COLUMN "acquisition_created_at" timestamp with time zone;--> statement-breakpoint
UPDATE "sequence_items" i SET "acquisition_created_at" = a."created_at" FROM "acquisitions_unpartitioned" a WHERE a."id" = i."acquisition_id";--> statement-breakpoint
ALTER TABLE "sequence_items" ALTER COLUMN "acquisition_created_at" SET NOT NULL;--> statement-breakpoint
ALTER TABLE "uploads" ADD COLUMN "acquisition_created_at" timestamp with time zone;--> statement-breakpoint
UPDATE "uploads" u SET "acquisition_created_at" = a."created_at" FROM "acquisitions_unpartitioned" a WHERE a."id" = u."acquisition_id";--> statement-breakpoint
DO $$
BEGIN
	IF (SELECT count(*) FROM acquisitions) <> (SELECT count(*) FROM acquisitions_unpartitioned)
		OR (SELECT count(*) FROM results) <> (SELECT count(*) FROM results_unpartitioned)
		OR (SELECT count(*) FROM acquisition_runs) <> (SELECT count(*) FROM acquisitions_unpartitioned) THEN
		RAISE EXCEPTION 'acquisition partitions: row counts differ after the copy; nothing was changed';
	END IF;
END $$;--> statement-breakpoint
DROP TABLE "results_unpartitioned";--> statement-breakpoint
DROP TABLE "acquisitions_unpartitioned";--> statement-breakpoint
ALTER TABLE "acquisitions" ADD CONSTRAINT "acquisitions_id_created_at_pk" PRIMARY KEY("id","created_at");--> statement-breakpoint
ALTER TABLE "acquisitions" ADD CONSTRAINT "acquisitions_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "acquisitions" ADD CONSTRAINT "acquisitions_instrument_id_instruments_id_fk" FOREIGN KEY ("instrument_id") REFERENCES "public"."instruments"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "acquisitions_lab_created_idx" ON "acquisitions" USING btree ("lab_id","created_at","id");--> statement-breakpoint
CREATE INDEX "acquisitions_lab_acquired_idx" ON "acquisitions" USING btree ("lab_id","acquired_at","id");--> statement-breakpoint
CREATE INDEX "acquisitions_raw_sha_idx" ON "acquisitions" USING btree ("raw_sha256");--> statement-breakpoint
CREATE INDEX "acquisitions_arrays_sha_idx" ON "acquisitions" USING btree ("arrays_sha256");--> statement-breakpoint
ALTER TABLE "results" ADD CONSTRAINT "results_id_acquisition_created_at_pk" PRIMARY KEY("id","acquisition_created_at");--> statement-breakpoint
ALTER TABLE "results" ADD CONSTRAINT "results_acquisition_fk" FOREIGN KEY ("acquisition_id","acquisition_created_at") REFERENCES "public"."acquisitions"("id","created_at") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "results" ADD CONSTRAINT "results_supersedes_fk" FOREIGN KEY ("supersedes","acquisition_created_at") REFERENCES "public"."results"("id","acquisition_created_at") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "results" ADD CONSTRAINT "results_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "results" ADD CONSTRAINT "results_geometry_version_id_geometry_versions_id_fk" FOREIGN KEY ("geometry_version_id") REFERENCES "public"."geometry_versions"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "results" ADD CONSTRAINT "results_calibration_id_calibrations_id_fk" FOREIGN KEY ("calibration_id") REFERENCES "public"."calibrations"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE UNIQUE INDEX "results_acquisition_version_idx" ON "results" USING btree ("acquisition_id","version","acquisition_created_at");--> statement-breakpoint
CREATE INDEX "results_lab_review_idx" ON "results" USING btree ("lab_id","review_state","created_at");--> statement-breakpoint
ALTER TABLE "acquisition_runs" ADD CONSTRAINT "acquisition_runs_acquisition_fk" FOREIGN KEY ("acquisition_id","acquisition_created_at") REFERENCES "public"."acquisitions"("id","created_at") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "peaks" ADD CONSTRAINT "peaks_result_fk" FOREIGN KEY ("result_id","acquisition_created_at") REFERENCES "public"."results"("id","acquisition_created_at") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "uploads" ADD CONSTRAINT "uploads_acquisition_fk" FOREIGN KEY ("acquisition_id","acquisition_created_at") REFERENCES "public"."acquisitions"("id","created_at") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sequence_items" ADD CONSTRAINT "sequence_items_acquisition_fk" FOREIGN KEY ("acquisition_id","acquisition_created_at") REFERENCES "public"."acquisitions"("id","created_at") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD CONSTRAINT "reprocess_items_acquisition_fk" FOREIGN KEY ("acquisition_id","acquisition_created_at") REFERENCES "public"."acquisitions"("id","created_at") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD CONSTRAINT "reprocess_items_old_result_fk" FOREIGN KEY ("old_result_id","acquisition_created_at") REFERENCES "public"."results"("id","acquisition_created_at") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD CONSTRAINT "reprocess_items_new_result_fk" FOREIGN KEY ("new_result_id","acquisition_created_at") REFERENCES "public"."results"("id","acquisition_created_at") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ANALYZE "acquisitions";--> statement-breakpoint
ANALYZE "results";--> statement-breakpoint
ANALYZE "acquisition_runs";--> statement-breakpoint
ANALYZE "peaks";
