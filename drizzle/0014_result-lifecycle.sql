CREATE TYPE "public"."release_policy" AS ENUM('review', 'auto');--> statement-breakpoint
CREATE TYPE "public"."review_state" AS ENUM('held', 'released', 'rejected', 'retracted');--> statement-breakpoint
CREATE TYPE "public"."certificate_subject" AS ENUM('result', 'sequence');--> statement-breakpoint
CREATE TYPE "public"."reprocess_item_state" AS ENUM('pending', 'done', 'failed');--> statement-breakpoint
CREATE TYPE "public"."reprocess_job_state" AS ENUM('queued', 'running', 'done', 'failed', 'cancelled');--> statement-breakpoint
ALTER TYPE "public"."role" ADD VALUE 'lab_reviewer' BEFORE 'integrator';--> statement-breakpoint
CREATE TABLE "certificates" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"number" text NOT NULL,
	"lab_id" uuid NOT NULL,
	"subject" "certificate_subject" NOT NULL,
	"subject_id" uuid NOT NULL,
	"canonical" text NOT NULL,
	"jws" text NOT NULL,
	"kid" text NOT NULL,
	"issued_by" uuid,
	"issued_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "certificates_number_unique" UNIQUE("number")
);
--> statement-breakpoint
CREATE TABLE "reprocess_items" (
	"job_id" uuid NOT NULL,
	"acquisition_id" uuid NOT NULL,
	"ord" integer NOT NULL,
	"state" "reprocess_item_state" DEFAULT 'pending' NOT NULL,
	"old_result_id" uuid,
	"new_result_id" uuid,
	"changed" boolean,
	"error" text,
	"done_at" timestamp with time zone,
	CONSTRAINT "reprocess_items_job_id_acquisition_id_pk" PRIMARY KEY("job_id","acquisition_id")
);
--> statement-breakpoint
CREATE TABLE "reprocess_jobs" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"lab_id" uuid NOT NULL,
	"instrument_id" uuid NOT NULL,
	"selection" jsonb NOT NULL,
	"reason" text NOT NULL,
	"state" "reprocess_job_state" DEFAULT 'queued' NOT NULL,
	"total" integer DEFAULT 0 NOT NULL,
	"processed" integer DEFAULT 0 NOT NULL,
	"changed" integer DEFAULT 0 NOT NULL,
	"failed" integer DEFAULT 0 NOT NULL,
	"created_by" uuid,
	"lease_owner" text,
	"lease_until" timestamp with time zone,
	"error" text,
	"started_at" timestamp with time zone,
	"finished_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
