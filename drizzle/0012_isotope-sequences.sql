CREATE TYPE "public"."sequence_status" AS ENUM('open', 'closed', 'processed', 'failed');--> statement-breakpoint
CREATE TABLE "control_points" (
	"id" bigserial PRIMARY KEY NOT NULL,
	"lab_id" uuid NOT NULL,
	"instrument_id" uuid NOT NULL,
	"material" text NOT NULL,
	"quantity" text NOT NULL,
	"at" timestamp with time zone NOT NULL,
	"value" double precision NOT NULL,
	"accepted" double precision NOT NULL,
	"u" double precision NOT NULL,
	"sequence_id" uuid,
	"position" integer,
	"violations" text[] DEFAULT '{}'::text[] NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "methods" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"instrument_id" uuid NOT NULL,
	"version" integer NOT NULL,
	"name" text NOT NULL,
	"definition" jsonb NOT NULL,
	"valid_from" timestamp with time zone NOT NULL,
	"note" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "reference_materials" (
	"id" text PRIMARY KEY NOT NULL,
	"name" text NOT NULL,
	"values" jsonb NOT NULL,
	"source" text NOT NULL,
	"from_memory" boolean DEFAULT false NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "sequence_items" (
	"sequence_id" uuid NOT NULL,
	"position" integer NOT NULL,
	"acquisition_id" uuid NOT NULL,
	"role" text NOT NULL,
	"material" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "sequence_items_sequence_id_position_pk" PRIMARY KEY("sequence_id","position")
);
--> statement-breakpoint
CREATE TABLE "sequences" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"lab_id" uuid NOT NULL,
	"instrument_id" uuid NOT NULL,
	"external_id" text NOT NULL,
	"declared_length" integer,
	"status" "sequence_status" DEFAULT 'open' NOT NULL,
	"requested_method_version" integer,
	"method_id" uuid,
	"body_hash" text NOT NULL,
	"outcome" jsonb,
	"failure" jsonb,
	"flagged" boolean DEFAULT false NOT NULL,
	"closed_at" timestamp with time zone,
	"processed_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "sequences_declared_length" CHECK ("sequences"."declared_length" is null or "sequences"."declared_length" between 1 and 2000)
);
--> statement-breakpoint
CREATE TABLE "working_standards" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"lab_id" uuid NOT NULL,
	"code" text NOT NULL,
	"version" integer NOT NULL,
	"name" text NOT NULL,
	"values" jsonb NOT NULL,
	"calibrated_against" text[] NOT NULL,
	"valid_from" timestamp with time zone NOT NULL,
	"valid_to" timestamp with time zone,
	"note" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
ALTER TABLE "control_points" ADD CONSTRAINT "control_points_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "control_points" ADD CONSTRAINT "control_points_instrument_id_instruments_id_fk" FOREIGN KEY ("instrument_id") REFERENCES "public"."instruments"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "control_points" ADD CONSTRAINT "control_points_sequence_id_sequences_id_fk" FOREIGN KEY ("sequence_id") REFERENCES "public"."sequences"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "methods" ADD CONSTRAINT "methods_instrument_id_instruments_id_fk" FOREIGN KEY ("instrument_id") REFERENCES "public"."instruments"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sequence_items" ADD CONSTRAINT "sequence_items_sequence_id_sequences_id_fk" FOREIGN KEY ("sequence_id") REFERENCES "public"."sequences"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sequence_items" ADD CONSTRAINT "sequence_items_acquisition_id_acquisitions_id_fk" FOREIGN KEY ("acquisition_id") REFERENCES "public"."acquisitions"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sequences" ADD CONSTRAINT "sequences_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sequences" ADD CONSTRAINT "sequences_instrument_id_instruments_id_fk" FOREIGN KEY ("instrument_id") REFERENCES "public"."instruments"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sequences" ADD CONSTRAINT "sequences_method_id_methods_id_fk" FOREIGN KEY ("method_id") REFERENCES "public"."methods"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "working_standards" ADD CONSTRAINT "working_standards_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "control_points_chart_idx" ON "control_points" USING btree ("instrument_id","material","quantity","at");--> statement-breakpoint
CREATE INDEX "control_points_sequence_idx" ON "control_points" USING btree ("sequence_id");--> statement-breakpoint
CREATE UNIQUE INDEX "methods_instrument_version_idx" ON "methods" USING btree ("instrument_id","version");--> statement-breakpoint
CREATE INDEX "methods_valid_idx" ON "methods" USING btree ("instrument_id","valid_from");--> statement-breakpoint
CREATE UNIQUE INDEX "sequence_items_acquisition_idx" ON "sequence_items" USING btree ("acquisition_id");--> statement-breakpoint
CREATE UNIQUE INDEX "sequences_lab_external_idx" ON "sequences" USING btree ("lab_id","external_id");--> statement-breakpoint
CREATE INDEX "sequences_lab_created_idx" ON "sequences" USING btree ("lab_id","created_at","id");--> statement-breakpoint
CREATE INDEX "sequences_instrument_idx" ON "sequences" USING btree ("instrument_id","created_at");--> statement-breakpoint
CREATE UNIQUE INDEX "working_standards_lab_code_version_idx" ON "working_standards" USING btree ("lab_id","code","version");--> statement-breakpoint
CREATE INDEX "working_standards_valid_idx" ON "working_standards" USING btree ("lab_id","code","valid_from");