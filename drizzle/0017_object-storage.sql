CREATE TABLE "store_objects" (
	"key" text PRIMARY KEY NOT NULL,
	"bytes" bigint NOT NULL,
	"claimed_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
ALTER TABLE "acquisitions" ALTER COLUMN "payload" DROP NOT NULL;--> statement-breakpoint
ALTER TABLE "uploads" ALTER COLUMN "body" DROP NOT NULL;--> statement-breakpoint
ALTER TABLE "labs" ADD COLUMN "raw_retention_days" integer;--> statement-breakpoint
ALTER TABLE "acquisitions" ADD COLUMN "raw_sha256" text;--> statement-breakpoint
ALTER TABLE "acquisitions" ADD COLUMN "raw_bytes" bigint;--> statement-breakpoint
ALTER TABLE "acquisitions" ADD COLUMN "raw_content_type" text;--> statement-breakpoint
ALTER TABLE "acquisitions" ADD COLUMN "arrays_sha256" text;--> statement-breakpoint
ALTER TABLE "acquisitions" ADD COLUMN "arrays_bytes" bigint;--> statement-breakpoint
ALTER TABLE "acquisitions" ADD COLUMN "raw_removed_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "uploads" ADD COLUMN "raw_sha256" text;--> statement-breakpoint
ALTER TABLE "uploads" ADD COLUMN "raw_bytes" bigint;--> statement-breakpoint
ALTER TABLE "uploads" ADD COLUMN "raw_content_type" text;--> statement-breakpoint
ALTER TABLE "uploads" ADD COLUMN "arrays_sha256" text;--> statement-breakpoint
ALTER TABLE "uploads" ADD COLUMN "arrays_bytes" bigint;--> statement-breakpoint
CREATE INDEX "acquisitions_raw_sha_idx" ON "acquisitions" USING btree ("raw_sha256");--> statement-breakpoint
CREATE INDEX "acquisitions_arrays_sha_idx" ON "acquisitions" USING btree ("arrays_sha256");