ALTER TABLE "users" DROP CONSTRAINT "users_role_scope";--> statement-breakpoint
DROP INDEX "results_acquisition_idx";--> statement-breakpoint
ALTER TABLE "acquisitions" ADD COLUMN "submitted_by" uuid;--> statement-breakpoint
ALTER TABLE "labs" ADD COLUMN "release_policy" "release_policy" DEFAULT 'review' NOT NULL;--> statement-breakpoint
ALTER TABLE "labs" ADD COLUMN "auto_release_allows" text[] DEFAULT '{}'::text[] NOT NULL;--> statement-breakpoint
ALTER TABLE "labs" ADD COLUMN "four_eyes" boolean DEFAULT false NOT NULL;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "version" integer DEFAULT 1 NOT NULL;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "supersedes" uuid;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "correction_reason" text;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "reprocess_job_id" uuid;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "review_state" "review_state" DEFAULT 'held' NOT NULL;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "reviewed_by" uuid;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "reviewed_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "review_comment" text;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "released_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "retracted_by" uuid;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "retracted_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "results" ADD COLUMN "retraction_reason" text;--> statement-breakpoint
ALTER TABLE "methods" ADD COLUMN "release_policy" "release_policy";--> statement-breakpoint
ALTER TABLE "methods" ADD COLUMN "created_by" uuid;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "review_state" "review_state" DEFAULT 'held' NOT NULL;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "reviewed_by" uuid;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "reviewed_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "review_comment" text;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "released_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "retracted_by" uuid;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "retracted_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "sequences" ADD COLUMN "retraction_reason" text;--> statement-breakpoint
ALTER TABLE "certificates" ADD CONSTRAINT "certificates_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD CONSTRAINT "reprocess_items_job_id_reprocess_jobs_id_fk" FOREIGN KEY ("job_id") REFERENCES "public"."reprocess_jobs"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD CONSTRAINT "reprocess_items_acquisition_id_acquisitions_id_fk" FOREIGN KEY ("acquisition_id") REFERENCES "public"."acquisitions"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD CONSTRAINT "reprocess_items_old_result_id_results_id_fk" FOREIGN KEY ("old_result_id") REFERENCES "public"."results"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_items" ADD CONSTRAINT "reprocess_items_new_result_id_results_id_fk" FOREIGN KEY ("new_result_id") REFERENCES "public"."results"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_jobs" ADD CONSTRAINT "reprocess_jobs_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "reprocess_jobs" ADD CONSTRAINT "reprocess_jobs_instrument_id_instruments_id_fk" FOREIGN KEY ("instrument_id") REFERENCES "public"."instruments"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE UNIQUE INDEX "certificates_subject_idx" ON "certificates" USING btree ("subject","subject_id");--> statement-breakpoint
CREATE INDEX "certificates_lab_idx" ON "certificates" USING btree ("lab_id","issued_at");--> statement-breakpoint
CREATE INDEX "reprocess_items_pending_idx" ON "reprocess_items" USING btree ("job_id","state","ord");--> statement-breakpoint
CREATE UNIQUE INDEX "reprocess_jobs_one_per_instrument_idx" ON "reprocess_jobs" USING btree ("instrument_id") WHERE "reprocess_jobs"."state" in ('queued', 'running');--> statement-breakpoint
CREATE INDEX "reprocess_jobs_lab_created_idx" ON "reprocess_jobs" USING btree ("lab_id","created_at");--> statement-breakpoint
CREATE INDEX "reprocess_jobs_state_idx" ON "reprocess_jobs" USING btree ("state","created_at");--> statement-breakpoint
ALTER TABLE "results" ADD CONSTRAINT "results_supersedes_results_id_fk" FOREIGN KEY ("supersedes") REFERENCES "public"."results"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE UNIQUE INDEX "results_acquisition_version_idx" ON "results" USING btree ("acquisition_id","version");--> statement-breakpoint
CREATE INDEX "results_lab_review_idx" ON "results" USING btree ("lab_id","review_state","created_at");--> statement-breakpoint
ALTER TABLE "users" ADD CONSTRAINT "users_role_scope" CHECK (("users"."role"::text in ('lab_manager', 'lab_reviewer')) = ("users"."lab_id" is not null) and ("users"."role" = 'integrator') = ("users"."partner_id" is not null));--> statement-breakpoint
-- Everything computed before review existed was already delivered to partners: it stays
-- visible to them, marked released at the time it was computed, by nobody (automatic).
UPDATE "results" SET "review_state" = 'released', "released_at" = "created_at";--> statement-breakpoint
UPDATE "sequences" SET "review_state" = 'released', "released_at" = coalesce("processed_at", "created_at") WHERE "status" = 'processed';--> statement-breakpoint
-- Results now reach partners when released: `result.created` becomes `result.released`, and
-- whoever received results also receives their corrections and retractions.
UPDATE "grants" SET "event_types" = array_cat(array_remove("event_types", 'result.created'), ARRAY['result.released', 'result.corrected', 'result.retracted']) WHERE 'result.created' = any("event_types");--> statement-breakpoint
UPDATE "webhook_endpoints" SET "event_types" = array_cat(array_remove("event_types", 'result.created'), ARRAY['result.released', 'result.corrected', 'result.retracted']) WHERE 'result.created' = any("event_types");
