CREATE TYPE "public"."schema_status" AS ENUM('current', 'deprecated', 'retired');--> statement-breakpoint
CREATE TABLE "exchange_schemas" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"name" text NOT NULL,
	"version" integer NOT NULL,
	"status" "schema_status" DEFAULT 'current' NOT NULL,
	"json_schema" jsonb NOT NULL,
	"deprecated_at" timestamp with time zone,
	"sunset_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "schema_usage" (
	"schema_id" uuid NOT NULL,
	"lab_id" uuid NOT NULL,
	"uses" bigint DEFAULT 0 NOT NULL,
	"last_used_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "schema_usage_schema_id_lab_id_pk" PRIMARY KEY("schema_id","lab_id")
);
--> statement-breakpoint
ALTER TABLE "schema_usage" ADD CONSTRAINT "schema_usage_schema_id_exchange_schemas_id_fk" FOREIGN KEY ("schema_id") REFERENCES "public"."exchange_schemas"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "schema_usage" ADD CONSTRAINT "schema_usage_lab_id_labs_id_fk" FOREIGN KEY ("lab_id") REFERENCES "public"."labs"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE UNIQUE INDEX "exchange_schemas_name_version_idx" ON "exchange_schemas" USING btree ("name","version");