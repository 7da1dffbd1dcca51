-- result-event v1 does not describe processed sequences: it is deprecated, with a sunset, in a
-- registry that has it (a new registry starts it deprecated, shared/schemas/exchange.ts).
UPDATE "exchange_schemas" SET "status" = 'deprecated', "deprecated_at" = now(), "sunset_at" = '2027-06-30T00:00:00Z'
WHERE "name" = 'result-event' AND "version" = 1 AND "status" = 'current';--> statement-breakpoint
-- A lab that shares its results with a partner shares them normalised too: the same results,
-- on the international scale once their sequence is processed.
UPDATE "grants" SET "event_types" = array_append("event_types", 'sequence.processed')
WHERE 'result.created' = ANY("event_types") AND NOT ('sequence.processed' = ANY("event_types"));
